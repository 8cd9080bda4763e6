// Arrival generation (see arrivals.h).
#include "models/source/arrivals.h"

#include <cmath>

#include "engine/common/errors.h"
#include "models/source/initial_populations.h"

namespace flyby::source {

namespace {
constexpr std::uint64_t kAtomsPerBlock = std::uint64_t{1} << 24;
constexpr std::uint64_t kStationaryBase = std::uint64_t{1} << 62;
constexpr std::uint64_t kPreRunBase = std::uint64_t{1} << 37;
}  // namespace

double mean_atoms_in_mode(const BeamSpec& beam, double flux_per_s, double w0) {
  const BeamAxes a = beam_axes(beam);
  const double d_perp = std::sqrt(a.d.x() * a.d.x() + a.d.y() * a.d.y());
  // flux (1/s) · chord (µm) · ⟨1/v⟩ (s/m = µs/µm · 1e-6 … ) : chord/v in µm/(m/s) = µs, so ×1e-6 s.
  return flux_per_s * mean_chord_um(beam, w0) * mean_inverse_speed_s_per_m(beam.speed) * 1e-6 / d_perp;
}

double arrival_rate_per_us(const BeamSpec& beam, std::optional<double> w0) {
  if (beam.flux_per_s) return *beam.flux_per_s * 1e-6;
  if (!w0 || !(*w0 > 0.0)) {
    throw InputError("source.mean_atoms_in_mode_count needs a resonator mode; give source.flux_per_s instead");
  }
  const double per_unit_flux = mean_atoms_in_mode(beam, 1.0, *w0);
  if (!(per_unit_flux > 0.0)) {
    throw InputError("the beam never crosses the mode (slit entirely outside the 1/e² radius); give source.flux_per_s");
  }
  return *beam.mean_atoms_in_mode / per_unit_flux * 1e-6;
}

BeamArrivals::BeamArrivals(BeamSpec beam, double rate_per_us, std::vector<GaussianTube> elements,
                           std::vector<double> populations, std::uint64_t seed, ArrivalOptions options)
    : beam_(std::move(beam)),
      axes_(beam_axes(beam_)),
      rate_per_us_(rate_per_us),
      elements_(std::move(elements)),
      populations_(std::move(populations)),
      seed_(seed),
      options_(options) {
  FLYBY_CHECK(rate_per_us_ > 0.0 && options_.block_us > 0.0, "arrival rate and block length must be > 0");
  // Farthest an atom can be from an element's cutoff boundary at t_ref, over the slowest speed
  // that carries more than 1e-6 of the flux.
  double extent = 0.5 * beam_.axial_extent_um + std::abs(beam_.offset_um) +
                  (beam_.profile == TransverseProfile::kSlit ? 0.5 * beam_.slit_width_um : 6.0 * beam_.sigma_um);
  double reach = 0.0;
  for (const auto& e : elements_) {
    reach = std::max(reach, e.point_um.norm() + cutoff_radius_um(e.waist_um, options_.cutoff));
  }
  padding_us_ = (extent + reach) / low_speed_quantile_m_per_s(beam_.speed, 1e-6);
}

std::vector<Arrival> BeamArrivals::block(std::uint64_t k) const {
  FLYBY_CHECK(k < kPreRunBase, "run longer than 2^37 arrival blocks");
  return generate(k, static_cast<double>(k) * options_.block_us);
}

std::vector<Arrival> BeamArrivals::pre_run_block(std::uint64_t n) const {
  FLYBY_CHECK(n >= 1 && n < kPreRunBase, "pre-run block index out of range");
  return generate(kPreRunBase + n, -static_cast<double>(n) * options_.block_us);
}

std::vector<Arrival> BeamArrivals::generate(std::uint64_t key, double t0) const {
  Rng rng = make_stream(seed_, StreamPurpose::kArrivals, key);
  const double t1 = t0 + options_.block_us;
  std::vector<Arrival> out;
  double t = t0;
  for (std::uint64_t j = 0;; ++j) {
    t += -std::log(uniform_open0(rng)) / rate_per_us_;
    if (t >= t1) break;
    FLYBY_CHECK(j < kAtomsPerBlock, "more than 2^24 atoms in one arrival block; lower ArrivalOptions::block_us");
    Arrival a;
    a.id = key * kAtomsPerBlock + j;
    a.t_ref_us = t;
    const AtomSample s = sample_atom(beam_, axes_, rng);
    a.position_um = s.position_um;
    a.velocity_m_per_s = s.velocity_m_per_s;
    a.initial_sublevel = sample_sublevel(populations_, rng);
    a.interval = interaction_interval(elements_, a.position_um, a.velocity_m_per_s, a.t_ref_us, options_.cutoff);
    out.push_back(std::move(a));
  }
  return out;
}

std::vector<Arrival> BeamArrivals::window(double t0, double t1) const {
  const double lo = std::max(0.0, t0 - padding_us_);
  const double hi = t1 + padding_us_;
  std::vector<Arrival> out;
  auto take = [&](std::vector<Arrival>&& atoms) {
    for (auto& a : atoms) {
      if (a.interval && a.interval->end_us > t0 && a.interval->begin_us < t1) out.push_back(std::move(a));
    }
  };
  const double pre = t0 - padding_us_;
  if (pre < 0.0) {
    const auto nblocks = static_cast<std::uint64_t>(std::ceil(-pre / options_.block_us));
    for (std::uint64_t n = nblocks; n >= 1; --n) take(pre_run_block(n));
  }
  if (hi >= 0.0) {
    const auto k0 = static_cast<std::uint64_t>(std::floor(lo / options_.block_us));
    const auto k1 = static_cast<std::uint64_t>(std::floor(hi / options_.block_us));
    for (std::uint64_t k = k0; k <= k1; ++k) take(block(k));
  }
  return out;
}

std::vector<Arrival> stationary_arrivals(const std::vector<Vec3>& positions, const std::vector<double>& populations,
                                         std::uint64_t seed, double duration_us) {
  std::vector<Arrival> out;
  for (std::size_t i = 0; i < positions.size(); ++i) {
    Rng rng = make_stream(seed, StreamPurpose::kArrivals, kStationaryBase + i);
    Arrival a;
    a.id = kStationaryBase + i;
    a.t_ref_us = 0.0;
    a.position_um = positions[i];
    a.initial_sublevel = sample_sublevel(populations, rng);
    a.interval = Interval{0.0, duration_us};
    out.push_back(std::move(a));
  }
  return out;
}

}  // namespace flyby::source
