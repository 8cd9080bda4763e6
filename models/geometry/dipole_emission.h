// Dipole radiation seen by a free-space detector (DESIGN.md §3, issue 4 item 4).
//
// The atom's positive-frequency dipole is d⁽⁺⁾ = d_eff Σ_q A_q e_q* (A_q from
// models/levels/level_structure.h). The photon flux into a small solid angle ΔΩ around the unit
// direction n with transverse polarization ε is Γ (3/8π) ΔΩ ⟨C†C⟩ with C = Σ_q conj(e_q·ε) A_q;
// summed over two transverse polarizations and integrated over the sphere this gives back
// Γ Σ_q A_q†A_q. A detector of efficiency η therefore has the collapse operator
// √(η Γ 3ΔΩ/8π) Σ_q conj(w_q) A_q, w = spherical_weights(ε in the quantization frame).
// The solid angle is treated as small (pattern evaluated on the axis); that is exact for the
// sum rule and accurate to O(ΔΩ) for the angular dependence.
#pragma once

#include <string>

#include "models/geometry/collapse_split.h"
#include "models/geometry/polarization.h"

namespace flyby::geometry {

// Angular density (per steradian, normalized so that the sum over two polarizations integrates to
// 1 over the sphere) of the light a pure σ_q transition (operator A_q) emits along n_frame with
// polarization eps_frame (both in the quantization frame): (3/8π) |Σ conj(w_q)|² for that q.
double dipole_pattern(int q, const Vec3& n_frame, const CVec3& eps_frame);

// Unpolarized version: (3/8π)(1 − |n·e_q|²) — the classic sin²θ (q = 0) and (1+cos²θ)/2 (q = ±1).
double dipole_pattern_unpolarized(int q, const Vec3& n_frame);

// Collapse operator of a free-space detector behind a polarizer eps_frame (quantization frame).
// gamma_rad_per_us: Γ; solid_angle_sr in (0, 4π); efficiency in [0, 1].
LinearCollapse free_space_channel(const std::string& name, double gamma_rad_per_us, double solid_angle_sr,
                                  double efficiency, const CVec3& eps_frame);

}  // namespace flyby::geometry
