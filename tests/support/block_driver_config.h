// One scenario config shared by the time-block tests (tests/models/simulation/run_driver_test.cpp)
// and the MPI tests (tests/mpi): a dense, slow beam through a weakly driven resonator — many two-
// and three-atom clusters, which the low dimension cap turns into overlapping single-atom
// trajectories (photons of one trajectory come after the start of later ones and must be held
// across block boundaries), driven empty intervals between clusters, and a detector chain with
// dead time, afterpulses, jitter and dark counts that couples neighbouring photons.
#pragma once

#include <cstdint>
#include <string>

#include "tests/support/scenario_fragments.h"

namespace flyby::test {

inline std::string block_driver_config(std::uint64_t seed) {
  return R"(
[atom]
species = "Rb87"
ground_F = 2
excited_F = 3
[field]
B_G = [0, 0, 3.0]
)" + probed_resonator_text({3.0, 0.05, "fock_cutoff_count = 2\n"}) +
         pbs_channel_text("H", 0, R"(dead_time_ns = 40
jitter_fwhm_ps = 400
dark_rate_per_s = 2000
afterpulse_fraction = 0.2
afterpulse_delay_ns = 30
afterpulse_time_constant_ns = 50
)") + pbs_channel_text("V", 90, "dead_time_ns = 40\ndark_rate_per_s = 2000\n") + R"([source]
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

}  // namespace flyby::test
