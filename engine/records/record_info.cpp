// Record inspection (see record_info.h).
#include "engine/records/record_info.h"

#include <charconv>
#include <cmath>
#include <cstdio>
#include <sstream>

#include "engine/records/record_reader.h"

namespace flyby::records {

nlohmann::json provenance_to_json(const RecordProvenance& p) {
  nlohmann::json j = {{"flyby_version", p.flyby_version}, {"command_line", p.command_line}, {"host", p.host},
                      {"date_utc", p.date_utc},           {"source", p.source},             {"config_text", p.config_text}};
  j["seed"] = p.seed ? nlohmann::json(*p.seed) : nlohmann::json(nullptr);
  if (!p.parent.empty()) {
    auto parent = nlohmann::json::parse(p.parent, nullptr, false);
    j["parent"] = parent.is_discarded() ? nlohmann::json(p.parent) : parent;
  } else {
    j["parent"] = nullptr;
  }
  return j;
}

RecordInfo inspect_record(const std::filesystem::path& path, bool full_scan) {
  RecordReader r(path);
  RecordInfo info;
  info.path = path;
  info.format_version = r.format_version();
  info.header = r.header();
  info.tag_count = r.tag_count();
  info.first_time_ps = r.first_time_ps();
  info.last_time_ps = r.last_time_ps();
  if (full_scan) {
    TagBlock b;
    while (r.read_next(b, 1 << 18)) {
    }
    info.full_scan = true;  // read_next checked order, window, ids and the stored counts
  }
  const double dur_s = info.header.duration_s();
  for (std::size_t i = 0; i < info.header.channels.size(); ++i) {
    ChannelInfo c;
    c.channel = info.header.channels[i];
    c.tag_count = r.channel_counts()[i];
    c.rate_per_s = dur_s > 0 ? static_cast<double>(c.tag_count) / dur_s : 0.0;
    info.channels.push_back(c);
  }
  return info;
}

nlohmann::json RecordInfo::to_json() const {
  nlohmann::json ch = nlohmann::json::array();
  for (const auto& c : channels) {
    ch.push_back({{"id", c.channel.id},
                  {"name", c.channel.name},
                  {"role", std::string(to_string(c.channel.role))},
                  {"tag_count", c.tag_count},
                  {"rate_per_s", c.rate_per_s}});
  }
  return {{"file", path.string()},
          {"format_version", format_version},
          {"tag_count", tag_count},
          {"resolution_ps", header.resolution_ps},
          {"start_ps", header.start_ps},
          {"duration_ps", header.duration_ps},
          {"duration_s", header.duration_s()},
          {"first_tag_ps", first_time_ps ? nlohmann::json(*first_time_ps) : nlohmann::json(nullptr)},
          {"last_tag_ps", last_time_ps ? nlohmann::json(*last_time_ps) : nlohmann::json(nullptr)},
          {"total_rate_per_s", header.duration_ps > 0 ? static_cast<double>(tag_count) / header.duration_s() : 0.0},
          {"channels", ch},
          {"verified_all_tags", full_scan},
          {"provenance", provenance_to_json(header.provenance)}};
}

std::string RecordInfo::text_report() const {
  std::ostringstream os;
  char buf[256];
  os << "file:        " << path.string() << "\n";
  os << "format:      flyby-time-tags version " << format_version << (full_scan ? ", all tags verified" : ", header verified") << "\n";
  std::snprintf(buf, sizeof buf, "%.6g s (window %lld ps + %lld ps)", header.duration_s(),
                static_cast<long long>(header.start_ps), static_cast<long long>(header.duration_ps));
  os << "duration:    " << buf << "\n";
  const auto rr = std::to_chars(buf, buf + sizeof buf, header.resolution_ps);
  os << "resolution:  " << std::string_view(buf, static_cast<std::size_t>(rr.ptr - buf)) << " ps\n";
  os << "tags:        " << tag_count;
  if (first_time_ps) os << " (first " << *first_time_ps << " ps, last " << *last_time_ps << " ps)";
  os << "\n";
  os << "channels:\n";
  std::snprintf(buf, sizeof buf, "  %4s  %-20s %-9s %14s %16s\n", "id", "name", "role", "tags", "rate_per_s");
  os << buf;
  for (const auto& c : channels) {
    std::snprintf(buf, sizeof buf, "  %4d  %-20s %-9s %14llu %16.6g\n", c.channel.id, c.channel.name.c_str(),
                  std::string(to_string(c.channel.role)).c_str(), static_cast<unsigned long long>(c.tag_count), c.rate_per_s);
    os << buf;
  }
  const auto& p = header.provenance;
  os << "provenance:\n";
  os << "  source:    " << p.source << "\n";
  os << "  written by " << p.flyby_version << " on " << p.host << " at " << p.date_utc << "\n";
  os << "  command:   " << p.command_line << "\n";
  if (p.seed) os << "  seed:      " << *p.seed << "\n";
  if (!p.config_text.empty()) {
    std::size_t lines = 0;
    for (char c : p.config_text) lines += c == '\n';
    os << "  config:    " << p.config_text.size() << " bytes, " << lines << " lines (shown by --json)\n";
  }
  if (!p.parent.empty()) {
    const auto j = nlohmann::json::parse(p.parent, nullptr, false);
    if (!j.is_discarded() && j.is_object()) {
      os << "  derived from a record written by " << j.value("flyby_version", std::string("?")) << " ("
         << j.value("source", std::string("?")) << ", " << j.value("date_utc", std::string("?")) << ")";
      if (j.contains("seed") && j["seed"].is_number_unsigned()) os << ", seed " << j["seed"].get<std::uint64_t>();
      os << "\n";
    }
  }
  return os.str();
}

}  // namespace flyby::records
