// Superoperator assembly and steady state of the Lindblad master equation.
#include "engine/master/liouvillian.h"

#include <Eigen/SparseLU>

#include "engine/common/errors.h"

namespace flyby::master {

namespace {

// Kronecker product of sparse matrices, (a ⊗ b)[(i·rb + k), (j·cb + l)] = a[i,j] b[k,l].
SparseCol kron(const SparseCol& a, const SparseCol& b) {
  std::vector<Eigen::Triplet<Complex>> t;
  t.reserve(std::size_t(a.nonZeros() * b.nonZeros()));
  for (int ka = 0; ka < a.outerSize(); ++ka)
    for (SparseCol::InnerIterator ia(a, ka); ia; ++ia)
      for (int kb = 0; kb < b.outerSize(); ++kb)
        for (SparseCol::InnerIterator ib(b, kb); ib; ++ib)
          t.emplace_back(ia.row() * b.rows() + ib.row(), ia.col() * b.cols() + ib.col(), ia.value() * ib.value());
  SparseCol r(a.rows() * b.rows(), a.cols() * b.cols());
  r.setFromTriplets(t.begin(), t.end());
  return r;
}

SparseCol identity(long n) {
  SparseCol i(n, n);
  i.setIdentity();
  return i;
}

}  // namespace

SparseCol commutator_superoperator(const SparseMatrix& h_in) {
  const long n = h_in.rows();
  SparseCol h = h_in;
  SparseCol ht = SparseCol(h.transpose());
  SparseCol id = identity(n);
  return Complex(0, -1) * (kron(id, h) - kron(ht, id));
}

SparseCol liouvillian(const SparseMatrix& h, const std::vector<SparseMatrix>& collapse) {
  const long n = h.rows();
  SparseCol l = commutator_superoperator(h);
  SparseCol id = identity(n);
  for (const auto& c_in : collapse) {
    SparseCol c = c_in;
    SparseCol cd = SparseCol(c.adjoint());
    SparseCol ctc = cd * c;
    SparseCol cconj = SparseCol(c.conjugate());
    SparseCol ctc_t = SparseCol(ctc.transpose());
    l += kron(cconj, c) - 0.5 * kron(id, ctc) - 0.5 * kron(ctc_t, id);
  }
  l.prune(Complex(0.0));
  return l;
}

Eigen::VectorXcd vec(const Dense& rho) { return Eigen::Map<const Eigen::VectorXcd>(rho.data(), rho.size()); }

Dense unvec(const Eigen::VectorXcd& v, long n) { return Eigen::Map<const Dense>(v.data(), n, n); }

Dense steady_state(const SparseCol& l, long n) {
  const long n2 = n * n;
  std::vector<Eigen::Triplet<Complex>> t;
  for (int k = 0; k < l.outerSize(); ++k)
    for (SparseCol::InnerIterator it(l, k); it; ++it)
      if (it.row() != 0) t.emplace_back(it.row(), it.col(), it.value());
  for (long i = 0; i < n; ++i) t.emplace_back(0, i * n + i, 1.0);
  SparseCol a(n2, n2);
  a.setFromTriplets(t.begin(), t.end());
  Eigen::SparseLU<SparseCol> lu;
  lu.analyzePattern(a);
  lu.factorize(a);
  FLYBY_CHECK(lu.info() == Eigen::Success, "steady state: Liouvillian has no unique steady state");
  Eigen::VectorXcd rhs = Eigen::VectorXcd::Zero(n2);
  rhs[0] = 1.0;
  Eigen::VectorXcd x = lu.solve(rhs);
  Dense rho = unvec(x, n);
  rho = 0.5 * (rho + rho.adjoint().eval());
  return rho / rho.trace();
}

}  // namespace flyby::master
