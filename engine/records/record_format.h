// The flyby time-tag record: the in-memory description of one record file (channels, tagger
// resolution, acquisition window, provenance) and a block of tags. The on-disk HDF5 layout is
// specified in docs/record-format.md; record_writer.h and record_reader.h implement it.
//
// Conventions: every time is an int64 count of picoseconds on the tagger's clock; tags are
// sorted by time (ties in any order); a tag's channel is a small integer id (0..255) that must
// appear in the channel table.
#pragma once

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace flyby::records {

using ChannelId = std::uint8_t;

// Identifies the file type; stored in the root attribute "format".
inline constexpr std::string_view kFormatName = "flyby-time-tags";
// Layout version written by this build; readers refuse a larger major version.
inline constexpr std::uint32_t kFormatVersion = 1;

// What a channel's tags mean. The analysis uses roles to pick default channel pairs.
enum class ChannelRole {
  kDetector,  // clicks of a single-photon detector
  kHerald,    // clicks of a single-photon detector used as the start (herald) of conditional analysis
  kMarker,    // electronic events that are not photons: sync, trigger, feedback on/off edges
};
std::string_view to_string(ChannelRole role);
std::optional<ChannelRole> channel_role_from_string(std::string_view text);

struct Channel {
  ChannelId id = 0;                        // value stored in /tags/channel, unique per record
  std::string name;                        // unique, 1-64 chars of [A-Za-z0-9_.+-]
  ChannelRole role = ChannelRole::kDetector;
};

// True if `name` is a valid channel name (1-64 characters from [A-Za-z0-9_.+-]).
bool is_valid_channel_name(std::string_view name);

// How and by what a record was made. Strings may be empty when unknown.
struct RecordProvenance {
  std::string flyby_version;  // flyby version string, with git commit
  std::string command_line;   // full command line of the run that wrote the record
  std::string host;           // host name
  std::string date_utc;       // ISO 8601 UTC start time of that run
  std::string source;         // "simulation", "import" or another short word
  std::string config_text;    // full text of the scenario config (simulation), else empty
  std::optional<std::uint64_t> seed;  // master seed of a simulation
  std::string parent;         // provenance of the record this one derives from (JSON), or empty
};

// Fills version, command line, host and date from the running process (engine/common/provenance.h).
RecordProvenance current_record_provenance(std::string source, std::string config_text = {},
                                           std::optional<std::uint64_t> seed = std::nullopt);

struct RecordHeader {
  std::vector<Channel> channels;  // channel table, at most 256 entries, ids and names unique
  double resolution_ps = 1.0;     // tagger bin width in ps (> 0); times are not required to be multiples
  std::int64_t start_ps = 0;      // start of the acquisition window; every tag has time >= start_ps
  std::int64_t duration_ps = 0;   // window length (>= 0); every tag has time < start_ps + duration_ps
  RecordProvenance provenance;

  // Position of channel `id` in `channels`, or nullopt.
  std::optional<std::size_t> channel_index(ChannelId id) const;
  // Position of the channel named `name`, or nullopt.
  std::optional<std::size_t> channel_index(std::string_view name) const;
  double duration_s() const { return static_cast<double>(duration_ps) * 1e-12; }
};

// Empty if the header is consistent, else a one-line description of the first problem
// (duplicate id or name, invalid name, resolution <= 0, negative duration, window overflow).
std::optional<std::string> header_problem(const RecordHeader& header);

// A run of consecutive tags, struct-of-arrays (the analysis streams over time_ps alone).
struct TagBlock {
  std::vector<std::int64_t> time_ps;
  std::vector<ChannelId> channel;

  std::size_t size() const { return time_ps.size(); }
  bool empty() const { return time_ps.empty(); }
  void clear() {
    time_ps.clear();
    channel.clear();
  }
  void reserve(std::size_t n) {
    time_ps.reserve(n);
    channel.reserve(n);
  }
  void push_back(std::int64_t t_ps, ChannelId ch) {
    time_ps.push_back(t_ps);
    channel.push_back(ch);
  }
};

// A whole record in memory (for tests and small files).
struct RecordData {
  RecordHeader header;
  TagBlock tags;
};

}  // namespace flyby::records
