// The correlation CSV of `flyby correlate`: comment lines "# key: value" (provenance and
// normalization) followed by the header tau_ns,counts,g2,g2_err and one row per bin. Written by
// the correlator's CLI, read by `flyby fit` (and by anything that reads CSV).
#pragma once

#include <filesystem>
#include <iosfwd>
#include <string>
#include <utility>
#include <vector>

#include "engine/analysis/correlator.h"
#include "engine/analysis/g2_fit.h"

namespace flyby::analysis {

// Writes comments ("# key: value", one per pair), the header and the rows. Numbers are written
// with 17 significant digits, so reading them back gives the same doubles.
void write_g2_csv(std::ostream& out, const CorrelationHistogram& h,
                  const std::vector<std::pair<std::string, std::string>>& comments);

struct G2Csv {
  std::vector<std::pair<std::string, std::string>> comments;  // the "# key: value" lines
  G2Data data;                                                 // τ converted from ns to µs
  std::vector<double> counts;                                  // the counts column if present
};

// Reads a correlation CSV. Needs the columns tau_ns, g2 and g2_err (any order, counts
// optional). InputError naming the file and line for anything malformed.
G2Csv read_g2_csv(const std::filesystem::path& path);

}  // namespace flyby::analysis
