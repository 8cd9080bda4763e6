// Fuzz target: arbitrary bytes through the binary importer. The first four bytes pick the record
// layout (record size, field offsets, sizes, signedness, header length); the rest is the file.
#include <cstdlib>
#include <sstream>

#include "engine/common/errors.h"
#include "engine/records/record_reader.h"
#include "engine/records/tag_import.h"
#include "tools/fuzz/fuzz_scratch.h"

extern "C" int LLVMFuzzerTestOneInput(const unsigned char* data, std::size_t size) {
  if (size < 4) return 0;
  using namespace flyby::records;
  BinaryImportOptions o;
  const std::size_t sizes[4] = {1, 2, 4, 8};
  o.record_bytes = 1 + data[0] % 24;
  o.time_field = {static_cast<std::size_t>(data[1] % 16), sizes[data[1] >> 4 & 3], (data[1] >> 6 & 1) != 0};
  o.channel_field = {static_cast<std::size_t>(data[2] % 16), sizes[data[2] >> 4 & 3], (data[2] >> 6 & 1) != 0};
  o.header_bytes = data[3] % 8;
  o.common.time_unit = (data[3] >> 3 & 1) ? "ns" : "80.955ps";
  o.common.sort = data[3] >> 4 & 1;
  if (data[3] >> 5 & 1) {
    o.common.channels = {{"0", "A", ChannelRole::kDetector, std::nullopt}, {"1", "B", ChannelRole::kMarker, std::nullopt}};
    o.common.drop_unmapped = data[3] >> 6 & 1;
  }
  std::istringstream in(std::string(reinterpret_cast<const char*>(data) + 4, size - 4));
  const auto out = flyby::fuzz::scratch_dir() / "bin.h5";
  try {
    const ImportSummary s = import_binary(in, "fuzz", out, o);
    const RecordData d = read_record(out);
    if (d.tags.size() != s.tags) std::abort();
  } catch (const flyby::InputError&) {
  }
  return 0;
}
