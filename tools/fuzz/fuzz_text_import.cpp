// Fuzz target: arbitrary text through the text importer. The first byte picks the options
// (delimiter, header mode, unit, sort, columns by name). The import must either succeed (then
// the written record reads back with the same tag count) or throw flyby::InputError.
#include <cstdlib>
#include <sstream>

#include "engine/common/errors.h"
#include "engine/records/record_reader.h"
#include "engine/records/tag_import.h"
#include "tools/fuzz/fuzz_scratch.h"

extern "C" int LLVMFuzzerTestOneInput(const unsigned char* data, std::size_t size) {
  if (size < 1) return 0;
  using namespace flyby::records;
  const unsigned char sel = data[0];
  TextImportOptions o;
  const char delims[4] = {',', ' ', '\t', ';'};
  o.delimiter = delims[sel & 3];
  o.header = (sel >> 2 & 1) ? TextImportOptions::Header::kAuto : TextImportOptions::Header::kAbsent;
  o.common.sort = sel >> 3 & 1;
  if (sel >> 4 & 1) o.common.time_unit = (sel >> 5 & 1) ? "s" : "80.955ps";
  if (sel >> 6 & 1) {
    o.time_column = "time_ps";
    o.channel_column = "channel";
    o.header = TextImportOptions::Header::kPresent;
  }
  if (sel >> 7 & 1) o.common.channels = {{"1", "A", ChannelRole::kDetector, std::nullopt}, {"B", "B", ChannelRole::kHerald, 7}};
  o.max_line_bytes = 4096;
  std::istringstream in(std::string(reinterpret_cast<const char*>(data) + 1, size - 1));
  const auto out = flyby::fuzz::scratch_dir() / "text.h5";
  try {
    const ImportSummary s = import_text(in, "fuzz", out, o);
    const RecordData d = read_record(out);
    if (d.tags.size() != s.tags) std::abort();
  } catch (const flyby::InputError&) {
  }
  return 0;
}
