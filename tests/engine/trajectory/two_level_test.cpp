// Validation of the quantum-jump integrator on resonance fluorescence of a driven two-level
// atom: steady-state excited population, g2(τ) from simulated click records, and the
// waiting-time distribution, each against its published closed form.
#include <catch2/catch.hpp>
#include <cmath>
#include <iostream>

#include "engine/common/random.h"
#include "engine/ensemble/ensemble.h"
#include "engine/trajectory/integrator.h"
#include "tests/engine/engine_test_models.h"
#include "tests/engine/test_stats.h"
#include "tests/support/test_seed.h"

using namespace flyby;
using flyby::test::scaled;
using flyby::operators::LocalMatrix;
using flyby::operators::Operator;

namespace {

// ρee = (Ω²/4)/(Δ² + Ω²/2 + Γ²/4) (Loudon, "The Quantum Theory of Light"; REFERENCES.md).
double rho_ee(double omega, double gamma, double delta) {
  return (omega * omega / 4) / (delta * delta + omega * omega / 2 + gamma * gamma / 4);
}

// g2(τ) at Δ = 0: Kimble & Mandel, Phys. Rev. A 13, 2123 (1976):
// 1 − e^{−3Γτ/4}[cos μτ + (3Γ/4μ) sin μτ], μ = √(Ω² − Γ²/16) (μ real for Ω > Γ/4).
double g2_kimble_mandel(double omega, double gamma, double tau) {
  const double mu = std::sqrt(omega * omega - gamma * gamma / 16);
  return 1 - std::exp(-0.75 * gamma * tau) * (std::cos(mu * tau) + 0.75 * gamma / mu * std::sin(mu * tau));
}

// Waiting-time density, Plenio & Knight, Rev. Mod. Phys. 70, 101 (1998):
// w(τ) = [ΓΩ²/(Ω² − Γ²/4)] e^{−Γτ/2} sin²(½√(Ω² − Γ²/4) τ); for Ω < Γ/2 the root is imaginary
// (sin² → −sinh²), and at Ω = Γ/2 the limit is ΓΩ² τ²/4 e^{−Γτ/2}.
double waiting_density(double omega, double gamma, double tau) {
  const double s = omega * omega - gamma * gamma / 4;
  const double e = std::exp(-gamma * tau / 2);
  if (std::abs(s) < 1e-12) return gamma * omega * omega * tau * tau / 4 * e;
  if (s > 0) {
    const double x = std::sin(0.5 * std::sqrt(s) * tau);
    return gamma * omega * omega / s * e * x * x;
  }
  const double x = std::sinh(0.5 * std::sqrt(-s) * tau);
  return gamma * omega * omega / (-s) * e * x * x;
}

}  // namespace

TEST_CASE("reference formulas reproduce the check values of REFERENCES.md", "[two-level]") {
  // [derived] values in REFERENCES.md (Kimble & Mandel 1976; Plenio & Knight 1998), Ω = Γ = 1.
  CHECK(g2_kimble_mandel(1, 1, 0.5) == Approx(0.143909).margin(1e-6));
  CHECK(g2_kimble_mandel(1, 1, 1.0) == Approx(0.430831).margin(1e-6));
  CHECK(g2_kimble_mandel(1, 1, 2.0) == Approx(0.918384).margin(1e-6));
  CHECK(g2_kimble_mandel(1, 1, 3.0) == Approx(1.083300).margin(1e-6));
  CHECK(waiting_density(1, 1, 1.0) == Approx(0.1423894).margin(1e-7));
  // Normalization and mean (Γ² + 2Ω²)/(ΓΩ²) = 3/Γ of the waiting-time density.
  const double norm = test::simpson([](double t) { return waiting_density(1, 1, t); }, 0, 80, 4000);
  const double mean = test::simpson([](double t) { return t * waiting_density(1, 1, t); }, 0, 80, 4000);
  CHECK(norm == Approx(1.0).margin(1e-9));
  CHECK(mean == Approx(3.0).margin(1e-8));
}

