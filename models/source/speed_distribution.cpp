// Speed distributions of the atomic beam (see speed_distribution.h).
#include "models/source/speed_distribution.h"

#include <cmath>
#include <numbers>

#include "engine/common/constants.h"
#include "engine/common/errors.h"

namespace flyby::source {

std::string to_string(SpeedKind kind) {
  switch (kind) {
    case SpeedKind::kEffusive: return "effusive";
    case SpeedKind::kMonochromatic: return "monochromatic";
    case SpeedKind::kGaussian: return "gaussian";
  }
  return "effusive";
}

std::optional<SpeedKind> speed_kind_from_string(const std::string& s) {
  for (auto k : {SpeedKind::kEffusive, SpeedKind::kMonochromatic, SpeedKind::kGaussian}) {
    if (to_string(k) == s) return k;
  }
  return std::nullopt;
}

double effusive_alpha_m_per_s(double temperature_K, double mass_u) {
  return std::sqrt(2.0 * constants::kB_J_per_K * temperature_K / (mass_u * constants::u_kg));
}

void validate(const SpeedSpec& s) {
  switch (s.kind) {
    case SpeedKind::kEffusive:
      if (!(std::isfinite(s.oven_temperature_K) && s.oven_temperature_K > 0.0)) {
        throw InputError("oven temperature must be > 0 K");
      }
      if (!(s.mass_u > 0.0)) throw InputError("atomic mass must be > 0");
      break;
    case SpeedKind::kMonochromatic:
      if (!(std::isfinite(s.speed_m_per_s) && s.speed_m_per_s > 0.0)) throw InputError("speed must be > 0 m/s");
      break;
    case SpeedKind::kGaussian:
      if (!(std::isfinite(s.speed_m_per_s) && s.speed_m_per_s > 0.0)) throw InputError("speed must be > 0 m/s");
      if (!(std::isfinite(s.spread_m_per_s) && s.spread_m_per_s >= 0.0)) throw InputError("speed spread must be ≥ 0 m/s");
      if (s.spread_m_per_s * 4.0 > s.speed_m_per_s) {
        throw InputError("Gaussian speed spread must be at most a quarter of the mean speed");
      }
      break;
  }
}

double standard_normal(Rng& rng) {
  const double u1 = uniform_open0(rng);
  const double u2 = uniform_open0(rng);
  return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * std::numbers::pi * u2);
}

double sample_speed(const SpeedSpec& s, Rng& rng) {
  switch (s.kind) {
    case SpeedKind::kEffusive: {
      const double alpha = effusive_alpha_m_per_s(s.oven_temperature_K, s.mass_u);
      const double x = -std::log(uniform_open0(rng) * uniform_open0(rng));
      return alpha * std::sqrt(x);
    }
    case SpeedKind::kMonochromatic: return s.speed_m_per_s;
    case SpeedKind::kGaussian: {
      for (;;) {
        const double v = s.speed_m_per_s + s.spread_m_per_s * standard_normal(rng);
        if (v > 0.0) return v;
      }
    }
  }
  return s.speed_m_per_s;
}

namespace {
// ∫ f(v) h(v) dv / ∫ f(v) dv for the Gaussian (composite Simpson over ±8σ, 2000 panels; the
// integrand is smooth and μ ≥ 4σ keeps 1/v bounded by 4/μ·… well inside the range).
template <class H>
double gaussian_average(const SpeedSpec& s, H h) {
  if (s.spread_m_per_s == 0.0) return h(s.speed_m_per_s);
  const double lo = std::max(s.speed_m_per_s - 8.0 * s.spread_m_per_s, 1e-9 * s.speed_m_per_s);
  const double hi = s.speed_m_per_s + 8.0 * s.spread_m_per_s;
  const int n = 2000;
  const double dv = (hi - lo) / n;
  double num = 0.0, den = 0.0;
  for (int i = 0; i <= n; ++i) {
    const double v = lo + i * dv;
    const double w = (i == 0 || i == n) ? 1.0 : (i % 2 ? 4.0 : 2.0);
    const double z = (v - s.speed_m_per_s) / s.spread_m_per_s;
    const double f = std::exp(-0.5 * z * z);
    num += w * f * h(v);
    den += w * f;
  }
  return num / den;
}
}  // namespace

double mean_speed_m_per_s(const SpeedSpec& s) {
  switch (s.kind) {
    case SpeedKind::kEffusive:
      return 0.75 * std::sqrt(std::numbers::pi) * effusive_alpha_m_per_s(s.oven_temperature_K, s.mass_u);
    case SpeedKind::kMonochromatic: return s.speed_m_per_s;
    case SpeedKind::kGaussian: return gaussian_average(s, [](double v) { return v; });
  }
  return s.speed_m_per_s;
}

double mean_inverse_speed_s_per_m(const SpeedSpec& s) {
  switch (s.kind) {
    case SpeedKind::kEffusive:
      return std::sqrt(std::numbers::pi) / (2.0 * effusive_alpha_m_per_s(s.oven_temperature_K, s.mass_u));
    case SpeedKind::kMonochromatic: return 1.0 / s.speed_m_per_s;
    case SpeedKind::kGaussian: return gaussian_average(s, [](double v) { return 1.0 / v; });
  }
  return 1.0 / s.speed_m_per_s;
}

double low_speed_quantile_m_per_s(const SpeedSpec& s, double fraction) {
  switch (s.kind) {
    case SpeedKind::kEffusive: {
      // CDF(x) = 1 − (1+x)e^{−x} ≤ x²/2, so x = √(2·fraction) is a safe (lower) quantile.
      const double alpha = effusive_alpha_m_per_s(s.oven_temperature_K, s.mass_u);
      return alpha * std::sqrt(std::sqrt(2.0 * fraction));
    }
    case SpeedKind::kMonochromatic: return s.speed_m_per_s;
    case SpeedKind::kGaussian: return std::max(s.speed_m_per_s - 8.0 * s.spread_m_per_s, 0.01 * s.speed_m_per_s);
  }
  return s.speed_m_per_s;
}

}  // namespace flyby::source
