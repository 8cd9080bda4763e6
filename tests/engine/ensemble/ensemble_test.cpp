// Reproducibility of ensembles: the records of every trajectory are bit-identical for 1 and 2
// OpenMP threads (one PCG stream per trajectory index, merge by index), and a block of
// trajectories started at first_index = k reproduces trajectories k, k+1, … of a full run.
#include <catch2/catch.hpp>

#include "engine/ensemble/ensemble.h"
#include "tests/engine/engine_test_models.h"
#include "tests/support/test_seed.h"

using namespace flyby;

namespace {

void require_identical(const ensemble::Result& a, const ensemble::Result& b, std::size_t offset = 0) {
  for (std::size_t i = 0; i < b.trajectories.size(); ++i) {
    const auto& ta = a.trajectories[i + offset];
    const auto& tb = b.trajectories[i];
    REQUIRE(ta.jumps.size() == tb.jumps.size());
    for (std::size_t k = 0; k < ta.jumps.size(); ++k) {
      // Exact equality on purpose: bit-identical records.
      REQUIRE(ta.jumps[k].time_us == tb.jumps[k].time_us);
      REQUIRE(ta.jumps[k].channel == tb.jumps[k].channel);
    }
    REQUIRE(ta.measurements == tb.measurements);
  }
}

}  // namespace

TEST_CASE("ensembles give bit-identical records for 1 and 2 threads", "[ensemble]") {
  const std::uint64_t seed = test::seed("ensemble threads");
  // Resonator with an atom that arrives and leaves (events, exact and adaptive stretches).
  auto model = test::resonator(1.0, 1.0, 1.0, 0.6, 0, 4, 30.0);
  model.subsystems.push_back(space::Subsystem::levels("atom", 2));
  const auto a = test::annihilation(4), sm = test::sigma_minus();
  model.hamiltonian.add_hermitian(
      operators::Coefficient::of_time([](double t) { return operators::Complex(std::exp(-(t - 15) * (t - 15) / 9), 0); }),
      operators::Operator::product({{0, a.adjoint()}, {1, sm}}));
  model.channels.push_back({"atom", true, operators::Operator::local(1, sm)});
  model.physical_decay += operators::Operator::local(1, sm.adjoint() * sm);
  model.events.push_back({8.0, trajectory::Attach{1, test::basis(2, 1)}});
  model.events.push_back({22.0, trajectory::Detach{1}});
  trajectory::Integrator integ(model);
  ensemble::Options one, two;
  one.threads = 1;
  two.threads = 2;
  const auto r1 = ensemble::run(integ, 64, seed, one);
  const auto r2 = ensemble::run(integ, 64, seed, two);
  REQUIRE(r1.summary.jumps > 64);
  require_identical(r1, r2);
  // A block starting at index 40 (as an MPI rank would run) reproduces trajectories 40..63.
  ensemble::Options block = two;
  block.first_index = 40;
  const auto r3 = ensemble::run(integ, 24, seed, block);
  require_identical(r1, r3, 40);
}
