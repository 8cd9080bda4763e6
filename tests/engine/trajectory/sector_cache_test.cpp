// Two speed devices of the integrator that must not change results (docs/performance.md):
// adaptive stretches integrate only the sector (connected component of H_eff's graph) the state
// occupies, and stretch matrices are reused across Integrators whose stretches have the same
// content, with the model's own time functions rebound.
#include <catch2/catch.hpp>
#include <cmath>
#include <complex>

#include "engine/trajectory/excitation_leak.h"
#include "engine/trajectory/integrator.h"
#include "tests/engine/engine_test_models.h"
#include "tests/support/test_seed.h"

using namespace flyby;
using Complex = std::complex<double>;

namespace {

// Atom (levels g, e) in a mode of cutoff 3 with H = g(t)(a†σ + σ†a), collapses √Γ σ and √(2κ) a:
// H_eff conserves the excitation number, so its graph splits into the sectors {|g,0⟩},
// {|e,0⟩, |g,1⟩}, {|e,1⟩, |g,2⟩}, … The coupling is given as a time function (adaptive path).
trajectory::Model jaynes_cummings(std::function<Complex(double)> g_of_t, double kappa, double gamma, double end_us) {
  trajectory::Model m;
  const int cutoff = 3;
  m.subsystems = {space::Subsystem::mode("mode", cutoff), space::Subsystem::levels("atom", 2)};
  m.initial = {{0, test::basis(cutoff + 1, 0)}, {1, test::basis(2, 1)}};
  const operators::LocalMatrix a = test::annihilation(cutoff), sm = test::sigma_minus();
  m.hamiltonian.add_hermitian(operators::Coefficient::of_time(std::move(g_of_t)),
                              operators::Operator::product({{0, a.adjoint()}, {1, sm}}));
  m.channels = {{"output", true, operators::Operator::local(0, a, std::sqrt(2 * kappa))},
                {"atom", false, operators::Operator::local(1, sm, std::sqrt(gamma))}};
  m.physical_decay = operators::Operator::local(0, a.adjoint() * a, 2 * kappa) +
                     operators::Operator::local(1, sm.adjoint() * sm, gamma);
  m.end_us = end_us;
  return m;
}

// Trajectory k of `b` three ways on the same stream: with a fresh workspace, and through a
// workspace that `a` used first (its stretches then reused by `b`); `first` is a's record.
struct FreshAndShared {
  trajectory::TrajectoryResult fresh, first, shared;
};
FreshAndShared run_fresh_and_shared(const trajectory::Integrator& a, const trajectory::Integrator& b,
                                    std::uint64_t seed, std::uint64_t k) {
  auto r_fresh = make_stream(seed, StreamPurpose::kTest, k), r_shared = r_fresh, r_a = r_fresh;
  FreshAndShared out;
  out.fresh = b.run(r_fresh);
  trajectory::Workspace ws;
  out.first = a.run(r_a, ws);
  out.shared = b.run(r_shared, ws);
  REQUIRE(out.fresh.summary.ok());
  REQUIRE(out.shared.summary.ok());
  return out;
}

}  // namespace

