// Pruning of unreachable sublevels (trajectory::prune_unreachable_levels) is exact: an F = 1 →
// F′ = 2 atom pumped into m = +1 and driven with σ+ light only cycles |1, +1⟩ ↔ |2, +2⟩ (dipole
// selection rules, Condon–Shortley Clebsch–Gordan coefficients from GSL), so six of its eight
// levels are pruned and the trajectory (same seed) is the same as without pruning; its excited
// population then follows the two-level closed form (Loudon; REFERENCES.md).
#include <catch2/catch.hpp>
#include <cmath>

#include "engine/trajectory/integrator.h"
#include "engine/trajectory/reachable_levels.h"
#include "tests/engine/engine_test_models.h"
#include "tests/support/test_seed.h"

using namespace flyby;
using operators::Complex;
using operators::Operator;

namespace {

trajectory::Model cycling_atom(double omega, double gamma, double end_us) {
  const int d = 8;  // ground m = −1, 0, 1; excited m′ = −2..2
  auto a = test::dipole_lowering(2, 4);
  trajectory::Model m;
  m.subsystems = {space::Subsystem::levels("atom", d)};
  m.initial = {{0, test::basis(d, 2)}};  // |F = 1, m = +1⟩
  m.hamiltonian.add(Operator::local(0, a[2].adjoint() + a[2], omega / 2));  // σ+ (q = +1) drive
  const char* names[3] = {"q-1", "q0", "q1"};  // (a literal table: GCC 12 warns -Wrestrict on "q" + to_string)
  for (int q = 0; q < 3; ++q)
    m.channels.push_back({names[q], true, Operator::local(0, a[std::size_t(q)], std::sqrt(gamma))});
  operators::LocalMatrix pe = operators::LocalMatrix::Zero(d, d);
  for (int k = 3; k < d; ++k) pe(k, k) = 1.0;
  m.physical_decay = Operator::local(0, pe, gamma);
  m.end_us = end_us;
  return m;
}

}  // namespace

TEST_CASE("pruning unreachable sublevels keeps the cycling transition and changes nothing", "[trajectory][restricted]") {
  const double omega = 1.0, gamma = 1.0;
  auto full = cycling_atom(omega, gamma, 200.0);
  auto pruned = full;
  CHECK(trajectory::prune_unreachable_levels(pruned) == 6);
  const auto& allowed = pruned.subsystems[0].allowed;
  REQUIRE(allowed.size() == 8);
  CHECK(allowed[2]);                // |1, +1⟩
  CHECK(allowed[7]);                // |2, +2⟩
  CHECK(std::count(allowed.begin(), allowed.end(), true) == 2);
  trajectory::Options o;
  o.sample_times_us = {150.0};
  operators::LocalMatrix pe = operators::LocalMatrix::Zero(8, 8);
  pe(7, 7) = 1.0;
  o.observables = {Operator::local(0, pe)};
  const auto seed = test::seed("pruned levels");
  Rng r1 = make_stream(seed, StreamPurpose::kTest, 0), r2 = r1;
  const auto a = trajectory::Integrator(full, o).run(r1);
  const auto b = trajectory::Integrator(pruned, o).run(r2);
  REQUIRE(a.summary.ok());
  REQUIRE(b.summary.ok());
  REQUIRE(a.jumps.size() == b.jumps.size());
  REQUIRE(a.jumps.size() > 50);
  for (std::size_t k = 0; k < a.jumps.size(); ++k) {
    CHECK(a.jumps[k].channel == b.jumps[k].channel);
    // Same waiting-time roots located to 1e-7 µs on two propagators of equal H_eff.
    CHECK(a.jumps[k].time_us == Approx(b.jumps[k].time_us).margin(1e-5));
    CHECK(b.jumps[k].channel == 2);  // only σ+ decay |2, +2⟩ → |1, +1⟩
  }
  // Long-run click rate of the cycling pair: Γ ρee, ρee = (Ω²/4)/(Ω²/2 + Γ²/4) (Loudon), checked
  // to 5 standard errors of a Poisson-like count (the count variance of resonance fluorescence is
  // sub-Poissonian, so √N over-estimates the error; common practice, no source).
  const double rho_ee = (omega * omega / 4) / (omega * omega / 2 + gamma * gamma / 4);
  const double count = double(b.jumps.size()), expect = gamma * rho_ee * 200.0;
  CHECK(std::abs(count - expect) <= 5 * std::sqrt(expect));
}
