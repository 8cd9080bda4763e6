// CSV export (see csv_export.h). Integers are formatted with std::to_chars (exact, fast).
#include "engine/records/csv_export.h"

#include <array>
#include <charconv>
#include <cstdio>
#include <string>

#include "engine/common/errors.h"
#include "engine/records/record_info.h"

namespace flyby::records {

std::uint64_t export_csv(RecordReader& reader, std::ostream& out, const CsvExportOptions& options) {
  const RecordHeader& h = reader.header();
  const char d = options.delimiter;
  if (options.metadata) {
    // Shortest text that reads back to the same double (std::to_chars round-trip guarantee).
    char res[64];
    const auto rr = std::to_chars(res, res + sizeof res, h.resolution_ps);
    out << "#@flyby format_version=" << kFormatVersion << "\n";
    out << "#@flyby resolution_ps=" << std::string_view(res, static_cast<std::size_t>(rr.ptr - res)) << "\n";
    out << "#@flyby start_ps=" << h.start_ps << "\n";
    out << "#@flyby duration_ps=" << h.duration_ps << "\n";
    for (const Channel& c : h.channels) {
      out << "#@flyby channel=" << static_cast<int>(c.id) << "," << c.name << "," << to_string(c.role) << "\n";
    }
    // dump() escapes newlines, so the JSON stays on one line.
    out << "#@flyby provenance=" << provenance_to_json(h.provenance).dump(-1, ' ', true, nlohmann::json::error_handler_t::replace) << "\n";
  }
  out << "time_ps" << d << "channel\n";
  std::array<std::string, 256> label;
  for (const Channel& c : h.channels) label[c.id] = options.channel_ids ? std::to_string(c.id) : c.name;
  reader.seek(0);
  TagBlock b;
  std::string buf;
  std::uint64_t n = 0;
  while (reader.read_next(b, 1 << 16)) {
    buf.clear();
    for (std::size_t i = 0; i < b.size(); ++i) {
      char num[24];
      const auto r = std::to_chars(num, num + sizeof num, b.time_ps[i]);
      buf.append(num, r.ptr);
      buf.push_back(d);
      buf.append(label[b.channel[i]]);
      buf.push_back('\n');
    }
    out.write(buf.data(), static_cast<std::streamsize>(buf.size()));
    if (!out) throw IoError("write failed while exporting " + reader.path().string());
    n += b.size();
  }
  return n;
}

}  // namespace flyby::records
