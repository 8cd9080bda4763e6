// Reproducible random streams (STYLE.md guideline 6): every trajectory, atom arrival or cluster
// draws from its own PCG stream keyed by (master seed, index), so results are bit-identical for
// any number of threads or MPI ranks. Streams are never keyed by addresses or the clock.
#pragma once

#include <cstdint>
#include <pcg_random.hpp>

namespace flyby {

using Rng = pcg64;

// Stream purposes keep independent uses of the same index apart (e.g. arrivals vs trajectories).
enum class StreamPurpose : std::uint64_t {
  kTrajectory = 1,
  kArrivals = 2,
  kDetector = 3,
  kTest = 4,
  kAnalysis = 5,
};

// The generator for (master seed, purpose, index). Distinct (purpose, index) pairs select
// distinct PCG streams; the seed is mixed so that nearby master seeds give unrelated state.
Rng make_stream(std::uint64_t master_seed, StreamPurpose purpose, std::uint64_t index);

// Uniform double in (0, 1]: never 0, so log(u) and "norm reaches u" are always well defined.
double uniform_open0(Rng& rng);

}  // namespace flyby
