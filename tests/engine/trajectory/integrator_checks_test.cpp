// Properties of the integrator: Fock-cutoff monitor (warning and error naming the setting),
// exact and adaptive propagation agree on the same random stream, input validation, and a jump
// hook (feedback) that switches a drive off after each click.
#include <catch2/catch.hpp>
#include <cmath>

#include "engine/common/errors.h"
#include "engine/trajectory/integrator.h"
#include "tests/engine/engine_test_models.h"
#include "tests/support/test_seed.h"

using namespace flyby;

TEST_CASE("Fock monitor warns and stops with a message naming the setting", "[fock]") {
  const std::uint64_t seed = test::seed("fock monitor");
  // Empty resonator driven with E: coherent state |α|² = (E/κ)² (steady state of E(a + a†),
  // collapse √(2κ) a); top-state population of the truncated coherent state is known.
  trajectory::Options opt;
  opt.fock_cutoff_setting = "resonator.fock_cutoff";
  {
    // |α|² = 0.04, cutoff 3: p(3) ≈ e^{-0.04} 0.04³/6 ≈ 1e-5: silent.
    auto m = test::resonator(0, 1, 1, 0.2, 0, 3, 20);
    auto rng = make_stream(seed, StreamPurpose::kTest, 0);
    auto r = trajectory::Integrator(m, opt).run(rng);
    CHECK(r.summary.ok());
    CHECK(r.summary.warnings.empty());
    CHECK(r.summary.top_fock_population_max > 0);
    CHECK(r.summary.top_fock_population_max < 1e-3);
  }
  {
    // |α|² = 0.25, cutoff 3: p(3) ≈ e^{-0.25} 0.25³/6 ≈ 2e-3: between warning and error.
    auto m = test::resonator(0, 1, 1, 0.5, 0, 3, 20);
    auto rng = make_stream(seed, StreamPurpose::kTest, 1);
    auto r = trajectory::Integrator(m, opt).run(rng);
    CHECK(r.summary.ok());
    REQUIRE(r.summary.warnings.size() == 1);
    CHECK_THAT(r.summary.warnings[0], Catch::Contains("resonator.fock_cutoff"));
  }
  {
    // |α|² = 4, cutoff 3: the top state is heavily populated: error, trajectory stops.
    auto m = test::resonator(0, 1, 1, 2.0, 0, 3, 20);
    auto rng = make_stream(seed, StreamPurpose::kTest, 2);
    auto r = trajectory::Integrator(m, opt).run(rng);
    CHECK(r.summary.status == trajectory::Status::kFockCutoffExceeded);
    CHECK_THAT(r.summary.message, Catch::Contains("raise resonator.fock_cutoff"));
    CHECK(r.summary.end_us < 20);
  }
}

TEST_CASE("exact and adaptive propagation give the same jumps on the same stream", "[integrator]") {
  const std::uint64_t seed = test::seed("exact vs adaptive");
  auto model = test::multilevel(test::MultilevelParams{}, 200);
  trajectory::Options exact, adaptive;
  adaptive.exact_exponential = false;
  adaptive.rtol = 1e-10;
  adaptive.atol = 1e-12;
  auto r1 = make_stream(seed, StreamPurpose::kTest, 7), r2 = r1;
  auto a = trajectory::Integrator(model, exact).run(r1);
  auto b = trajectory::Integrator(model, adaptive).run(r2);
  REQUIRE(a.summary.ok());
  REQUIRE(b.summary.ok());
  CHECK(a.summary.exact_stretches == 1);
  CHECK(b.summary.adaptive_stretches == 1);
  // The same uniform numbers drive both, so the records agree until rounding makes a channel
  // choice differ; with tight tolerances that does not happen within 200 µs.
  REQUIRE(a.jumps.size() == b.jumps.size());
  REQUIRE(a.jumps.size() > 20);
  double max_dt = 0;
  for (std::size_t k = 0; k < a.jumps.size(); ++k) {
    CHECK(a.jumps[k].channel == b.jumps[k].channel);
    max_dt = std::max(max_dt, std::abs(a.jumps[k].time_us - b.jumps[k].time_us));
  }
  INFO("max jump-time difference " << max_dt << " us");
  CHECK(max_dt < 1e-5);
  CHECK(a.summary.norm_error_estimate < 1e-6);
}

TEST_CASE("a jump hook switching the drive off after each click leaves a dark interval", "[integrator][feedback]") {
  const std::uint64_t seed = test::seed("feedback hook");
  // Two-level atom whose drive is a control; after each click the hook sets it to 0 from the
  // click (latency 0) for 2 µs. After a click the atom is in |g⟩ and undriven: no click can
  // occur during the dark interval; afterwards clicks resume.
  auto m = test::two_level(0, 1, 0, 400);
  const auto sm = test::sigma_minus();
  m.controls = {1.0};
  m.hamiltonian.add(operators::Coefficient::of_control(0, 1.5), operators::Operator::local(0, sm + sm.adjoint()));
  const double latency = 0.0, dark = 2.0;
  m.on_jump = [=, hold_until = -1.0](const trajectory::JumpInfo& j, trajectory::Schedule& s) mutable {
    if (!j.detected || j.time_us < hold_until) return;
    s.add(j.time_us + latency, trajectory::SetControl{0, 0.0});
    s.add(j.time_us + latency + dark, trajectory::SetControl{0, 1.0});
    hold_until = j.time_us + latency + dark;
  };
  auto rng = make_stream(seed, StreamPurpose::kTest, 0);
  auto r = trajectory::Integrator(m).run(rng);
  REQUIRE(r.summary.ok());
  REQUIRE(r.jumps.size() > 20);
  double min_gap = 1e9;
  for (std::size_t k = 1; k < r.jumps.size(); ++k) min_gap = std::min(min_gap, r.jumps[k].time_us - r.jumps[k - 1].time_us);
  CHECK(min_gap > dark);
  // Two stretches (drive on / off) alternate; the cache keeps both decompositions.
  CHECK(r.summary.eigendecompositions == 2);
}

TEST_CASE("invalid models and options are refused with a message", "[integrator]") {
  auto m = test::two_level(1, 1, 0, 10);
  trajectory::Options o;
  o.rtol = 0;
  CHECK_THROWS_WITH(trajectory::Integrator(m, o), Catch::Contains("rtol"));
  auto bad_end = m;
  bad_end.end_us = -1;
  CHECK_THROWS_AS(trajectory::Integrator(bad_end), InputError);
  auto detach_absent = m;
  detach_absent.subsystems.push_back(space::Subsystem::levels("other", 2));
  detach_absent.events.push_back({1.0, trajectory::Detach{1}});
  CHECK_THROWS_WITH(trajectory::Integrator(detach_absent), Catch::Contains("detach"));
  auto not_hermitian = m;
  not_hermitian.hamiltonian.add(operators::Operator::local(0, test::sigma_minus()));
  auto rng = make_stream(1, StreamPurpose::kTest, 0);
  CHECK_THROWS_WITH(trajectory::Integrator(not_hermitian).run(rng), Catch::Contains("Hermitian"));
}
