// Lindblad master equation in superoperator form for small systems:
//   dρ/dt = −i[H, ρ] + Σ_c (C ρ C† − ½{C†C, ρ}),
// with ρ stacked by columns, vec(A X B) = (Bᵀ ⊗ A) vec(X). Steady state by sparse LU with the
// trace condition replacing one equation.
#pragma once

#include <Eigen/Dense>
#include <Eigen/Sparse>
#include <vector>

#include "engine/operators/operator.h"

namespace flyby::master {

using operators::Complex;
using operators::SparseMatrix;
using Dense = Eigen::MatrixXcd;
using SparseCol = Eigen::SparseMatrix<Complex>;  // column-major, for SparseLU

// L for Hamiltonian h and collapse operators c (all n × n).
SparseCol liouvillian(const SparseMatrix& h, const std::vector<SparseMatrix>& collapse);
// Only the commutator part −i[h, ·] (for time-dependent Hamiltonian terms).
SparseCol commutator_superoperator(const SparseMatrix& h);

Eigen::VectorXcd vec(const Dense& rho);
Dense unvec(const Eigen::VectorXcd& v, long n);

// The steady state (trace 1, Hermitian-symmetrized) of L; throws flyby::InternalError if L is
// singular beyond the trace condition (no unique steady state).
Dense steady_state(const SparseCol& l, long n);

}  // namespace flyby::master
