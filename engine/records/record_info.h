// Inspection of a record for `flyby info` and for reports: channels with counts and rates,
// window, resolution, provenance; as text or JSON. A full scan re-reads every tag through the
// validating reader, so a file that passes is consistent from end to end.
#pragma once

#include <cstdint>
#include <filesystem>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "engine/records/record_format.h"

namespace flyby::records {

struct ChannelInfo {
  Channel channel;
  std::uint64_t tag_count = 0;
  double rate_per_s = 0;  // tag_count / duration (0 for a zero-length window)
};

struct RecordInfo {
  std::filesystem::path path;
  std::uint32_t format_version = 0;
  RecordHeader header;
  std::uint64_t tag_count = 0;
  std::optional<std::int64_t> first_time_ps, last_time_ps;
  std::vector<ChannelInfo> channels;
  bool full_scan = false;  // every tag was read and checked

  nlohmann::json to_json() const;
  std::string text_report() const;
};

// Opens and validates `path`; with full_scan, reads every tag (InputError on any problem).
RecordInfo inspect_record(const std::filesystem::path& path, bool full_scan = true);

nlohmann::json provenance_to_json(const RecordProvenance& p);

}  // namespace flyby::records
