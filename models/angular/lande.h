// Landé g-factors of fine-structure (g_J) and hyperfine (g_F) levels.
//
// Sign convention of D. A. Steck's alkali D-line data notes: the Zeeman Hamiltonian is
// H_B = μB (g_J J_z + g_I I_z) B, so a sublevel |F m⟩ shifts by +μB g_F m B in the linear
// regime (μ = −μB g m). With this convention g_I of the alkalis is negative and small.
// Angular momenta are passed doubled (two_J = 2J) so half-integers are exact.
#pragma once

namespace flyby::angular {

// Free-electron spin g-factor (CODATA 2018) and the orbital g-factor g_L = 1 − m_e/M used for
// the Russell–Saunders estimate below.
inline constexpr double kElectronSpinG = 2.00231930436256;

// g_J = g_L [J(J+1) − S(S+1) + L(L+1)]/[2J(J+1)] + g_S [J(J+1) + S(S+1) − L(L+1)]/[2J(J+1)]
// (LS coupling). Returns 0 for J = 0. Measured g_J values (models/species) are preferred.
double lande_gJ(int two_L, int two_S, int two_J, double g_L = 1.0, double g_S = kElectronSpinG);

// g_F = g_J [F(F+1) − I(I+1) + J(J+1)]/[2F(F+1)] + g_I [F(F+1) + I(I+1) − J(J+1)]/[2F(F+1)].
// Returns 0 for F = 0 (the single sublevel m = 0 has no linear shift).
double lande_gF(int two_F, int two_J, int two_I, double gJ, double gI);

}  // namespace flyby::angular