TEST_CASE("an adaptive stretch confined to one sector gives the closed-form first jump time", "[integrator]") {
  const std::uint64_t seed = test::seed("sector first jump");
  const double g = 2.0, kappa = 0.7, gamma = 1.3;
  auto model = jaynes_cummings([g](double) { return Complex(g); }, kappa, gamma, 50);
  trajectory::Options opt;
  opt.rtol = 1e-10;
  opt.atol = 1e-12;
  for (std::uint64_t k = 0; k < 20; ++k) {
    auto rng = make_stream(seed, StreamPurpose::kTest, k);
    auto draw = rng;
    const double r = uniform_open0(draw);  // the integrator's first draw: the norm threshold
    auto res = trajectory::Integrator(model, opt).run(rng);
    REQUIRE(res.summary.ok());
    REQUIRE(!res.jumps.empty());
    // No-jump evolution in {|e,0⟩, |g,1⟩} (Plenio & Knight, Rev. Mod. Phys. 70, 101 (1998)):
    // ψ(t) = exp(M t) (1, 0) with M = −i H_eff = [[−Γ/2, −ig], [−ig, −κ]]; for a 2×2 matrix
    // exp(M t) = e^{μt} (cosh(st) I + sinh(st)/s (M − μ I)), μ = tr M / 2,
    // s² = ((M11 − M22)/2)² + M12 M21 (Cayley–Hamilton [memory]).
    const Complex m11 = -gamma / 2, m22 = -kappa, m12(0, -g);
    const Complex mu = (m11 + m22) / 2.0, s = std::sqrt((m11 - m22) * (m11 - m22) / 4.0 + m12 * m12);
    auto norm2 = [&](double t) {
      const Complex e = std::exp(mu * t), c = std::cosh(s * t), sh = std::sinh(s * t) / s;
      const Complex p0 = e * (c + sh * (m11 - mu)), p1 = e * sh * m12;
      return std::norm(p0) + std::norm(p1);
    };
    double lo = 0, hi = 50;  // ‖ψ‖² decreases monotonically from 1 to 0
    for (int it = 0; it < 200; ++it) {
      const double mid = 0.5 * (lo + hi);
      (norm2(mid) > r ? lo : hi) = mid;
    }
    REQUIRE(std::isfinite(res.jumps[0].time_us));
    INFO("draw " << k << ": r = " << r << ", closed form " << lo << " us, integrator " << res.jumps[0].time_us);
    // Jump-time tolerance 1e-7 µs plus the integration error at rtol 1e-10 (norm error / rate).
    CHECK(std::abs(res.jumps[0].time_us - lo) < 1e-6);
  }
}

TEST_CASE("stretches reused across integrators give the records of fresh workspaces", "[integrator]") {
  const std::uint64_t seed = test::seed("stretch reuse");
  const double kappa = 0.7, gamma = 1.3;
  // Same matrices, different time functions: the second model must use its own g(t).
  auto a = jaynes_cummings([](double) { return Complex(2.0); }, kappa, gamma, 40);
  auto b = jaynes_cummings([](double t) { return Complex(2.0 + 1.5 * std::sin(0.8 * t)); }, kappa, gamma, 40);
  trajectory::Integrator ia(a), ib(b);
  for (std::uint64_t k = 0; k < 5; ++k) {
    const auto [fresh, first, shared] = run_fresh_and_shared(ia, ib, seed, k);
    REQUIRE(first.jumps.size() > 0);
    REQUIRE(shared.jumps.size() == fresh.jumps.size());
    for (std::size_t j = 0; j < fresh.jumps.size(); ++j) {
      CHECK(shared.jumps[j].time_us == fresh.jumps[j].time_us);
      CHECK(shared.jumps[j].channel == fresh.jumps[j].channel);
    }
    // The constant and the oscillating coupling give different records on the same stream.
    CHECK(first.jumps[0].time_us != fresh.jumps[0].time_us);
  }
  // Time-independent stretches: the second Integrator reuses the decomposition.
  auto m = test::multilevel(test::MultilevelParams{}, 30);
  trajectory::Integrator i1(m), i2(m);
  trajectory::Workspace ws;
  auto r1 = make_stream(seed, StreamPurpose::kTest, 100), r2 = r1, r3 = r1;
  const auto x1 = i1.run(r1, ws);
  const auto x2 = i2.run(r2, ws);
  const auto x3 = i2.run(r3);
  CHECK(x1.summary.eigendecompositions == 1);
  CHECK(x2.summary.eigendecompositions == 0);
  CHECK(x3.summary.eigendecompositions == 1);
  REQUIRE(x2.jumps.size() == x3.jumps.size());
  for (std::size_t j = 0; j < x2.jumps.size(); ++j) {
    CHECK(x2.jumps[j].time_us == x3.jumps[j].time_us);
    CHECK(x2.jumps[j].channel == x3.jumps[j].channel);
  }
}

