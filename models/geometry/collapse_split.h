// Splitting a physical decay into detected channels and an undetected remainder (DESIGN.md §3).
//
// A decay of rate r acting on n operators X_i (the two resonator modes a₁, a₂ with r = 2κ, or
// the three dipole components A_q with r = Γ) has total Σ_i r X_i†X_i. A channel is a collapse
// operator C = Σ_i c_i X_i (the coefficients include √rate). Given the detected channels, the
// remainder matrix M = r·1 − Σ_d c_d* c_dᵀ (M_ij = r δ_ij − Σ_d conj(c_di) c_dj) must be positive
// semidefinite; its eigen-decomposition M = Σ_k λ_k u_k u_k† gives the undetected channels
// c_kj = √λ_k conj(u_jk), so detected + undetected reproduce the physical decay exactly.
#pragma once

#include <Eigen/Dense>
#include <string>
#include <vector>

namespace flyby::geometry {

struct LinearCollapse {
  std::string channel;                 // channel name; undetected ones are named by the caller
  bool detected = true;
  Eigen::VectorXcd coefficients;       // c_i in C = Σ_i c_i X_i, units √(rad/µs)
};

// Σ over channels of conj(c_i) c_j: the matrix of Σ C†C in the X_i†X_j basis.
Eigen::MatrixXcd decay_matrix(const std::vector<LinearCollapse>& channels, int n);

// Undetected channels completing `detected` to the total rate·1 (named `<prefix>0`, `<prefix>1`, …;
// eigen-directions with negligible weight are dropped). Throws flyby::InputError naming `what`
// when the detected channels exceed the physical decay in some direction (remainder not ≥ 0).
std::vector<LinearCollapse> undetected_remainder(const std::vector<LinearCollapse>& detected, int n,
                                                 double rate_rad_per_us, const std::string& prefix,
                                                 const std::string& what);

// Largest |entry| of decay_matrix(all) − rate·1: the bookkeeping error of a complete channel set.
double completeness_error(const std::vector<LinearCollapse>& all, int n, double rate_rad_per_us);

}  // namespace flyby::geometry
