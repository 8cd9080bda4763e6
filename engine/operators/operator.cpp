// Sums of products of local operators: algebra, matrix-free application and sparse assembly.
#include "engine/operators/operator.h"

#include <algorithm>

#include "engine/common/errors.h"

namespace flyby::operators {

Operator Operator::identity(Complex weight) {
  Operator o;
  o.terms_.push_back(ProductTerm{weight, {}});
  return o;
}

Operator Operator::local(SubsystemId target, LocalMatrix matrix, Complex weight) {
  FLYBY_CHECK(matrix.rows() == matrix.cols(), "local operator must be square");
  return product({LocalFactor{target, std::move(matrix)}}, weight);
}

Operator Operator::product(std::vector<LocalFactor> factors, Complex weight) {
  std::sort(factors.begin(), factors.end(),
            [](const LocalFactor& a, const LocalFactor& b) { return a.target < b.target; });
  for (std::size_t k = 1; k < factors.size(); ++k)
    FLYBY_CHECK(factors[k].target != factors[k - 1].target, "product term with a repeated subsystem");
  Operator o;
  o.terms_.push_back(ProductTerm{weight, std::move(factors)});
  return o;
}

Operator& Operator::operator+=(const Operator& other) {
  terms_.insert(terms_.end(), other.terms_.begin(), other.terms_.end());
  return *this;
}

Operator& Operator::operator*=(Complex s) {
  for (auto& t : terms_) t.weight *= s;
  return *this;
}

static ProductTerm multiply(const ProductTerm& a, const ProductTerm& b) {
  ProductTerm r;
  r.weight = a.weight * b.weight;
  std::size_t i = 0, j = 0;
  while (i < a.factors.size() || j < b.factors.size()) {
    if (j == b.factors.size() || (i < a.factors.size() && a.factors[i].target < b.factors[j].target)) {
      r.factors.push_back(a.factors[i++]);
    } else if (i == a.factors.size() || b.factors[j].target < a.factors[i].target) {
      r.factors.push_back(b.factors[j++]);
    } else {
      r.factors.push_back(LocalFactor{a.factors[i].target, a.factors[i].matrix * b.factors[j].matrix});
      ++i;
      ++j;
    }
  }
  return r;
}

Operator operator*(const Operator& a, const Operator& b) {
  Operator r;
  for (const auto& ta : a.terms_)
    for (const auto& tb : b.terms_) r.terms_.push_back(multiply(ta, tb));
  return r;
}

Operator Operator::adjoint() const {
  Operator r;
  for (const auto& t : terms_) {
    ProductTerm a{std::conj(t.weight), {}};
    for (const auto& f : t.factors) a.factors.push_back(LocalFactor{f.target, f.matrix.adjoint()});
    r.terms_.push_back(std::move(a));
  }
  return r;
}

std::vector<SubsystemId> Operator::support() const {
  std::vector<SubsystemId> s;
  for (const auto& t : terms_)
    for (const auto& f : t.factors) s.push_back(f.target);
  std::sort(s.begin(), s.end());
  s.erase(std::unique(s.begin(), s.end()), s.end());
  return s;
}

static bool term_active(const ProductTerm& t, const Layout& layout) {
  for (const auto& f : t.factors)
    if (!layout.contains(f.target)) return false;
  return true;
}

bool Operator::active_in(const Layout& layout) const {
  for (const auto& t : terms_)
    if (term_active(t, layout)) return true;
  return false;
}

// out = (I ⊗ M ⊗ I)·in for a factor with dimension d and stride s.
static void apply_factor(const LocalMatrix& m, long d, long s, const Vector& in, Vector& out) {
  const long block = d * s;
  const long outer = in.size() / block;
  out.setZero(in.size());
  for (long o = 0; o < outer; ++o) {
    const long base = o * block;
    for (long a = 0; a < d; ++a)
      for (long b = 0; b < d; ++b) {
        const Complex mab = m(a, b);
        if (mab == Complex(0.0)) continue;
        for (long i = 0; i < s; ++i) out[base + a * s + i] += mab * in[base + b * s + i];
      }
  }
}

void apply(const Operator& op, const Layout& layout, const Vector& in, Vector& out) {
  if (layout.restricted()) {
    out = to_sparse(op, layout) * in;
    return;
  }
  out.setZero(in.size());
  Vector a, b;
  for (const auto& t : op.terms()) {
    if (!term_active(t, layout)) continue;
    a = in;
    for (const auto& f : t.factors) {
      FLYBY_CHECK(f.matrix.rows() == layout.dimension_of(f.target), "local operator dimension mismatch");
      apply_factor(f.matrix, f.matrix.rows(), layout.stride_of(f.target), a, b);
      a.swap(b);
    }
    out += t.weight * a;
  }
}

Complex expectation(const Operator& op, const Layout& layout, const Vector& psi) {
  Vector o;
  apply(op, layout, psi, o);
  return psi.dot(o) / psi.squaredNorm();
}

SparseMatrix to_sparse_between(const Operator& op, const Layout& cols, const Layout& rows) {
  FLYBY_CHECK(cols.present() == rows.present(), "to_sparse_between: layouts of different subsystems");
  std::vector<Eigen::Triplet<Complex>> trip;
  struct Factor {
    long stride, dim;
    std::vector<std::vector<std::pair<long, Complex>>> column;  // column b: (row a, m(a, b)) non-zero
  };
  for (const auto& t : op.terms()) {
    if (!term_active(t, cols)) continue;
    std::vector<Factor> fs;
    for (const auto& f : t.factors) {
      FLYBY_CHECK(f.matrix.rows() == cols.dimension_of(f.target), "local operator dimension mismatch");
      Factor x{cols.stride_of(f.target), f.matrix.rows(), {}};
      x.column.resize(std::size_t(x.dim));
      for (long b = 0; b < x.dim; ++b)
        for (long a = 0; a < x.dim; ++a)
          if (f.matrix(a, b) != Complex(0.0)) x.column[std::size_t(b)].emplace_back(a, f.matrix(a, b));
      fs.push_back(std::move(x));
    }
    for (long j = 0; j < cols.dimension(); ++j) {
      const long full = cols.full_index(j);
      // Every product of one non-zero entry per factor maps column `full` to one row.
      auto visit = [&](auto&& self, std::size_t k, long row_full, Complex w) -> void {
        if (k == fs.size()) {
          if (auto i = rows.index_of_full(row_full)) trip.emplace_back(*i, j, w);
          return;
        }
        const Factor& f = fs[k];
        const long b = (full / f.stride) % f.dim;
        for (const auto& [a, m] : f.column[std::size_t(b)]) self(self, k + 1, row_full + (a - b) * f.stride, w * m);
      };
      visit(visit, 0, full, t.weight);
    }
  }
  SparseMatrix r(rows.dimension(), cols.dimension());
  r.setFromTriplets(trip.begin(), trip.end());
  r.prune(Complex(0.0));
  return r;
}

// Full-space matrix built directly from the Kronecker structure: for every product term, the
// nonzero combinations of its local factors (row and column offsets Σ a_k s_k, Σ b_k s_k and the
// product of entries) are placed at every basis index whose digits on the factors' subsystems
// are zero. One triplet list for all terms, summed by setFromTriplets — no sparse products,
// which made this the largest per-cluster set-up cost (docs/performance.md).
SparseMatrix to_sparse(const Operator& op, const Layout& layout) {
  if (layout.restricted()) return to_sparse_between(op, layout, layout);
  const long n = layout.dimension();
  struct Entry {
    long row, col;
    Complex value;
  };
  std::vector<Eigen::Triplet<Complex>> trip;
  std::vector<Entry> combos, next;
  for (const auto& t : op.terms()) {
    if (!term_active(t, layout)) continue;
    combos.assign(1, Entry{0, 0, t.weight});
    std::vector<std::pair<long, long>> digits;  // (stride, dimension) of the factors
    for (const auto& f : t.factors) {
      FLYBY_CHECK(f.matrix.rows() == layout.dimension_of(f.target), "local operator dimension mismatch");
      const long d = f.matrix.rows(), st = layout.stride_of(f.target);
      digits.emplace_back(st, d);
      next.clear();
      for (const auto& c : combos)
        for (long a = 0; a < d; ++a)
          for (long b = 0; b < d; ++b) {
            const Complex m = f.matrix(a, b);
            if (m == Complex(0.0)) continue;
            next.push_back(Entry{c.row + a * st, c.col + b * st, c.value * m});
          }
      combos.swap(next);
    }
    if (combos.empty()) continue;
    for (long base = 0; base < n; ++base) {
      bool zero_digits = true;
      for (const auto& [st, d] : digits)
        if ((base / st) % d != 0) {
          zero_digits = false;
          break;
        }
      if (!zero_digits) continue;
      for (const auto& c : combos) trip.emplace_back(base + c.row, base + c.col, c.value);
    }
  }
  SparseMatrix sum(n, n);
  sum.setFromTriplets(trip.begin(), trip.end());
  sum.prune(Complex(0.0));
  return sum;
}

}  // namespace flyby::operators
