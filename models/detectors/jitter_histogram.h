// A measured timing-jitter distribution given as a histogram (e.g. the instrument response of a
// detector recorded with a pulsed laser), used by the detector chain instead of a Gaussian.
#pragma once

#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "engine/common/random.h"

namespace flyby::detectors {

// Equally spaced bins; a draw picks a bin with probability weight/sum(weights) and a uniform
// position inside it. Offsets are used as given (a histogram centred away from 0 adds a delay).
struct JitterHistogram {
  std::vector<double> center_ps;  // bin centres, strictly increasing, equally spaced
  std::vector<double> weight;     // non-negative, finite, sum > 0; same length as center_ps

  double bin_width_ps() const;
  // Smallest and largest offset a draw can return.
  double min_offset_ps() const;
  double max_offset_ps() const;
  double mean_ps() const;
  double variance_ps2() const;  // including the uniform spread inside each bin (width^2/12)
};

// Empty if valid, else a one-line description of the problem.
std::optional<std::string> histogram_problem(const JitterHistogram& h);

// Reads a text file of lines "offset_ps,weight" (comma, tab or space separated; lines starting
// with '#' and one header line starting with a letter are skipped). Throws InputError with
// file:line on any problem, including unequal spacing.
JitterHistogram load_jitter_histogram(const std::filesystem::path& path);

// Draws offsets from a histogram by inverse transform of the cumulative weights.
class JitterSampler {
 public:
  explicit JitterSampler(JitterHistogram h);
  double draw_ps(Rng& rng) const;
  const JitterHistogram& histogram() const { return h_; }

 private:
  JitterHistogram h_;
  std::vector<double> cumulative_;  // normalized, last = 1
};

}  // namespace flyby::detectors