TEST_CASE("two-level atom: excited population and click rate match the steady state", "[two-level][mc]") {
  const std::uint64_t seed = test::seed("two-level steady state");
  const double gamma = 1.0;
  struct Case { double omega, delta; };
  for (Case c : {Case{0.5, 0.0}, Case{1.0, 0.0}, Case{3.0, 0.0}, Case{1.0, 1.0}}) {
    const double t_burn = 10, t_end = 60;
    trajectory::Options opt;
    for (double t = t_burn; t <= t_end + 1e-9; t += 0.5) opt.sample_times_us.push_back(t);
    const LocalMatrix sm = test::sigma_minus();
    opt.observables = {Operator::local(0, sm.adjoint() * sm)};
    trajectory::Integrator integ(test::two_level(c.omega, gamma, c.delta, t_end), opt);
    auto res = ensemble::run(integ, std::size_t(scaled(160)), seed);
    REQUIRE(res.summary.failed == 0);
    test::Welford pop, rate;
    for (const auto& tr : res.trajectories) {
      double s = 0;
      for (const auto& row : tr.samples) s += row[0].real();
      pop.add(s / double(tr.samples.size()));
      long n = 0;
      for (const auto& j : tr.jumps) n += (j.time_us >= t_burn);
      rate.add(double(n) / (t_end - t_burn) / gamma);
    }
    const double expect = rho_ee(c.omega, gamma, c.delta);
    INFO("Omega " << c.omega << " Delta " << c.delta << ": rho_ee " << pop.mean << " +- " << pop.standard_error()
                  << ", click rate/Gamma " << rate.mean << " +- " << rate.standard_error() << ", expected " << expect);
    REQUIRE(std::isfinite(pop.mean));
    REQUIRE(std::isfinite(rate.mean));
    // 5 standard errors of the trajectory means (trajectories are independent).
    CHECK(std::abs(pop.mean - expect) <= 5 * pop.standard_error());
    CHECK(std::abs(rate.mean - expect) <= 5 * rate.standard_error());
  }
}

TEST_CASE("two-level atom: g2(tau) from click records matches Kimble and Mandel", "[two-level][mc]") {
  const std::uint64_t seed = test::seed("two-level g2");
  const double gamma = 1.0, t_end = 1500, t_burn = 20, tau_max = 6, bin = 0.25;
  const int nbins = int(tau_max / bin);
  for (double omega : {1.0, 3.0}) {
    trajectory::Integrator integ(test::two_level(omega, gamma, 0.0, t_end));
    auto res = ensemble::run(integ, std::size_t(scaled(100)), seed);
    REQUIRE(res.summary.failed == 0);
    std::vector<double> counts(nbins, 0.0);
    double heralds = 0;
    for (const auto& tr : res.trajectories) {
      const auto& j = tr.jumps;
      for (std::size_t a = 0; a < j.size(); ++a) {
        if (j[a].time_us < t_burn || j[a].time_us > t_end - tau_max) continue;
        heralds += 1;
        for (std::size_t b = a + 1; b < j.size() && j[b].time_us - j[a].time_us < tau_max; ++b)
          counts[std::size_t((j[b].time_us - j[a].time_us) / bin)] += 1;
      }
    }
    // Expected pairs: heralds × R × ∫_bin g2, R = Γ ρee (stationary rate).
    const double rate = gamma * rho_ee(omega, gamma, 0.0);
    double chi2 = 0;
    int dof = 0;
    for (int k = 0; k < nbins; ++k) {
      const double expect =
          heralds * rate * test::simpson([&](double t) { return g2_kimble_mandel(omega, gamma, t); }, k * bin, (k + 1) * bin, 16);
      REQUIRE(std::isfinite(counts[k]));
      if (expect < 10) continue;  // the first bins near τ = 0 are nearly empty (antibunching)
      chi2 += (counts[k] - expect) * (counts[k] - expect) / expect;
      ++dof;
    }
    // Antibunching: pairs in the first bin are far below the uncorrelated level.
    CHECK(counts[0] < 0.2 * heralds * rate * bin);
    REQUIRE(dof >= nbins / 2);  // only the antibunching dip near τ = 0 is skipped
    const double bound = test::chi2_bound(dof, 1e-6);
    INFO("Omega " << omega << ": heralds " << heralds << ", chi2 " << chi2 << " for " << dof << " bins, bound (p = 1e-6) " << bound);
    CHECK(chi2 <= bound);
  }
}

namespace {

void check_waiting_times(double omega, bool exact, std::uint64_t seed) {
  const double gamma = 1.0, bin = 0.25, tau_max = 14;
  trajectory::Options opt;
  opt.exact_exponential = exact;
  trajectory::Integrator integ(test::two_level(omega, gamma, 0.0, 4000), opt);
  auto res = ensemble::run(integ, std::size_t(scaled(30)), seed);
  REQUIRE(res.summary.failed == 0);
  const int nbins = int(tau_max / bin);
  std::vector<double> counts(nbins + 1, 0.0);
  test::Welford mean;
  double n = 0;
  for (const auto& tr : res.trajectories) {
    // After each jump the atom is in |g⟩, so successive intervals are independent draws of w.
    for (std::size_t k = 1; k < tr.jumps.size(); ++k) {
      const double tau = tr.jumps[k].time_us - tr.jumps[k - 1].time_us;
      counts[std::min<std::size_t>(nbins, std::size_t(tau / bin))] += 1;
      mean.add(tau);
      n += 1;
    }
  }
  double chi2 = 0, covered = 0;
  for (int k = 0; k <= nbins; ++k) {
    double p;
    if (k < nbins) {
      p = test::simpson([&](double t) { return waiting_density(omega, gamma, t); }, k * bin, (k + 1) * bin, 16);
      covered += p;
    } else {
      p = 1 - covered;
    }
    const double expect = n * p;
    chi2 += (counts[k] - expect) * (counts[k] - expect) / expect;
  }
  const double bound = test::chi2_bound(nbins, 1e-6);
  const double mean_expect = (gamma * gamma + 2 * omega * omega) / (gamma * omega * omega);  // Plenio & Knight
  INFO("Omega " << omega << (exact ? " exact" : " adaptive") << ": " << n << " intervals, chi2 " << chi2 << " for "
                << nbins << " dof, bound (p = 1e-6) " << bound << "; mean " << mean.mean << " +- "
                << mean.standard_error() << " vs " << mean_expect);
  REQUIRE(std::isfinite(chi2));
  CHECK(chi2 <= bound);
  CHECK(std::abs(mean.mean - mean_expect) <= 5 * mean.standard_error());
}

}  // namespace

