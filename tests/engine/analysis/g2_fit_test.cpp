// Checks of the g2 fits (engine/analysis/g2_fit.h) on synthetic beat histograms drawn from
// Poisson counts: reported errors cover the true parameters ~68 % of the time, and the scatter
// of the fitted beat frequency matches the planner's Cramér–Rao σ_f (engine/analysis/plan.h).
#include <catch2/catch.hpp>

#include <gsl/gsl_cdf.h>

#include <cmath>
#include <numbers>
#include <random>

#include "engine/analysis/g2_fit.h"
#include "engine/analysis/plan.h"
#include "engine/common/errors.h"
#include "engine/common/random.h"
#include "tests/support/test_seed.h"

using namespace flyby::analysis;

namespace {

struct Truth {
  double counts_per_bin = 400;  // B
  double contrast = 0.1, f_MHz = 2.0, decay_us = 2.0, phase = 0.3;
  double w_ns = 10;
  int bins = 500;
};

// A heralded-beat histogram μ_k = B [1 + C e^{−τ/τd} cos(2π f τ + φ)], τ_k = kW, Poisson counts,
// normalized as the correlator does (g2 = counts / B, error √counts / B).
G2Data draw(const Truth& t, flyby::Rng& rng) {
  G2Data d;
  for (int k = 0; k < t.bins; ++k) {
    const double tau = k * t.w_ns * 1e-3;
    const double mu = t.counts_per_bin * (1 + t.contrast * std::exp(-tau / t.decay_us) *
                                                  std::cos(2 * std::numbers::pi * t.f_MHz * tau + t.phase));
    std::poisson_distribution<long> pd(mu);
    const double c = static_cast<double>(pd(rng));
    d.tau_us.push_back(tau);
    d.g2.push_back(c / t.counts_per_bin);
    d.g2_err.push_back(std::sqrt(c) / t.counts_per_bin);
  }
  return d;
}

}  // namespace

TEST_CASE("g2 model gradients match finite differences", "[g2fit]") {
  // Property check of the analytic Jacobian the fitter relies on (central differences, error
  // O(h²) with h = 1e-6 relative: tolerance 1e-6 relative to the gradient scale).
  const G2Model m = G2Model::parse("level+beat+transit_gauss+transit_exp+dip");
  const std::vector<double> p{1.0, 0.2, 3.1, 0.7, 0.4, 0.3, 0.25, 0.1, 0.9, 0.2, 0.05};
  REQUIRE(static_cast<int>(p.size()) == m.parameter_count());
  std::vector<double> g(p.size()), gd(p.size());
  for (double tau : {-0.8, -0.01, 0.0, 0.33, 1.7}) {
    m.evaluate(p, tau, g);
    for (std::size_t i = 0; i < p.size(); ++i) {
      auto a = p, b = p;
      const double h = 1e-6 * std::max(1.0, std::abs(p[i]));
      a[i] += h;
      b[i] -= h;
      const double num = (m.evaluate(a, tau, gd) - m.evaluate(b, tau, gd)) / (2 * h);
      REQUIRE(std::isfinite(g[i]));
      REQUIRE(std::abs(num - g[i]) < 1e-6 * (1 + std::abs(g[i])));
    }
  }
  REQUIRE_THROWS_AS(G2Model::parse("level+wobble"), flyby::InputError);
  REQUIRE(m.parameter_names()[1] == "beat.amplitude");
}

