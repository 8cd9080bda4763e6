// Speed distribution of the atoms crossing a plane of the beam (flux-weighted), DESIGN.md §5.
//
//  * Effusive oven at temperature T: f(v) ∝ v³ exp(−v²/α²), α = √(2 k_B T / m) (Ramsey,
//    "Molecular Beams" (1956), ch. II). Sampled exactly: x = v²/α² is Gamma(2, 1) distributed,
//    so x = −ln(u₁u₂).
//  * Monochromatic: every atom at speed v.
//  * Gaussian (cold/slowed beam): the flux-weighted speed is normal with mean μ and standard
//    deviation σ, truncated to v > 0; μ ≥ 4σ is required so the truncation is negligible.
// Normal deviates use our own Box–Muller on the PCG stream (std::normal_distribution's algorithm
// is implementation-defined, which would break bit-identical records across standard libraries).
#pragma once

#include <optional>
#include <string>

#include "engine/common/random.h"

namespace flyby::source {

enum class SpeedKind { kEffusive, kMonochromatic, kGaussian };
std::string to_string(SpeedKind kind);  // "effusive", "monochromatic", "gaussian"
std::optional<SpeedKind> speed_kind_from_string(const std::string& s);

struct SpeedSpec {
  SpeedKind kind = SpeedKind::kEffusive;
  double oven_temperature_K = 0.0;   // effusive: oven temperature, K, > 0
  double mass_u = 0.0;               // effusive: atomic mass, u, > 0 (from the species)
  double speed_m_per_s = 0.0;        // monochromatic speed or Gaussian mean, m/s, > 0
  double spread_m_per_s = 0.0;       // Gaussian standard deviation, m/s, ≥ 0, ≤ mean/4
};

// α = √(2 k_B T / m), m/s.
double effusive_alpha_m_per_s(double temperature_K, double mass_u);

// Throws flyby::InputError (one line, naming the quantity) on unphysical values.
void validate(const SpeedSpec& spec);

// One flux-weighted speed, m/s.
double sample_speed(const SpeedSpec& spec, Rng& rng);

// One standard normal deviate (Box–Muller, using two uniform_open0 draws).
double standard_normal(Rng& rng);

// Flux-weighted mean speed ⟨v⟩ and mean inverse speed ⟨1/v⟩ (the latter converts a flux into a
// mean number present): effusive ⟨v⟩ = (3√π/4)α, ⟨1/v⟩ = √π/(2α); Gaussian by quadrature.
double mean_speed_m_per_s(const SpeedSpec& spec);
double mean_inverse_speed_s_per_m(const SpeedSpec& spec);

// A speed below which a flux fraction of at most `fraction` of atoms lies (for the time padding
// of arrival generation). Effusive: CDF 1 − (1+x)e^{−x}, x = v²/α².
double low_speed_quantile_m_per_s(const SpeedSpec& spec, double fraction);

}  // namespace flyby::source