TEST_CASE("two-level atom: waiting-time histogram matches Plenio and Knight (exact exponential)", "[two-level][mc]") {
  const std::uint64_t seed = test::seed("two-level waiting time exact");
  for (double omega : {1.0, 3.0}) check_waiting_times(omega, true, seed);
  // Ω = Γ/2 is an exceptional point of H_eff (defective): the integrator must notice the
  // ill-conditioned eigenvectors and integrate adaptively instead.
  check_waiting_times(0.5, true, seed + 1);
}

TEST_CASE("two-level atom: waiting-time histogram matches Plenio and Knight (adaptive integrator)", "[two-level][mc]") {
  const std::uint64_t seed = test::seed("two-level waiting time adaptive");
  check_waiting_times(1.0, false, seed);
}

namespace {

// No-jump norm ‖ψ(τ)‖² of the resonantly driven two-level atom started in |g⟩: with
// H_eff = (Ω/2)σx − (iΓ/2)|e⟩⟨e| and s = √(Ω² − Γ²/4) (Ω > Γ/2),
// c_g = e^{−Γτ/4}[cos(sτ/2) + (Γ/2s) sin(sτ/2)], c_e = −i(Ω/s) e^{−Γτ/4} sin(sτ/2); its
// derivative −Γ|c_e|² is the waiting-time density of Plenio & Knight above.
double survival(double omega, double gamma, double tau) {
  const double s = std::sqrt(omega * omega - gamma * gamma / 4);
  const double e = std::exp(-gamma * tau / 2);
  const double cg = std::cos(s * tau / 2) + gamma / (2 * s) * std::sin(s * tau / 2);
  const double ce = omega / s * std::sin(s * tau / 2);
  return e * (cg * cg + ce * ce);
}

}  // namespace

TEST_CASE("two-level atom: every waiting time is the root of the closed-form norm to the stated tolerance", "[two-level]") {
  // The exact path finds τ with ‖ψ(τ)‖² = r by a safeguarded Halley iteration started from a
  // guess fitted to the earlier waiting times. Replay the stream (r, then per jump the channel
  // draw and the next r) and locate each root of survival(τ) = r by bisection to 1e-13 µs.
  const std::uint64_t seed = test::seed("two-level waiting-time roots");
  for (double omega : {1.0, 3.0}) {
    const double gamma = 1.0;
    trajectory::Options opt;
    auto model = test::two_level(omega, gamma, 0.0, 400.0);
    auto rng = make_stream(seed, StreamPurpose::kTest, omega > 2 ? 1 : 0);
    auto replay = rng;
    auto res = trajectory::Integrator(model, opt).run(rng);
    REQUIRE(res.summary.ok());
    REQUIRE(res.summary.exact_stretches == 1);
    REQUIRE(res.jumps.size() > 50);
    double r = uniform_open0(replay), prev = 0, worst = 0;
    for (const auto& jump : res.jumps) {
      const double tau = jump.time_us - prev;
      double lo = 0, hi = tau + 10.0;
      REQUIRE(survival(omega, gamma, hi) < r);
      while (hi - lo > 1e-13) {
        const double mid = 0.5 * (lo + hi);
        (survival(omega, gamma, mid) > r ? lo : hi) = mid;
      }
      worst = std::max(worst, std::abs(tau - 0.5 * (lo + hi)));
      prev = jump.time_us;
      uniform_open0(replay);  // channel choice
      r = uniform_open0(replay);
    }
    INFO("Omega " << omega << ": " << res.jumps.size() << " jumps, worst |tau - root| " << worst << " us, tolerance "
                  << opt.jump_time_tolerance_us << " us");
    // Rounding of the jump times (≈ 400 µs · 1e-16) is far below the tolerance.
    CHECK(worst <= opt.jump_time_tolerance_us);
  }
}
