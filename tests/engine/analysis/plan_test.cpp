// Checks of the integration-time planner (engine/analysis/plan.h): the Poisson Fisher
// information against the derived check value of shared/REFERENCES.md, the Rife–Boorstyn
// Cramér–Rao bound for a sinusoid in white noise, and the 1/√T scaling of the targets.
#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>

#include "engine/analysis/plan.h"
#include "engine/common/errors.h"

using namespace flyby::analysis;

namespace {
// Rates that give `counts` coincidences per bin per second with bin width w_ns.
BeatHistogramModel model_with_counts(double counts, double w_ns) {
  BeatHistogramModel m;
  m.start_rate_per_s = m.stop_rate_per_s = std::sqrt(counts / (w_ns * 1e-9));
  m.bin_width_ns = w_ns;
  return m;
}
}  // namespace

TEST_CASE("planner reproduces the derived sigma_f of REFERENCES.md", "[plan]") {
  // shared/REFERENCES.md, "Estimation limits" [derived]: 1000 bins of 10 ns, 1000 counts/bin,
  // contrast 0.05, f = 1 MHz, undamped: σ_f = 1565.5 Hz (background, contrast, frequency and
  // phase all unknown). Tolerance: half a unit of the quoted last digit.
  auto m = model_with_counts(1000, 10);
  m.range_ns = 10000;  // bins k = 0..999
  m.contrast = 0.05;
  m.beat_MHz = 1.0;
  const auto r = plan_integration(m, {});
  REQUIRE(r.status == PlanStatus::kSuccess);
  REQUIRE(r.bins == 1000);
  REQUIRE(std::abs(r.counts_per_bin_per_s - 1000) < 1e-9);
  REQUIRE(std::isfinite(r.sigma_freq_kHz_at_1s));
  REQUIRE(std::abs(r.sigma_freq_kHz_at_1s * 1e3 - 1565.5) < 0.05);
}

TEST_CASE("planner meets the Rife-Boorstyn bound in the Gaussian limit", "[plan]") {
  // Real sinusoid A cos(2π f nΔ + φ) in white Gaussian noise of variance σ², N samples, A, f, φ
  // unknown: var(f) >= 12 / ((2π)² η N (N² − 1) Δ²) with η = A²/(2σ²) — D. C. Rife and
  // R. R. Boorstyn, IEEE Trans. Inf. Theory 20, 591 (1974); S. M. Kay, "Fundamentals of
  // Statistical Signal Processing I" (1993), eq. for the sinusoidal frequency CRB [memory].
  // Poisson counts with small contrast are that case: A = B C, σ² ≈ B. The bound is asymptotic:
  // neglected terms are of relative order 1/(π × number of periods) (the offset B and the
  // double-frequency sums) and of order C (variance modulation by the signal).
  for (double f_MHz : {3.7, 11.3}) {
    const double C = 0.002, B = 1000, w_ns = 10;
    auto m = model_with_counts(B, w_ns);
    m.range_ns = 10000;
    m.contrast = C;
    m.beat_MHz = f_MHz;
    const auto r = plan_integration(m, {});
    REQUIRE(r.status == PlanStatus::kSuccess);
    const double N = r.bins, dt_s = w_ns * 1e-9;
    const double eta = (B * C) * (B * C) / (2 * B);
    const double crb_Hz = std::sqrt(12 / (std::pow(2 * std::numbers::pi, 2) * eta * N * (N * N - 1))) / dt_s;
    const double periods = f_MHz * 1e6 * N * dt_s;
    const double tol = 1 / (std::numbers::pi * periods) + C;
    INFO("f " << f_MHz << " MHz: planner " << r.sigma_freq_kHz_at_1s * 1e3 << " Hz, Rife-Boorstyn " << crb_Hz << " Hz");
    REQUIRE(std::isfinite(r.sigma_freq_kHz_at_1s));
    REQUIRE(std::abs(r.sigma_freq_kHz_at_1s * 1e3 / crb_Hz - 1) < tol);
  }
}

TEST_CASE("planner targets scale as 1/sqrt(T) and parse their names", "[plan]") {
  auto m = model_with_counts(10, 1);
  m.range_ns = 2000;
  m.contrast = 0.1;
  m.beat_MHz = 2.5;
  m.decay_us = 1.0;
  const auto r = plan_integration(m, {PlanTarget::parse("beat-freq-kHz=0.5"), PlanTarget::parse("beat-significance=5")});
  REQUIRE(r.status == PlanStatus::kSuccess);
  REQUIRE(r.duration_s.size() == 2);
  // At the planned times the targets are met exactly (σ ∝ 1/√T follows from I ∝ T).
  REQUIRE(std::abs(r.sigma_freq_kHz(r.duration_s[0]) / 0.5 - 1) < 1e-12);
  REQUIRE(std::abs(r.significance(r.duration_s[1]) / 5 - 1) < 1e-12);
  // Damping can only lose information: σ_f grows when a decay is added.
  auto undamped = m;
  undamped.decay_us.reset();
  REQUIRE(plan_integration(undamped, {}).sigma_freq_kHz_at_1s < r.sigma_freq_kHz_at_1s);
  REQUIRE_THROWS_AS(PlanTarget::parse("beat-freq=1"), flyby::InputError);
  REQUIRE_THROWS_AS(PlanTarget::parse("beat-significance=-2"), flyby::InputError);
  REQUIRE_THROWS_AS(PlanTarget::parse("beat-significance=5x"), flyby::InputError);
  m.contrast = 1.5;
  REQUIRE_THROWS_AS(plan_integration(m, {}), flyby::InputError);
}
