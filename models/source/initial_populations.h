// Initial sublevel populations of each atom (optical pumping), sampled per atom (DESIGN.md §5).
//
// Each atom starts in one ground sublevel drawn with the given probabilities (a mixed initial
// state unravelled into pure sublevel states). Indices follow the level-structure basis order
// (models/levels/level_structure.h): ground levels by ascending F, sublevels by ascending m, so
// index = Σ_{F' < F}(2F'+1) + (m + F) over the included ground levels.
#pragma once

#include <vector>

#include "engine/common/random.h"

namespace flyby::source {

struct SublevelPopulation {
  int two_F = 0;           // 2F of the ground level
  int two_m = 0;           // 2m
  double probability = 0;  // in [0, 1]
};

struct PopulationSpec {
  // Empty: uniform over all sublevels of all included ground levels (an unpumped atom).
  std::vector<SublevelPopulation> sublevels;
};

// Probability of each ground sublevel index. Throws flyby::InputError when F is not an included
// ground level, |m| > F or m − F not an integer, a probability is outside [0, 1], a sublevel is
// listed twice, or the probabilities do not sum to 1 (within 1e-6).
std::vector<double> resolve_populations(const PopulationSpec& spec, const std::vector<int>& ground_2F);

// Draws one index with the given probabilities (one uniform draw).
int sample_sublevel(const std::vector<double>& probabilities, Rng& rng);

}  // namespace flyby::source
