// Singles: tag counts and rates per channel, and their drift over the record — counts per time
// slice with a χ² test of constancy (Pearson's dispersion test for Poisson counts: under a
// constant rate the slice counts are multinomial given the total, and
// X² = Σ_s (n_s − n̄)²/n̄ follows χ² with S − 1 degrees of freedom for n̄ ≳ 5).
// Streams: feed time-ordered chunks, then finish().
#pragma once

#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <vector>

namespace flyby::analysis {

struct SinglesOptions {
  std::int64_t start_ps = 0;     // start of the acquisition window, ps
  std::int64_t duration_ps = 0;  // window length, ps, > 0
  int slices = 20;               // equal time slices for the drift test, >= 2
  std::vector<int> channels;     // channel ids to report (others are ignored), each 0..255

  std::optional<std::string> validate() const;
};

enum class SinglesStatus {
  kSuccess,
  kFewCounts,  // some channel has fewer than 5 counts per slice: the χ² test is approximate
};
const char* to_string(SinglesStatus s);

struct ChannelSingles {
  int channel = 0;
  std::uint64_t counts = 0;                 // tags in the window
  double rate_per_s = 0;                    // counts / duration
  double rate_err_per_s = 0;                // √counts / duration (Poisson)
  std::vector<std::uint64_t> slice_counts;  // counts per slice
  std::vector<double> slice_rate_per_s;     // slice_counts / slice duration
  double drift_chi2 = 0;                    // Σ (n_s − n̄)²/n̄
  int drift_dof = 0;                        // slices − 1
  double drift_p_value = 1;                 // P(χ²_dof >= drift_chi2) (gsl_cdf_chisq_Q); 1 if no counts
  // Relative slope of a weighted straight-line fit of the slice rates, per second of record
  // time, with its standard error (a linear drift shows here before the χ² test flags it).
  double drift_slope_per_s = 0;
  double drift_slope_err_per_s = 0;
};

struct SinglesResult {
  SinglesStatus status = SinglesStatus::kSuccess;
  std::string message;
  SinglesOptions options;
  std::vector<double> slice_mid_s;          // slice centres, s from the window start
  double slice_duration_s = 0;
  std::vector<ChannelSingles> channels;     // in the order of options.channels

  const ChannelSingles* find(int channel) const;
  std::string brief_report() const;
  std::string full_report() const;
};

class SinglesCounter {
 public:
  explicit SinglesCounter(SinglesOptions options);  // InputError if validate() fails
  void add_chunk(std::span<const std::int64_t> time_ps, std::span<const std::uint8_t> channel);
  SinglesResult finish() const;

 private:
  SinglesOptions opt_;
  std::vector<int> index_of_;                      // channel id → position in opt_.channels or −1
  std::vector<std::vector<std::uint64_t>> counts_; // [channel position][slice]
};

}  // namespace flyby::analysis
