// Tests of the time-block run driver (models/simulation/run_driver.cpp): cutting a run into
// blocks of any size, with photons of trajectories held across block boundaries, gives the
// same record as one block holding the whole run. (MPI runs: tests/mpi.)
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>

#include "engine/records/record_reader.h"
#include "models/config/scenario_config.h"
#include "models/simulation/simulation.h"
#include "tests/support/record_compare.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

namespace {

using flyby::test::ScratchDir;

// A dense, slow beam through a weakly driven resonator: many two- and three-atom clusters, which
// the low dimension cap turns into overlapping single-atom trajectories (so photons of one
// trajectory come after the start of later ones and must be held across block boundaries),
// driven empty intervals between clusters, and a detector chain with dead time, afterpulses,
// jitter and dark counts that couples neighbouring photons.
std::string driver_config(std::uint64_t seed) {
  return R"(
[atom]
species = "Rb87"
ground_F = 2
excited_F = 3
[field]
B_G = [0, 0, 3.0]
[resonator]
length_mm = 0.25
waist_um = 25.0
kappa_MHz = 3.0
output_mirror_fraction = 0.7
fock_cutoff_count = 2
[[drive]]
name = "probe"
kind = "resonator"
mode_index = 1
empty_mean_photons_count = 0.05
[[channel]]
name = "H"
source = "resonator"
analyzer = "pbs"
polarization = "linear"
polarization_angle_deg = 0
efficiency_fraction = 0.6
dead_time_ns = 40
jitter_fwhm_ps = 400
dark_rate_per_s = 2000
afterpulse_fraction = 0.2
afterpulse_delay_ns = 30
afterpulse_time_constant_ns = 50
[[channel]]
name = "V"
source = "resonator"
analyzer = "pbs"
polarization = "linear"
polarization_angle_deg = 90
efficiency_fraction = 0.6
dead_time_ns = 40
dark_rate_per_s = 2000
[source]
kind = "beam"
speed_distribution = "gaussian"
speed_m_per_s = 12.0
speed_spread_m_per_s = 1.5
transverse_profile = "gaussian"
transverse_sigma_um = 40
axial_extent_um = 100
flux_per_s = 40000
[[population]]
ground_F = 2
m_F = 2
probability_fraction = 1.0
[run]
duration_s = 0.0008
max_cluster_dimension_count = 100
seed_id = )" + std::to_string(seed) + "\n";
}

}  // namespace

TEST_CASE("simulate: time blocks of any size give the record of one block", "[simulate][blocks]") {
  const auto seed = flyby::test::seed("simulate time blocks");
  ScratchDir d("sim-blocks");
  std::ofstream((d / "cfg.toml").string()) << driver_config(seed);
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
