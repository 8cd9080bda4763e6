// The channel-completeness check (DESIGN.md §3: Σ C†C over detected and undetected channels
// equals the physical decay) accepts exact splittings and refuses incomplete or wrong sets.
#include <catch2/catch.hpp>
#include <tuple>

#include "engine/channels/channel.h"
#include "engine/common/errors.h"
#include "engine/trajectory/integrator.h"
#include "tests/engine/engine_test_models.h"

using namespace flyby;
using operators::Operator;

TEST_CASE("channel completeness: splittings are accepted, incomplete sets refused", "[channels]") {
  // Two resonator polarization modes (H, V) at cutoff 2 and one F=1→F′=2 atom.
  std::vector<space::Subsystem> subs = {space::Subsystem::mode("mode H", 2), space::Subsystem::mode("mode V", 2),
                                        space::Subsystem::levels("atom", 8)};
  const auto a = test::annihilation(2);
  const auto aq = test::dipole_lowering(2, 4);
  const double kappa = 0.8, gamma = 1.3;
  Operator decay = Operator::local(0, a.adjoint() * a, 2 * kappa) + Operator::local(1, a.adjoint() * a, 2 * kappa);
  operators::LocalMatrix pe = operators::LocalMatrix::Zero(8, 8);
  for (int j = 3; j < 8; ++j) pe(j, j) = 1;
  decay += Operator::local(2, pe, gamma);
  // Output through a circular analyzer: σ± = (a_H ∓ i a_V)/√2 with efficiency η, rest undetected.
  const double eta = 0.6;
  const operators::Complex i(0, 1);
  auto mix = [&](operators::Complex cv) {
    return Operator::local(0, a, std::sqrt(2 * kappa / 2)) + Operator::local(1, a, cv * std::sqrt(2 * kappa / 2));
  };
  std::vector<channels::Channel> ch;
  ch.push_back({"sigma+", true, std::sqrt(eta) * mix(-i)});
  ch.push_back({"sigma-", true, std::sqrt(eta) * mix(i)});
  ch.push_back({"sigma+ lost", false, std::sqrt(1 - eta) * mix(-i)});
  ch.push_back({"sigma- lost", false, std::sqrt(1 - eta) * mix(i)});
  const char* names[3] = {"q=-1", "q=0", "q=+1"};
  for (int q = 0; q < 3; ++q) ch.push_back({names[q], false, Operator::local(2, aq[q], std::sqrt(gamma))});
  CHECK_NOTHROW(channels::check_channel_completeness(subs, ch, decay));

  // Missing the undetected remainder of one analyzer output: refused, naming the modes.
  auto missing = ch;
  missing.erase(missing.begin() + 2);
  CHECK_THROWS_WITH(channels::check_channel_completeness(subs, missing, decay),
                    Catch::Contains("incomplete") && Catch::Contains("mode H"));
  // Missing one polarization of the atom's emission: refused, naming the atom.
  auto no_pi = ch;
  no_pi.erase(no_pi.begin() + 5);
  CHECK_THROWS_WITH(channels::check_channel_completeness(subs, no_pi, decay), Catch::Contains("atom"));
  // Wrong rate (κ instead of 2κ on one output): refused.
  auto wrong = ch;
  wrong[0].op = std::sqrt(0.5) * wrong[0].op;
  CHECK_THROWS_AS(channels::check_channel_completeness(subs, wrong, decay), InputError);
  // The integrator runs the check on construction.
  auto model = test::two_level(1, 1, 0, 10);
  model.channels[0].op = Operator::local(0, test::sigma_minus(), 0.5);  // √Γ/2 instead of √Γ
  CHECK_THROWS_AS(trajectory::Integrator(model), InputError);
}

TEST_CASE("channel completeness: a remembered pass is reused only for an identical group", "[channels]") {
  // Γ Σ_q A_q†A_q of an F = 1 → F′ = 2 atom (Clebsch–Gordan lowering operators,
  // test::dipole_lowering) split into its three polarization channels √Γ A_q; the check's
  // per-thread memory must give the same outcome as a fresh check.
  const auto aq = test::dipole_lowering(2, 4);
  const double gamma = 1.3;
  operators::LocalMatrix decay_local = operators::LocalMatrix::Zero(8, 8);
  for (int q = 0; q < 3; ++q) decay_local += aq[q].adjoint() * aq[q];
  auto atoms = [&](int count, double rate) {
    std::vector<space::Subsystem> subs;
    std::vector<channels::Channel> ch;
    Operator decay;
    for (int k = 0; k < count; ++k) {
      subs.push_back(space::Subsystem::levels("atom " + std::to_string(k), 8));
      decay += Operator::local(k, decay_local, gamma);
      for (int q = 0; q < 3; ++q) ch.push_back({"q", false, Operator::local(k, aq[q], std::sqrt(q == 1 ? rate : gamma))});
    }
    return std::make_tuple(subs, ch, decay);
  };
  const auto [subs1, ch1, decay1] = atoms(1, gamma);
  const std::size_t before = channels::channel_completeness_cache_hits();
  CHECK_NOTHROW(channels::check_channel_completeness(subs1, ch1, decay1));
  CHECK_NOTHROW(channels::check_channel_completeness(subs1, ch1, decay1));
  CHECK(channels::channel_completeness_cache_hits() >= before + 1);
  // Two atoms: each is its own group, identical to the one above up to the id (both reused).
  const auto [subs2, ch2, decay2] = atoms(2, gamma);
  const std::size_t before2 = channels::channel_completeness_cache_hits();
  CHECK_NOTHROW(channels::check_channel_completeness(subs2, ch2, decay2));
  CHECK(channels::channel_completeness_cache_hits() == before2 + 2);
  // Same structure, wrong π rate (Γ/2): refused, as a fresh check refuses it, after the passes.
  const auto [subs3, ch3, decay3] = atoms(1, 0.5 * gamma);
  CHECK_THROWS_WITH(channels::check_channel_completeness(subs3, ch3, decay3), Catch::Contains("incomplete"));
  // An excluded level (pruned basis) is a different group: checked again, and still refused.
  auto subs4 = subs3;
  subs4[0].allowed.assign(8, true);
  subs4[0].allowed[7] = false;
  CHECK_THROWS_AS(channels::check_channel_completeness(subs4, ch3, decay3), InputError);
  // A tighter tolerance is a different key as well.
  const std::size_t before5 = channels::channel_completeness_cache_hits();
  CHECK_NOTHROW(channels::check_channel_completeness(subs1, ch1, decay1, 1e-12));
  CHECK(channels::channel_completeness_cache_hits() == before5);
}
