// Synthetic time-tag records for testing analysis pipelines and for scale runs: independent
// Poisson channels plus, optionally, correlated pairs whose delay follows a damped beat
// (the shape of a heralded Zeeman quantum beat). The record is generated in time order and
// written through RecordWriter as it is generated, so memory does not grow with the tag count.
#pragma once

#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "engine/records/record_format.h"
#include "engine/records/record_writer.h"

namespace flyby::records {

struct SyntheticChannel {
  std::string name;                                 // channel name (record-format rules)
  ChannelRole role = ChannelRole::kDetector;        // role written to the channel table
  double rate_per_s = 0;                            // uncorrelated Poisson rate, per s, >= 0
};

// Correlated pairs: a Poisson stream of first tags in channel `first`, each followed by a tag in
// channel `second` at delay τ >= 0 drawn from p(τ) ∝ exp(−τ/decay) (1 + visibility cos(2π f τ)).
// The cross-correlation first→second then shows a damped beat at f on top of the accidentals.
struct SyntheticPairs {
  std::size_t first = 0;       // index into SyntheticOptions::channels of the first tag
  std::size_t second = 1;      // index of the second (delayed) tag; may equal `first`
  double rate_per_s = 0;       // pair rate, per s, >= 0
  double decay_us = 1.0;       // exponential decay time of the delay distribution, µs, > 0
  double beat_MHz = 0;         // beat frequency f = ω/2π, MHz, >= 0
  double visibility = 0;       // beat visibility, 0..1
};

struct SyntheticOptions {
  std::vector<SyntheticChannel> channels;  // 1..256 channels, ids 0, 1, ... in this order
  std::optional<SyntheticPairs> pairs;     // unset: only uncorrelated channels
  double duration_s = 1.0;                 // acquisition window, s, > 0 (record starts at 0)
  double resolution_ps = 1.0;              // tag times are rounded down to multiples of this, ps, >= 1
  std::uint64_t seed = 1;                  // master seed (stream purpose kAnalysis, index 0 and 1)
  // Stop after this many tags (the window is then cut at the last tag + 1). Unset: no limit.
  std::optional<std::uint64_t> max_tags;
  RecordWriterOptions writer;              // HDF5 chunking of the output

  // Empty if usable, else one line naming the first problem.
  std::optional<std::string> validate() const;
};

struct SyntheticSummary {
  std::uint64_t tag_count = 0;
  std::vector<std::uint64_t> channel_counts;  // per channel, in option order
  std::uint64_t pair_count = 0;               // pairs generated (both tags inside the window)
  std::int64_t duration_ps = 0;               // window written to the record
  std::size_t peak_pending_tags = 0;          // largest number of delayed tags held back at once
  std::string brief_report() const;
};

// Generates the record and writes it atomically to `path` (InputError for bad options).
SyntheticSummary write_synthetic_record(const std::filesystem::path& path, const SyntheticOptions& options,
                                        RecordProvenance provenance);

}  // namespace flyby::records
