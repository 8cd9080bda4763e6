// Channel roles, name rules and header consistency checks of the time-tag record.
#include "engine/records/record_format.h"

#include <array>
#include <limits>

#include "engine/common/provenance.h"

namespace flyby::records {

std::string_view to_string(ChannelRole role) {
  switch (role) {
    case ChannelRole::kDetector: return "detector";
    case ChannelRole::kHerald: return "herald";
    case ChannelRole::kMarker: return "marker";
  }
  return "detector";
}

std::optional<ChannelRole> channel_role_from_string(std::string_view text) {
  if (text == "detector") return ChannelRole::kDetector;
  if (text == "herald") return ChannelRole::kHerald;
  if (text == "marker") return ChannelRole::kMarker;
  return std::nullopt;
}

bool is_valid_channel_name(std::string_view name) {
  if (name.empty() || name.size() > 64) return false;
  for (char c : name) {
    const bool ok = (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_' ||
                    c == '.' || c == '+' || c == '-';
    if (!ok) return false;
  }
  return true;
}

RecordProvenance current_record_provenance(std::string source, std::string config_text,
                                           std::optional<std::uint64_t> seed) {
  const Provenance p = current_provenance();
  RecordProvenance r;
  r.flyby_version = p.version;
  r.command_line = p.command_line;
  r.host = p.host;
  r.date_utc = p.date_utc;
  r.source = std::move(source);
  r.config_text = std::move(config_text);
  r.seed = seed;
  return r;
}

std::optional<std::size_t> RecordHeader::channel_index(ChannelId id) const {
  for (std::size_t i = 0; i < channels.size(); ++i) {
    if (channels[i].id == id) return i;
  }
  return std::nullopt;
}

std::optional<std::size_t> RecordHeader::channel_index(std::string_view name) const {
  for (std::size_t i = 0; i < channels.size(); ++i) {
    if (channels[i].name == name) return i;
  }
  return std::nullopt;
}

std::optional<std::string> header_problem(const RecordHeader& h) {
  if (h.channels.size() > 256) return "more than 256 channels (" + std::to_string(h.channels.size()) + ")";
  std::array<bool, 256> seen{};
  for (std::size_t i = 0; i < h.channels.size(); ++i) {
    const Channel& c = h.channels[i];
    if (seen[c.id]) return "channel id " + std::to_string(c.id) + " appears twice in the channel table";
    seen[c.id] = true;
    if (!is_valid_channel_name(c.name)) {
      return "channel name '" + c.name.substr(0, 80) + "' is invalid (use 1-64 characters from A-Z a-z 0-9 _ . + -)";
    }
    for (std::size_t j = 0; j < i; ++j) {
      if (h.channels[j].name == c.name) return "channel name '" + c.name + "' appears twice in the channel table";
    }
  }
  if (!(h.resolution_ps > 0.0) || !(h.resolution_ps < 1e15)) {
    return "tagger resolution must be a finite positive number of ps, found " + std::to_string(h.resolution_ps);
  }
  if (h.duration_ps < 0) return "negative duration_ps " + std::to_string(h.duration_ps);
  if (h.start_ps > std::numeric_limits<std::int64_t>::max() - h.duration_ps) {
    return "window start_ps + duration_ps overflows int64";
  }
  return std::nullopt;
}

}  // namespace flyby::records