TEST_CASE("a reused stretch's excitation-leak estimate equals a fresh one", "[integrator]") {
  // The Jaynes–Cummings model above with a resonant mode drive η(t)(a + a†), truncated to ≤ 1
  // excitation: the drive feeds the excluded two-excitation shell, so the leak estimate
  // (trajectory::ExcitationLeak) is nonzero and depends on η(t). The second Integrator differs
  // only in η(t): through a shared workspace it reuses the first one's stretch and leak matrices
  // with its own time functions, and must report what a fresh workspace reports, bit for bit.
  const std::uint64_t seed = test::seed("leak reuse");
  const double kappa = 0.7, gamma = 1.3;
  auto driven = [&](std::function<Complex(double)> eta) {
    auto m = jaynes_cummings([](double t) { return Complex(1.5 + 0.5 * std::cos(0.3 * t)); }, kappa, gamma, 20);
    m.hamiltonian.add_hermitian(operators::Coefficient::of_time(std::move(eta)),
                                operators::Operator::local(0, test::annihilation(3)));
    m.max_excitation = 1;
    return m;
  };
  trajectory::Integrator ia(driven([](double) { return Complex(0.3); })),
      ib(driven([](double t) { return Complex(0.3 + 0.2 * std::sin(0.5 * t)); }));
  for (std::uint64_t k = 0; k < 4; ++k) {
    const auto [fresh, first, shared] = run_fresh_and_shared(ia, ib, seed, k);
    CHECK(fresh.summary.excitation_leak_max > 0.0);
    CHECK(shared.summary.excitation_leak_max == fresh.summary.excitation_leak_max);
    CHECK(first.summary.excitation_leak_max != fresh.summary.excitation_leak_max);
    CHECK(shared.summary.top_fock_population_max == fresh.summary.top_fock_population_max);
    REQUIRE(shared.jumps.size() == fresh.jumps.size());
    for (std::size_t j = 0; j < fresh.jumps.size(); ++j) CHECK(shared.jumps[j].time_us == fresh.jumps[j].time_us);
  }
}

TEST_CASE("the leak estimate with a reused symbolic LU analysis equals a fresh estimate", "[integrator]") {
  // Driven Jaynes–Cummings model truncated to ≤ 1 excitation (as above): the out block (the
  // two-excitation shell) holds the time-dependent coupling g(t), so every population() call
  // factorizes it anew; after the first call the column ordering of its unchanged pattern is
  // reused. A fresh estimator per time (no reuse) must give the same bits.
  const std::uint64_t seed = test::seed("leak lu reuse");
  auto m = jaynes_cummings([](double t) { return Complex(1.5 + 0.5 * std::cos(0.3 * t)); }, 0.7, 1.3, 20);
  m.hamiltonian.add_hermitian(operators::Coefficient::of_time([](double t) { return Complex(0.3 + 0.2 * std::sin(0.5 * t)); }),
                              operators::Operator::local(0, test::annihilation(3)));
  m.max_excitation = 1;
  const space::Layout layout(&m.subsystems, {0, 1}, 1);
  const auto reused = trajectory::ExcitationLeak::build(m, layout, m.controls);
  REQUIRE(reused);
  auto rng = make_stream(seed, StreamPurpose::kTest, 0);
  space::Vector psi(layout.dimension());
  for (auto& x : psi) x = Complex(uniform_open0(rng) - 0.5, uniform_open0(rng) - 0.5);
  for (double t : {0.0, 0.7, 3.1, 9.4, 15.0}) {
    const double p = reused->population(psi, t);
    const double fresh = trajectory::ExcitationLeak::build(m, layout, m.controls)->population(psi, t);
    CHECK(p > 0.0);
    CHECK(p == fresh);
  }
}
