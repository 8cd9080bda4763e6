// Trajectories of an F = 1 → F′ = 2 atom in a magnetic field tilted from the drive
// polarization against the built-in master equation (itself checked against numpy/scipy in
// master/multilevel_master_test.cpp): sublevel populations, click rates per polarization
// channel, and heralded polarization cross-correlations (which carry Zeeman beats).
#include <catch2/catch.hpp>
#include <cmath>

#include "engine/ensemble/ensemble.h"
#include "engine/master/master_solver.h"
#include "tests/engine/engine_test_models.h"
#include "tests/engine/test_stats.h"
#include "tests/support/test_seed.h"

using namespace flyby;

TEST_CASE("multilevel atom: populations, rates and heralded correlations match the master equation", "[multilevel][mc]") {
  const std::uint64_t seed = test::seed("multilevel trajectories");
  const test::MultilevelParams p;
  const double t_end = 1500, t_burn = 20, tau_max = 8, bin = 0.25;
  auto model = test::multilevel(p, t_end);
  master::MasterSolver solver(model);
  const auto rho = solver.steady_state();

  trajectory::Options opt;
  for (double t = t_burn; t <= t_end; t += 2.0) opt.sample_times_us.push_back(t);
  for (int i = 0; i < 8; ++i) {
    operators::LocalMatrix proj = operators::LocalMatrix::Zero(8, 8);
    proj(i, i) = 1;
    opt.observables.push_back(operators::Operator::local(0, proj));
  }
  trajectory::Integrator integ(model, opt);
  auto res = ensemble::run(integ, std::size_t(test::scaled(120)), seed);
  REQUIRE(res.summary.failed == 0);

  // Populations (time average per trajectory, then mean ± standard error over trajectories).
  for (int i = 0; i < 8; ++i) {
    test::Welford w;
    for (const auto& tr : res.trajectories) {
      double s = 0;
      for (const auto& row : tr.samples) s += row[i].real();
      w.add(s / double(tr.samples.size()));
    }
    INFO("level " << i << ": " << w.mean << " +- " << w.standard_error() << " vs master " << rho(i, i).real());
    REQUIRE(std::isfinite(w.mean));
    CHECK(std::abs(w.mean - rho(i, i).real()) <= 5 * w.standard_error());
  }
  // Click rates per channel.
  for (int c = 0; c < 3; ++c) {
    test::Welford w;
    for (const auto& tr : res.trajectories) {
      double n = 0;
      for (const auto& j : tr.jumps) n += (j.channel == c && j.time_us >= t_burn);
      w.add(n / (t_end - t_burn));
    }
    INFO("channel " << c << ": rate " << w.mean << " +- " << w.standard_error() << " vs master " << solver.rate(c));
    CHECK(std::abs(w.mean - solver.rate(c)) <= 5 * w.standard_error());
  }
  // Heralded cross-correlations a → b (herald on a click in a, count later clicks in b).
  const int nbins = int(tau_max / bin), sub = 4;
  std::vector<double> grid;
  for (int k = 0; k <= nbins * sub; ++k) grid.push_back(k * bin / sub);
  for (auto [a, b] : {std::pair{0, 1}, std::pair{0, 2}, std::pair{1, 1}}) {
    const auto g2 = solver.g2(a, b, grid);
    const double rate_b = solver.rate(b);
    std::vector<double> counts(nbins, 0.0);
    double heralds = 0;
    for (const auto& tr : res.trajectories) {
      const auto& j = tr.jumps;
      for (std::size_t x = 0; x < j.size(); ++x) {
        if (j[x].channel != a || j[x].time_us < t_burn || j[x].time_us > t_end - tau_max) continue;
        heralds += 1;
        for (std::size_t y = x + 1; y < j.size() && j[y].time_us - j[x].time_us < tau_max; ++y)
          if (j[y].channel == b) counts[std::size_t((j[y].time_us - j[x].time_us) / bin)] += 1;
      }
    }
    double chi2 = 0;
    int dof = 0;
    for (int k = 0; k < nbins; ++k) {
      double integral = 0;
      for (int i = 0; i <= sub; ++i) integral += g2[std::size_t(k * sub + i)] * (i == 0 || i == sub ? 1 : (i % 2 ? 4 : 2));
      integral *= (bin / sub) / 3;
      const double expect = heralds * rate_b * integral;
      if (expect < 10) continue;
      chi2 += (counts[k] - expect) * (counts[k] - expect) / expect;
      ++dof;
    }
    const double bound = test::chi2_bound(std::max(dof, 1), 1e-6);
    INFO("herald " << a << " -> " << b << ": heralds " << heralds << ", chi2 " << chi2 << " for " << dof
                   << " bins, bound (p = 1e-6) " << bound);
    REQUIRE(dof >= nbins / 2);
    CHECK(chi2 <= bound);
  }
}
