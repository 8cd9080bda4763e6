// Tests of the time-block run driver (models/simulation/run_driver.cpp): cutting a run into
// blocks of any size, with photons of trajectories held across block boundaries, gives the
// same record as one block holding the whole run. (MPI runs: tests/mpi.)
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>

#include "engine/records/record_reader.h"
#include "models/config/scenario_config.h"
#include "models/simulation/simulation.h"
#include "tests/support/block_driver_config.h"
#include "tests/support/record_compare.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

namespace {

using flyby::test::ScratchDir;
}  // namespace

TEST_CASE("simulate: time blocks of any size give the record of one block", "[simulate][blocks]") {
  const auto seed = flyby::test::seed("simulate time blocks");
  ScratchDir d("sim-blocks");
  std::ofstream((d / "cfg.toml").string()) << flyby::test::block_driver_config(seed);
  const auto scenario = flyby::config::check_scenario(flyby::config::load_config_file((d / "cfg.toml").string()));

  auto run = [&](std::size_t block_items, const std::string& name) {
    flyby::simulation::Options o;
    o.output_path = (d / name).string();
    o.threads = 2;
    o.block_items = block_items;
    const auto sum = flyby::simulation::simulate(scenario, o);
    return std::make_pair(sum, flyby::records::read_record(o.output_path));
  };
  // One block with the whole run (the ordering of a run that holds every photon).
  const auto [ref_sum, ref] = run(std::size_t(1) << 30, "whole.h5");
  REQUIRE(ref_sum.ok);
  REQUIRE(ref_sum.blocks == 1);
  // The scenario must exercise what the blocks have to get right.
  REQUIRE(ref_sum.fallback_clusters > 0);
  REQUIRE(ref_sum.empty_interval_photons > 0);
  REQUIRE(ref.tags.size() > 100);

  for (std::size_t items : {std::size_t(1), std::size_t(2), std::size_t(7), std::size_t(0)}) {
    INFO("block_items = " << items);
    const auto [sum, rec] = run(items, "blocks-" + std::to_string(items) + ".h5");
    if (items == 1) CHECK(sum.blocks > ref_sum.trajectories);  // one block per trajectory and per empty piece
    flyby::test::require_same_record(ref, rec);
    CHECK(sum.jumps == ref_sum.jumps);
    CHECK(sum.steps == ref_sum.steps);
    CHECK(sum.empty_interval_photons == ref_sum.empty_interval_photons);
    CHECK(sum.warnings == ref_sum.warnings);
    REQUIRE(sum.channels.size() == ref_sum.channels.size());
    for (std::size_t c = 0; c < sum.channels.size(); ++c) {
      CHECK(sum.channels[c].photons == ref_sum.channels[c].photons);
      CHECK(sum.channels[c].recorded == ref_sum.channels[c].recorded);
    }
  }
}
