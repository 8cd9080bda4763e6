// Optical resonator with two orthogonal linear polarization modes (DESIGN.md §3, §5).
//
// Lab frame: resonator axis ẑ through the origin, output mirror at +z (output light travels
// along +ẑ, so its Jones basis is e1 = x̂, e2 = ŷ, see models/geometry/polarization.h). Mode 1 is
// polarized along cos φ x̂ + sin φ ŷ (φ = mode1_angle_deg), mode 2 along ẑ × (mode 1).
//
// Definitions (each stated once, here):
//  * κ is the field decay rate (photon number decays at 2κ, FWHM linewidth 2κ). From finesse F
//    and length L: free spectral range c/2L, linewidth c/(2LF) = 2κ/2π, hence κ = π c / (2 L F).
//  * Mode function g(r) = g0 ψ(r), ψ = exp(−(x²+y²)/w0²) cos(kz) for the standing wave, or
//    exp(−(x²+y²)/w0²) e^{ikz} for a running wave; w0 is the 1/e² intensity radius of the waist;
//    the Rayleigh range is taken as long compared with the region the atoms cross (no w(z)).
//  * Mode volume V = π w0² L / 4 (standing wave; π w0² L / 2 running wave), and
//    g0 = d √(ω / (2 ħ ε0 V)) where d is the dipole moment of a transition of unit
//    Clebsch–Gordan weight, i.e. the normalization of A_q in models/levels/level_structure.h:
//    d² = |⟨J‖er‖J′⟩|² (2J+1)/(2J′+1) = 3π ε0 ħ c³ Γ / ω³.
//  * Coupling: H = ħ g0 ψ(r) Σ_i Σ_q ( w_iq A_q† a_i + h.c. ), w_iq = e_q · p_i (p_i the mode
//    polarization in the quantization frame).
//  * Output channels: behind the output mirror (fraction T of all field decay) a polarization
//    analyzer port with Jones vector j and a detector of efficiency η gives the collapse operator
//    √(2κ T η) Σ_i (j*·p_i) a_i. Ports of one analyzer must be orthogonal. The undetected
//    remainder (other mirror, losses, unused ports, detector inefficiency) completes the set to
//    2κ Σ_i a_i†a_i (models/geometry/collapse_split.h).
#pragma once

#include <array>
#include <optional>
#include <string>
#include <vector>

#include "models/geometry/collapse_split.h"
#include "models/geometry/polarization.h"

namespace flyby::resonator {

using geometry::Complex;
using geometry::CVec3;
using geometry::Vec3;

// One analyzer port with a detector behind it (a detected output channel).
struct OutputPort {
  std::string channel;                    // detection channel name (unique in the scenario)
  std::string analyzer = "analyzer";      // ports with the same analyzer name must be orthogonal
  geometry::PolarizationSpec polarization;  // Jones vector of the port, basis (x̂, ŷ) along +ẑ
  double efficiency = 1.0;                // detector efficiency (incl. coupling), [0, 1]
};

struct ResonatorSpec {
  double length_mm = 0.0;                 // mirror separation, mm, > 0
  double waist_um = 0.0;                  // 1/e² intensity radius at the waist, µm, > 0
  std::optional<double> kappa_MHz;        // κ/2π (field decay), MHz, > 0; or ...
  std::optional<double> finesse;          // ... finesse F > 0 (κ = πc/2LF)
  std::optional<double> g0_MHz;           // g0/2π, MHz, > 0; computed from d and V when absent
  double mode1_angle_deg = 0.0;           // polarization of mode 1 from lab x̂ towards ŷ, degrees
  double splitting_MHz = 0.0;             // birefringent splitting ν₂ − ν₁, MHz
  double detuning_MHz = 0.0;              // ν₁ − ν_ref (reference transition), MHz
  double output_mirror_fraction = 1.0;    // fraction of 2κ leaving through the output mirror, [0, 1]
  int fock_cutoff = 2;                    // highest photon number kept per mode, ≥ 1
  bool standing_wave = true;              // false: running wave (ring resonator)
  bool displaced_frame = true;            // modes as a → α + a around the empty driven amplitude α
  std::vector<OutputPort> outputs;        // detected output channels
};

struct ResonatorModel {
  double kappa_rad_per_us = 0.0;          // κ
  double g0_rad_per_us = 0.0;             // g0 (unit Clebsch–Gordan weight, antinode)
  double k_rad_per_um = 0.0;              // 2π/λ
  double waist_um = 0.0;
  double length_um = 0.0;
  double mode_volume_um3 = 0.0;           // V used for g0 (also when g0 was given)
  bool standing_wave = true;
  bool displaced_frame = true;            // see ResonatorSpec::displaced_frame
  int fock_cutoff = 2;
  std::array<Vec3, 2> polarization_lab;   // p₁, p₂ (real, lab frame)
  std::array<double, 2> detuning_rad_per_us{0.0, 0.0};  // ω_i − ω_ref
  // Channels acting on (a₁, a₂): the detected ones in the order of spec.outputs, then the
  // undetected remainder named "resonator_undetected<k>".
  std::vector<geometry::LinearCollapse> channels;

  // ψ(r) for a lab position in µm (complex for the running wave).
  Complex mode_function(const Vec3& r_um) const;
  // Transverse envelope exp(−(x²+y²)/w0²) only (what the interaction cutoff looks at).
  double transverse_envelope(const Vec3& r_um) const;
  // w_iq = e_q · p_i in the quantization frame: row i = mode, column q + 1.
  std::array<geometry::SphericalWeights, 2> mode_weights(const geometry::QuantizationFrame& frame) const;
  // Single-atom cooperativity C1 = g0²/(κΓ).
  double cooperativity(double gamma_rad_per_us) const;
};

// κ from finesse and length: π c / (2 L F), in rad/µs.
double kappa_from_finesse_rad_per_us(double finesse, double length_mm);
// Mode volume in µm³: π w0² L / 4 (standing) or π w0² L / 2 (running).
double mode_volume_um3(double waist_um, double length_mm, bool standing_wave);
// g0 = d √(ω / (2 ħ ε0 V)) in rad/µs; dipole in C·m, wavelength in nm, volume in µm³.
double g0_rad_per_us(double dipole_C_m, double wavelength_nm, double volume_um3);
// Dipole of a unit-weight transition from Γ and λ: d² = 3π ε0 ħ c³ Γ / ω³, C·m.
double unit_weight_dipole_C_m(double gamma_rad_per_us, double wavelength_nm);

// Validate the spec and build the model. dipole_C_m: unit-weight dipole (see file comment),
// used when spec.g0_MHz is absent. Throws flyby::InputError on unphysical values, a
// non-orthogonal analyzer, or channels that collect more than the decay.
ResonatorModel build_resonator(const ResonatorSpec& spec, double wavelength_nm, double dipole_C_m);

}  // namespace flyby::resonator
