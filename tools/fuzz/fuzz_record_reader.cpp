// Fuzz target: arbitrary bytes as a record file. The reader must either accept the file (then
// every tag it yields satisfies the documented invariants) or throw flyby::InputError; anything
// else (crash, other exception, sanitizer report) is a finding. Seeds: valid records.
#include <cstdint>
#include <cstdlib>

#include "engine/common/errors.h"
#include "engine/records/record_reader.h"
#include "tools/fuzz/fuzz_scratch.h"

extern "C" int LLVMFuzzerTestOneInput(const unsigned char* data, std::size_t size) {
  const auto path = flyby::fuzz::write_input("in.h5", data, size);
  try {
    flyby::records::RecordReader r(path);
    flyby::records::TagBlock b;
    std::int64_t prev = INT64_MIN;
    std::uint64_t n = 0;
    while (r.read_next(b, 4096) && n < (1u << 22)) {
      for (std::size_t i = 0; i < b.size(); ++i) {
        if (b.time_ps[i] < prev) std::abort();  // the reader let unsorted tags through
        prev = b.time_ps[i];
        if (!r.header().channel_index(b.channel[i])) std::abort();
      }
      n += b.size();
    }
    if (r.tag_count() > 0) r.lower_bound(prev);
  } catch (const flyby::InputError&) {
  }
  return 0;
}
