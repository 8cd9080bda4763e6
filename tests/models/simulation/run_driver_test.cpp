// Tests of the time-block run driver (models/simulation/run_driver.cpp): cutting a run into
// blocks of any size, with photons of trajectories held across block boundaries, gives the
// same record as one block holding the whole run. (MPI runs: tests/mpi.)
#include <catch2/catch.hpp>

#include <filesystem>
#include <cmath>
#include <fstream>
#include <nlohmann/json.hpp>

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

TEST_CASE("simulate: the phase times of the summary add up to at most the wall time", "[simulate][blocks]") {
  // The serial phases (set-up, planning, waiting, merge, detector chain, record) are timed one
  // after the other on rank 0's main thread, so their sum cannot exceed the run's wall time; the
  // blocks are computed on another thread, for part of the run. (Timer values are not compared
  // with any expected duration: only their bookkeeping is checked.)
  const auto seed = flyby::test::seed("simulate phase times");
  ScratchDir d("sim-phases");
  std::ofstream((d / "cfg.toml").string()) << flyby::test::block_driver_config(seed);
  const auto scenario = flyby::config::check_scenario(flyby::config::load_config_file((d / "cfg.toml").string()));
  flyby::simulation::Options o;
  o.output_path = (d / "run.h5").string();
  o.threads = 2;
  o.block_items = 3;
  const auto sum = flyby::simulation::simulate(scenario, o);
  REQUIRE(sum.ok);
  REQUIRE(sum.blocks > 2);
  const auto& p = sum.phase_wall_s;
  for (double v : {p.setup_s, p.plan_s, p.wait_s, p.merge_s, p.detect_s, p.write_s, p.compute_s}) {
    REQUIRE(std::isfinite(v));
    CHECK(v >= 0.0);
  }
  const double serial = p.setup_s + p.plan_s + p.wait_s + p.merge_s + p.detect_s + p.write_s;
  CHECK(serial <= sum.wall_time_s);
  CHECK(p.compute_s <= sum.wall_time_s);
  CHECK(p.compute_s > 0.0);
  const auto j = nlohmann::json::parse(sum.to_json());
  for (const char* k : {"setup_s", "plan_s", "wait_s", "merge_s", "detect_s", "write_s", "compute_s"})
    CHECK(j["phase_wall_s"][k].get<double>() >= 0.0);
  CHECK(sum.full_report().find("wall s per phase") != std::string::npos);
}
