// Reproducibility of ensembles: the records of every trajectory are bit-identical for 1 and 2
// OpenMP threads (one PCG stream per trajectory index, merge by index), and a block of
// trajectories started at first_index = k reproduces trajectories k, k+1, … of a full run.
#include <catch2/catch.hpp>

#include "engine/ensemble/ensemble.h"
#include "tests/engine/engine_test_models.h"
#include "tests/support/test_seed.h"

using namespace flyby;

namespace {

// Resonator with an atom that arrives and leaves (events, exact and adaptive stretches).
trajectory::Model arriving_atom_model() {
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
  return model;
}

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
  const auto model = arriving_atom_model();
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

TEST_CASE("workspaces kept in a pool carry their stretch caches to the next map and change no result", "[ensemble]") {
  // What the time blocks of a run rely on (models/simulation/run_driver.cpp): the second block's
  // trajectories find the decompositions the first block made, even through a new Integrator of
  // the same model (the next block's cluster), and draw the same jumps as with fresh workspaces.
  const std::uint64_t seed = test::seed("ensemble workspace pool");
  const auto model = arriving_atom_model();
  const trajectory::Integrator first(model), second(model);
  const std::function<trajectory::TrajectoryResult(std::size_t, trajectory::Workspace&)> by_first =
      [&](std::size_t i, trajectory::Workspace& ws) {
        Rng rng = make_stream(seed, StreamPurpose::kTrajectory, i);
        return first.run(rng, ws);
      };
  const std::function<trajectory::TrajectoryResult(std::size_t, trajectory::Workspace&)> by_second =
      [&](std::size_t i, trajectory::Workspace& ws) {
        Rng rng = make_stream(seed, StreamPurpose::kTrajectory, 100 + i);
        return second.run(rng, ws);
      };
  auto decompositions = [](const std::vector<trajectory::TrajectoryResult>& r) {
    long n = 0;
    for (const auto& t : r) n += t.summary.eigendecompositions;
    return n;
  };
  const int threads = GENERATE(1, 2);
  ensemble::WorkspacePool pool;
  const auto a = ensemble::map_ordered<trajectory::TrajectoryResult>(16, threads, by_first, pool);
  CHECK(pool.size() == std::size_t(threads));
  CHECK(decompositions(a) > 0);
  const auto b = ensemble::map_ordered<trajectory::TrajectoryResult>(16, threads, by_second, pool);
  // One thread has met every stretch in the first map; with two, dynamic scheduling decides
  // which thread met which, so only the results (below) are fixed.
  if (threads == 1) CHECK(decompositions(b) == 0);
  const auto fresh = ensemble::map_ordered<trajectory::TrajectoryResult>(16, threads, by_second);
  CHECK(decompositions(fresh) > 0);
  ensemble::Result rb, rf;
  rb.trajectories = b;
  rf.trajectories = fresh;
  require_identical(rb, rf);
}
