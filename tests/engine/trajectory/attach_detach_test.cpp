// An atom that enters a driven resonator mid-trajectory (attached in a superposition), couples
// with a Gaussian transit profile g(t) and is detached later (Born-rule measurement) must give
// the statistics of the corresponding time-dependent master equation (ρ → ρ ⊗ |φ⟩⟨φ| at entry,
// partial trace at exit): click densities per channel, mean photon number, and the detach
// outcomes. This exercises events, adaptive stretches and exact stretches in one trajectory.
#include <catch2/catch.hpp>
#include <cmath>

#include "engine/ensemble/ensemble.h"
#include "engine/master/master_solver.h"
#include "tests/engine/engine_test_models.h"
#include "tests/engine/test_stats.h"
#include "tests/support/test_seed.h"

using namespace flyby;
using operators::Complex;
using operators::LocalMatrix;
using operators::Operator;

namespace {

trajectory::Model transit_model() {
  const int cutoff = 5;
  const double kappa = 1, gamma = 1, drive = 0.6, g0 = 1.5, t_in = 5, t_out = 15, t_mid = 10, width = 3;
  auto m = test::resonator(0, kappa, gamma, drive, 0, cutoff, 25.0);
  m.subsystems.push_back(space::Subsystem::levels("atom", 2));
  const LocalMatrix a = test::annihilation(cutoff), sm = test::sigma_minus();
  auto g = [=](double t) { return Complex(g0 * std::exp(-(t - t_mid) * (t - t_mid) / (width * width)), 0.0); };
  m.hamiltonian.add_hermitian(operators::Coefficient::of_time(g), Operator::product({{0, a.adjoint()}, {1, sm}}));
  m.channels.push_back({"atom", true, Operator::local(1, sm, std::sqrt(gamma))});
  m.physical_decay += Operator::local(1, sm.adjoint() * sm, gamma);
  space::Vector phi(2);
  phi << 1 / std::sqrt(2.0), Complex(0, 1) / std::sqrt(2.0);
  m.events.push_back({t_in, trajectory::Attach{1, phi}});
  m.events.push_back({t_out, trajectory::Detach{1}});
  return m;
}

}  // namespace

TEST_CASE("atom attached and detached mid-trajectory matches the time-dependent master equation", "[attach][mc]") {
  const std::uint64_t seed = test::seed("attach detach");
  const auto model = transit_model();
  const LocalMatrix a = test::annihilation(5), sm = test::sigma_minus();
  const Operator n_op = Operator::local(0, a.adjoint() * a), ee = Operator::local(1, sm.adjoint() * sm);

  // Master equation on a fine grid: densities 2κ⟨a†a⟩ and Γ⟨σ+σ−⟩ (atom terms vanish while absent).
  const double dt = 0.025, bin = 0.5, t_end = 25;
  std::vector<double> grid;
  for (int k = 0; k <= int(t_end / dt + 0.5); ++k) grid.push_back(k * dt);
  master::Options mo;
  mo.max_step_us = 0.1;
  master::MasterSolver solver(model, mo);
  const auto me = solver.evolve(grid, {n_op, ee});
  REQUIRE(me.times_us.size() == grid.size());

  trajectory::Options opt;
  opt.sample_times_us = {2.5, 7.5, 10.0, 12.5, 20.0};
  opt.observables = {n_op};
  trajectory::Integrator integ(model, opt);
  const long m = test::scaled(2000);
  auto res = ensemble::run(integ, std::size_t(m), seed);
  REQUIRE(res.summary.failed == 0);

  // Click densities: per-trajectory counts per bin; standard errors from the sample variance.
  const int nbins = int(t_end / bin), per_bin = int(bin / dt + 0.5);
  for (int channel = 0; channel < 2; ++channel) {
    std::vector<test::Welford> w(nbins);
    for (const auto& tr : res.trajectories) {
      std::vector<double> c(nbins, 0.0);
      for (const auto& j : tr.jumps)
        if (j.channel == channel) c[std::min(nbins - 1, int(j.time_us / bin))] += 1;
      for (int k = 0; k < nbins; ++k) w[k].add(c[k]);
    }
    double chi2 = 0;
    int dof = 0;
    for (int k = 0; k < nbins; ++k) {
      // Simpson over the grid points inside bin k; the rate is κ- or Γ-weighted population.
      double expect = 0;
      for (int i = 0; i <= per_bin; ++i) {
        const auto& e = me.expectations[std::size_t(k * per_bin + i)];
        const double rate = channel == 0 ? 2.0 * e[0].real() : e[1].real();
        expect += rate * (i == 0 || i == per_bin ? 1 : (i % 2 ? 4 : 2));
      }
      expect *= dt / 3;
      if (expect * double(m) < 10) continue;  // no atom in this bin (atom channel)
      const double se = w[k].standard_error();
      REQUIRE(se > 0);
      chi2 += (w[k].mean - expect) * (w[k].mean - expect) / (se * se);
      ++dof;
    }
    const double bound = test::chi2_bound(dof, 1e-6);
    INFO("channel " << channel << ": chi2 " << chi2 << " for " << dof << " bins, bound (p = 1e-6) " << bound);
    REQUIRE(std::isfinite(chi2));
    CHECK(dof >= (channel == 0 ? nbins : 15));
    CHECK(chi2 <= bound);
  }
  // Mean photon number at the sample times.
  for (std::size_t k = 0; k < opt.sample_times_us.size(); ++k) {
    test::Welford w;
    for (const auto& tr : res.trajectories) w.add(tr.samples[k][0].real());
    const auto idx = std::size_t(opt.sample_times_us[k] / dt + 0.5);
    const double expect = me.expectations[idx][0].real();
    INFO("t = " << opt.sample_times_us[k] << ": <n> " << w.mean << " +- " << w.standard_error() << " vs master " << expect);
    CHECK(std::abs(w.mean - expect) <= 5 * w.standard_error());
  }
  // Detach outcomes: P(excited) = ρee just before t = 15 (the master sample at an event time is
  // taken before the event).
  const double p_e = me.expectations[std::size_t(15.0 / dt + 0.5)][1].real();
  double excited = 0;
  long measured = 0;
  for (const auto& tr : res.trajectories) {
    REQUIRE(tr.measurements.size() == 1);
    CHECK(tr.measurements[0].time_us == 15.0);
    excited += tr.measurements[0].outcome;
    ++measured;
  }
  const double se = std::sqrt(p_e * (1 - p_e) / double(measured));
  INFO("detach: excited fraction " << excited / double(measured) << " vs master " << p_e << " (se " << se << ")");
  CHECK(std::abs(excited / double(measured) - p_e) <= 5 * se);
  // The stretch with the transit coupling is time dependent: it must have been integrated adaptively.
  CHECK(res.trajectories[0].summary.adaptive_stretches >= 1);
  CHECK(res.trajectories[0].summary.exact_stretches >= 1);
}
