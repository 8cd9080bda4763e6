// Operators on the tensor-product space as sums of products of local operators (small dense
// matrices on one subsystem each), with constant complex weights. A term that names a subsystem
// that is not present in the current layout is inactive (it belongs to an atom that has not
// arrived yet or has left). Two full-space forms: matrix-free application (apply) and an
// Eigen sparse matrix (to_sparse) for propagators and the master equation.
#pragma once

#include <Eigen/Dense>
#include <Eigen/Sparse>
#include <complex>
#include <vector>

#include "engine/space/layout.h"
#include "engine/space/subsystem.h"

namespace flyby::operators {

using Complex = std::complex<double>;
using LocalMatrix = Eigen::MatrixXcd;
using SparseMatrix = Eigen::SparseMatrix<Complex, Eigen::RowMajor>;
using space::Layout;
using space::SubsystemId;
using space::Vector;

struct LocalFactor {
  SubsystemId target = 0;
  LocalMatrix matrix;  // dimension × dimension of the target subsystem
};

// weight · ⊗_k factor_k (identity on every other subsystem); factors have distinct targets,
// kept sorted by target.
struct ProductTerm {
  Complex weight{1.0, 0.0};
  std::vector<LocalFactor> factors;
};

class Operator {
 public:
  Operator() = default;
  static Operator identity(Complex weight = 1.0);
  static Operator local(SubsystemId target, LocalMatrix matrix, Complex weight = 1.0);
  // weight · A ⊗ B ⊗ …; targets must be distinct.
  static Operator product(std::vector<LocalFactor> factors, Complex weight = 1.0);

  Operator& operator+=(const Operator& other);
  Operator& operator*=(Complex s);
  friend Operator operator+(Operator a, const Operator& b) { return a += b; }
  friend Operator operator*(Complex s, Operator a) { return a *= s; }
  friend Operator operator*(const Operator& a, const Operator& b);  // operator product a·b

  Operator adjoint() const;
  const std::vector<ProductTerm>& terms() const { return terms_; }
  bool empty() const { return terms_.empty(); }
  // The subsystems some term acts on (sorted, unique).
  std::vector<SubsystemId> support() const;
  // True when at least one term has all its targets present in `layout`.
  bool active_in(const Layout& layout) const;

 private:
  std::vector<ProductTerm> terms_;
};

// Full-space sparse matrix of the active terms in `layout` (on the kept states when the layout
// is restricted by excitation number; amplitude leaving the kept states is dropped).
SparseMatrix to_sparse(const Operator& op, const Layout& layout);
// Matrix of the active terms from the states of `cols` to the states of `rows`: two layouts of
// the same present subsystems, each restricted or not (e.g. kept states → the next excitation
// shell, for the truncation error estimate). Assembled column by column from the local matrices.
SparseMatrix to_sparse_between(const Operator& op, const Layout& cols, const Layout& rows);
// out = O·in without forming the full matrix (local matrices act on strided slices).
void apply(const Operator& op, const Layout& layout, const Vector& in, Vector& out);
// ⟨ψ|O|ψ⟩ / ⟨ψ|ψ⟩.
Complex expectation(const Operator& op, const Layout& layout, const Vector& psi);

}  // namespace flyby::operators
