// The detector and tagger chain: turns the merged, time-ordered stream of photons that reach
// the detectors (from all atoms, so dead time couples photons of different atoms) into the tags
// a lab time tagger writes. Per channel, in this order:
//   efficiency (thinning) -> + dark counts (Poisson) + afterpulses -> dead time
//   -> timing jitter -> cable delay -> tagger quantization -> tagger rate limit -> window.
// Times are int64 ps on the record's clock (the engine converts its µs to ps once, exactly
// enough for runs of any length). The chain streams: photons arrive in chunks in time order and
// tags leave in time order as soon as no later photon can precede them (jitter and delays are
// bounded, so re-sorting needs only a bounded window).
//
// Randomness: channel c draws from flyby::make_stream(seed, StreamPurpose::kDetector, 8*c + k)
// with k = 0 efficiency, 1 dark counts, 2 jitter, 3 afterpulses; each sub-stream is consumed in
// time order of its own events, so the output does not depend on how the input is chunked.
#pragma once

#include <cstdint>
#include <memory>
#include <span>
#include <string>
#include <vector>

#include "engine/records/record_format.h"
#include "models/detectors/detector_options.h"

namespace flyby::detectors {

// A photon reaching detector channel `channel` (index into DetectorChainOptions::channels).
struct Photon {
  std::int64_t time_ps = 0;
  std::uint32_t channel = 0;
};

struct ChannelCounts {
  std::uint64_t photons = 0;         // photons that reached the detector
  std::uint64_t avalanches = 0;      // photons that passed the efficiency
  std::uint64_t dark_counts = 0;     // dark arrivals generated
  std::uint64_t afterpulses = 0;     // afterpulse arrivals generated
  std::uint64_t lost_dead_time = 0;  // arrivals lost in the dead time
  std::uint64_t clicks = 0;          // arrivals that made a click
  std::uint64_t lost_tagger = 0;     // clicks lost to the tagger rate limit
  std::uint64_t outside_window = 0;  // clicks whose tag fell outside the record window
  std::uint64_t recorded = 0;        // tags written
};

struct DetectorChainSummary {
  std::vector<ChannelCounts> channels;  // same order as the options
  std::string brief_report() const;     // one line: recorded tags per channel
  std::string full_report() const;      // one line per channel with every counter
};

class DetectorChain {
 public:
  // Throws InputError if options.problem() or the window is invalid. Tags are recorded in
  // [start_ps, end_ps); dark counts are generated over the same span.
  DetectorChain(DetectorChainOptions options, std::uint64_t seed, std::int64_t start_ps, std::int64_t end_ps);
  ~DetectorChain();
  DetectorChain(DetectorChain&&) noexcept;
  DetectorChain& operator=(DetectorChain&&) noexcept;

  // Feeds photons sorted by time (also across calls; InternalError otherwise) and appends the
  // tags that are final to `out`, in time order.
  void push(std::span<const Photon> photons, records::TagBlock& out);
  // Declares that no photon earlier than t_ps will follow (lets dark counts and tags flow
  // while no photons arrive).
  void advance_to(std::int64_t t_ps, records::TagBlock& out);
  // Ends the stream: processes everything up to end_ps and appends all remaining tags.
  void finish(records::TagBlock& out);

  // The record channel table (id, name, role) in option order.
  std::vector<records::Channel> record_channels() const;
  const DetectorChainSummary& summary() const;

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace flyby::detectors
