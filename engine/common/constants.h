// Physical constants, CODATA 2018 (the set flyby fixes; CODATA 2022 differs in the last digits).
// Source: CODATA 2018 recommended values (E. Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)),
// as listed in shared/REFERENCES.md.
#pragma once

#include <numbers>

namespace flyby::constants {

inline constexpr double kPi = std::numbers::pi;
inline constexpr double h_J_s = 6.62607015e-34;                  // exact
inline constexpr double hbar_J_s = h_J_s / (2.0 * kPi);
inline constexpr double e_C = 1.602176634e-19;                   // exact
inline constexpr double kB_J_per_K = 1.380649e-23;               // exact
inline constexpr double c_m_per_s = 299792458.0;                 // exact
inline constexpr double muB_J_per_T = 9.2740100783e-24;
inline constexpr double muB_over_h_MHz_per_G = 1.39962449361;    // μB/h
inline constexpr double eps0_F_per_m = 8.8541878128e-12;
inline constexpr double u_kg = 1.66053906660e-27;                // atomic mass unit
inline constexpr double a0_m = 5.29177210903e-11;                // Bohr radius

}  // namespace flyby::constants