TEST_CASE("beat fits cover the truth at 68 % and scatter like the planner's sigma_f", "[g2fit][plan]") {
  const std::uint64_t seed = flyby::test::seed("g2 fit coverage");
  const Truth t;
  const int M = 300;
  // Fit parameters (model "beats" = level + beat): level 1, amplitude C, f, τd, φ.
  const std::vector<double> truth{1.0, t.contrast, t.f_MHz, t.decay_us, t.phase};
  std::vector<int> covered(truth.size(), 0);
  double mean_f = 0, m2_f = 0;  // Welford
  int converged = 0;
  for (int i = 0; i < M; ++i) {
    auto rng = flyby::make_stream(seed, flyby::StreamPurpose::kTest, 1000 + static_cast<std::uint64_t>(i));
    const auto r = fit_g2(draw(t, rng), G2FitOptions{});
    REQUIRE(r.fit.ok());
    ++converged;
    for (std::size_t j = 0; j < truth.size(); ++j) {
      REQUIRE(std::isfinite(r.fit.parameters[j]));
      REQUIRE(std::isfinite(r.fit.standard_errors[j]));
      if (std::abs(r.fit.parameters[j] - truth[j]) <= r.fit.standard_errors[j]) ++covered[j];
    }
    const double f = r.fit.parameters[2];
    const double d = f - mean_f;
    mean_f += d / (i + 1);
    m2_f += d * (f - mean_f);
  }
  // Coverage of ±1σ intervals: P = erf(1/√2) = 0.6827 for a Gaussian estimator (common
  // practice, no source); binomial standard error √(P(1−P)/M); bound 4 standard errors.
  const double P = std::erf(1 / std::sqrt(2.0));
  const double se = std::sqrt(P * (1 - P) / M);
  for (std::size_t j = 0; j < truth.size(); ++j) {
    INFO("parameter " << j << " covered " << covered[j] << " of " << M);
    REQUIRE(std::abs(covered[j] / double(M) - P) < 4 * se);
  }
  // Scatter of the fitted frequency against the planner for the same histogram (B counts/bin
  // for 1 s): (M−1)s²/σ² follows χ²_{M−1} if the fits reach the Cramér–Rao bound; accept the
  // central 1 − 2e-4 of that law (gsl_cdf_chisq_Pinv / Qinv).
  BeatHistogramModel pm;
  pm.start_rate_per_s = pm.stop_rate_per_s = std::sqrt(t.counts_per_bin / (t.w_ns * 1e-9));
  pm.bin_width_ns = t.w_ns;
  pm.range_ns = t.bins * t.w_ns;
  pm.contrast = t.contrast;
  pm.beat_MHz = t.f_MHz;
  pm.decay_us = t.decay_us;
  pm.phase_rad = t.phase;
  const auto plan = plan_integration(pm, {});
  REQUIRE(plan.bins == t.bins);
  const double sigma_plan_MHz = plan.sigma_freq_kHz_at_1s * 1e-3;
  const double stat = m2_f / (sigma_plan_MHz * sigma_plan_MHz);
  INFO("fit scatter " << std::sqrt(m2_f / (M - 1)) * 1e3 << " kHz, planner " << sigma_plan_MHz * 1e3 << " kHz");
  REQUIRE(std::isfinite(stat));
  REQUIRE(stat > gsl_cdf_chisq_Pinv(1e-4, M - 1));
  REQUIRE(stat < gsl_cdf_chisq_Qinv(1e-4, M - 1));
  // The mean frequency is unbiased within 5 standard errors of the mean.
  REQUIRE(std::abs(mean_f - t.f_MHz) < 5 * std::sqrt(m2_f / (M - 1) / M));
}

TEST_CASE("automatic starting values find two beats and a transit envelope", "[g2fit]") {
  const std::uint64_t seed = flyby::test::seed("g2 fit two beats");
  auto rng = flyby::make_stream(seed, flyby::StreamPurpose::kTest, 7);
  // g2 = 1 + 0.3 e^{−τ²/0.8²} + 0.08 e^{−τ/1.5} cos(2π 3.2 τ + 0.5) + 0.05 e^{−τ/1} cos(2π 7.9 τ − 1),
  // 1500 counts per bin, τ from 0 to 4 µs in 5 ns bins.
  const G2Model truth_model = G2Model::parse("level+transit_gauss+beat+beat");
  const std::vector<double> truth{1.0, 0.3, 0.8, 0.08, 3.2, 1.5, 0.5, 0.05, 7.9, 1.0, -1.0};
  const double E = 1500;
  G2Data d;
  std::vector<double> g(truth.size());
  for (int k = 0; k < 800; ++k) {
    const double tau = k * 0.005;
    std::poisson_distribution<long> pd(E * truth_model.evaluate(truth, tau, g));
    const double c = static_cast<double>(pd(rng));
    d.tau_us.push_back(tau);
    d.g2.push_back(c / E);
    d.g2_err.push_back(std::sqrt(c) / E);
  }
  G2FitOptions o;
  o.model = "level+transit_gauss+beat+beat";
  const auto r = fit_g2(d, o);
  INFO(r.full_report());
  REQUIRE(r.fit.ok());
  // χ² of a correct model with Poisson weights: p-value not tiny.
  REQUIRE(r.fit.p_value > 1e-4);
  // Both beat frequencies found (in either order) within 5 reported standard errors.
  const double f1 = r.fit.parameters[4], f2 = r.fit.parameters[8];
  const double s1 = r.fit.standard_errors[4], s2 = r.fit.standard_errors[8];
  const bool direct = std::abs(f1 - 3.2) < 5 * s1 && std::abs(f2 - 7.9) < 5 * s2;
  const bool swapped = std::abs(f1 - 7.9) < 5 * s1 && std::abs(f2 - 3.2) < 5 * s2;
  REQUIRE((direct || swapped));
  REQUIRE(std::abs(r.fit.parameters[2] - 0.8) < 5 * r.fit.standard_errors[2]);
}
