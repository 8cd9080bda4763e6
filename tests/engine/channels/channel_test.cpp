// The channel-completeness check (DESIGN.md §3: Σ C†C over detected and undetected channels
// equals the physical decay) accepts exact splittings and refuses incomplete or wrong sets.
#include <catch2/catch.hpp>

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
