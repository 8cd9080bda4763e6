// Side laser: a collimated Gaussian beam crossing the atoms (DESIGN.md §5).
//
// Definitions:
//  * Rabi frequency Ω (H = ħ(Ω/2)(Σ_q w_q A_q† + h.c.), w_q = e_q·ε) is quoted for a transition
//    of unit Clebsch–Gordan weight (the A_q normalization of models/levels/level_structure.h) at
//    the beam centre: Ω = d E0 / ħ with d² = 3π ε0 ħ c³ Γ/ω³ and peak intensity I = c ε0 E0²/2.
//    Equivalently Ω² = Γ² I / (2 I_sat) with I_sat = c ε0 Γ² ħ² / (4 d²) (for 87Rb D2 this is the
//    cycling-transition saturation intensity, ≈ 1.67 mW/cm²).
//  * Profile: Ω(r) = Ω exp(−ρ²/w²), ρ the distance from the beam axis (through focus_um along
//    direction), w the 1/e² intensity radius; the Rayleigh range is taken as long.
//  * Detuning Δ = ν_L − ν_ref (reference transition at zero field). An atom with velocity v sees
//    the laser at ω_L − k·v (k = 2π/λ along the propagation direction): Doppler shift −k·v.
#pragma once

#include <optional>
#include <string>

#include "models/geometry/polarization.h"

namespace flyby::drives {

using geometry::Vec3;

struct SideDrive {
  std::string name;                          // unique name (feedback rules refer to it)
  Vec3 direction = Vec3::UnitY();            // propagation direction, lab frame (normalized on use)
  Vec3 focus_um = Vec3::Zero();              // a point on the beam axis, lab frame, µm
  geometry::PolarizationSpec polarization;   // about `direction`
  double waist_um = 0.0;                     // 1/e² intensity radius, µm, > 0
  std::optional<double> rabi_MHz;            // Ω/2π at the centre (unit weight), MHz, ≥ 0; or ...
  std::optional<double> intensity_mW_per_cm2;  // ... peak intensity, mW/cm², ≥ 0
  double detuning_MHz = 0.0;                 // ν_L − ν_ref, MHz
};

// Ω at the centre in rad/µs; dipole_C_m is the unit-weight dipole. Throws flyby::InputError when
// neither or both of rabi/intensity are given or a value is negative.
double peak_rabi_rad_per_us(const SideDrive& drive, double dipole_C_m);

// Ω from intensity: Ω = d √(2I/(c ε0)) / ħ, rad/µs.
double rabi_from_intensity_rad_per_us(double intensity_mW_per_cm2, double dipole_C_m);

// Unit-weight saturation intensity I_sat = c ε0 Γ² ħ² / (4 d²), mW/cm².
double saturation_intensity_mW_per_cm2(double gamma_rad_per_us, double dipole_C_m);

// Field envelope exp(−ρ²/w²) at a lab position (µm).
double envelope(const SideDrive& drive, const Vec3& r_um);

// Doppler shift −k·v seen by an atom, rad/µs; velocity in m/s (= µm/µs), wavelength in nm.
double doppler_shift_rad_per_us(const SideDrive& drive, const Vec3& velocity_m_per_s, double wavelength_nm);

// Validation of the geometric fields (direction nonzero, waist > 0, polarization consistent).
void validate(const SideDrive& drive);

}  // namespace flyby::drives
