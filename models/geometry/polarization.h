// Polarization vectors and their spherical components (DESIGN.md §3).
//
// Spherical basis (Condon–Shortley): e₊₁ = −(x̂ + iŷ)/√2, e₀ = ẑ, e₋₁ = (x̂ − iŷ)/√2, with ẑ the
// quantization axis. A field of (complex, unit) polarization ε drives the atom through
// Σ_q w_q A_q† with w_q = e_q · ε (no complex conjugation), so σ+ light ε = e₊₁ has w₋₁ = −1 and
// raises m (A₋₁† takes m to m+1, see models/levels/level_structure.h). Light emitted by the atom
// and detected behind a polarizer ε has amplitude Σ_q w_q* A_q.
//
// Transverse basis of a propagation direction k: e1 = the lab x̂ with its k component removed
// (lab ẑ instead when k is within ~25° of x̂), unless the user names e1; e2 = k × e1. So for the
// resonator output along +ẑ, e1 = x̂ and e2 = ŷ. Jones vectors (j1, j2) mean j1 e1 + j2 e2.
// "sigma_plus" with respect to k is −(e1 + i e2)/√2, i.e. e₊₁ about k: it is the atom's σ+ light
// when B is parallel to k.
#pragma once

#include <array>
#include <complex>
#include <optional>
#include <string>

#include "models/geometry/quantization_frame.h"

namespace flyby::geometry {

using Complex = std::complex<double>;
using SphericalWeights = std::array<Complex, 3>;  // index q + 1, q = −1, 0, +1

enum class PolarizationKind { kLinear, kSigmaPlus, kSigmaMinus, kJones };

// One to/from-string pair for the config: "linear", "sigma_plus", "sigma_minus", "jones".
std::string to_string(PolarizationKind kind);
std::optional<PolarizationKind> polarization_kind_from_string(const std::string& s);

struct PolarizationSpec {
  PolarizationKind kind = PolarizationKind::kLinear;
  // kLinear: either a lab direction (must be perpendicular to k) ...
  std::optional<Vec3> linear_dir;
  // ... or an angle from e1 towards e2, degrees (used when linear_dir is not given).
  double linear_angle_deg = 0.0;
  // kJones: components along (e1, e2); normalized on use, must not be zero.
  std::array<Complex, 2> jones{Complex(1.0, 0.0), Complex(0.0, 0.0)};
  // Optional user choice of e1 (lab, need not be normalized; its k component is removed).
  std::optional<Vec3> e1_dir;
};

struct TransverseBasis {
  Vec3 e1, e2;
};

// Transverse basis of direction k (lab); see the file comment. Throws flyby::InputError when k
// is zero or e1_hint is parallel to k.
TransverseBasis transverse_basis(const Vec3& k, const std::optional<Vec3>& e1_hint = std::nullopt);

// Unit complex polarization vector in the lab frame for light travelling along k (lab).
// Throws flyby::InputError for a zero Jones vector or a linear direction not perpendicular to k.
CVec3 polarization_vector(const PolarizationSpec& spec, const Vec3& k);

// The Jones vector (j1, j2) of a transverse lab polarization in the basis of k (e1 as given).
std::array<Complex, 2> jones_components(const CVec3& polarization, const TransverseBasis& basis);

// e_q as a complex 3-vector (in whichever frame its ẑ is the quantization axis).
CVec3 spherical_unit(int q);

// w_q = e_q · ε for a vector already in the quantization frame.
SphericalWeights spherical_weights(const CVec3& eps_frame);

// |⟨a|b⟩|² / (|a|²|b|²) for two Jones vectors (or polarization vectors): 1 if equal, 0 if orthogonal.
double polarization_overlap(const CVec3& a, const CVec3& b);

}  // namespace flyby::geometry
