// Atomic beam geometry and per-atom samples (DESIGN.md §5, lab frame of §3).
//
// Axes: the nominal beam direction d is `direction` (default lab x̂) tilted by tilt_deg towards
// the resonator axis +ẑ (a tilt gives motion along the standing wave). u1 = ẑ × d / |ẑ × d| is
// the transverse axis across the mode (lab ŷ for an untilted beam along x̂); u2 = d × u1 lies in
// the plane of d and ẑ (≈ ẑ). Each atom is described at its reference time t_ref, when it crosses
// the plane through the origin (the mode centre) perpendicular to d: position r0 = y u1 + ζ u2
// there, with y from the transverse profile (slit: uniform over the slit width; Gaussian: normal
// with the given σ), offset by offset_um, and ζ uniform over axial_extent_um (centred); velocity
// v (d + δ1 u1 + δ2 u2)/|…| with speed v from the speed distribution and δ1, δ2 normal with
// standard deviation divergence_mrad. Position at time t: r0 + v (t − t_ref).
#pragma once

#include <optional>
#include <string>

#include "engine/common/random.h"
#include "models/geometry/quantization_frame.h"
#include "models/source/speed_distribution.h"

namespace flyby::source {

using geometry::Vec3;

enum class TransverseProfile { kSlit, kGaussian };
std::string to_string(TransverseProfile p);  // "slit", "gaussian"
std::optional<TransverseProfile> transverse_profile_from_string(const std::string& s);

struct BeamSpec {
  SpeedSpec speed;
  Vec3 direction = Vec3::UnitX();    // nominal direction before tilt, lab (normalized on use)
  double tilt_deg = 0.0;             // tilt of d towards +ẑ, degrees, |tilt| < 90
  TransverseProfile profile = TransverseProfile::kSlit;
  double slit_width_um = 0.0;        // slit: full width along u1, µm, > 0
  double sigma_um = 0.0;             // Gaussian: standard deviation along u1, µm, > 0
  double offset_um = 0.0;            // centre of the transverse profile along u1, µm
  double axial_extent_um = 0.0;      // full extent along u2 (uniform), µm, ≥ 0
  double divergence_mrad = 0.0;      // standard deviation of each transverse velocity angle, mrad, ≥ 0
  // Exactly one of these sets the arrival rate (see mean_atoms_in_mode in arrivals.h):
  std::optional<double> flux_per_s;           // atoms per second through the beam, > 0
  std::optional<double> mean_atoms_in_mode;   // mean number inside the mode's 1/e² radius, > 0
};

struct BeamAxes {
  Vec3 d, u1, u2;
};

// Throws flyby::InputError when the direction is zero or along ẑ with a tilt, etc.
BeamAxes beam_axes(const BeamSpec& spec);
void validate(const BeamSpec& spec);

struct AtomSample {
  Vec3 position_um;        // r0 at t_ref, lab, µm
  Vec3 velocity_m_per_s;   // lab, m/s (= µm/µs)
};

// Draws speed, transverse position, axial position, divergence — in that order — from rng.
AtomSample sample_atom(const BeamSpec& spec, const BeamAxes& axes, Rng& rng);

// ⟨chord⟩: the mean over the transverse profile of the chord 2√(R² − b²) (b = |y|, zero when
// b ≥ R) of a circle of radius R around the resonator axis, µm. Closed form for the slit,
// quadrature for the Gaussian.
double mean_chord_um(const BeamSpec& spec, double radius_um);

}  // namespace flyby::source
