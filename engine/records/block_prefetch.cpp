// Double-buffered sequential reading (see block_prefetch.h).
#include "engine/records/block_prefetch.h"

#include <utility>

#include "engine/common/errors.h"

namespace flyby::records {

BlockPrefetcher::BlockPrefetcher(RecordReader& reader, std::size_t block_tags)
    : reader_(reader), block_tags_(block_tags) {
  FLYBY_CHECK(block_tags >= 1, "BlockPrefetcher: block_tags must be >= 1");
  launch();
}

BlockPrefetcher::~BlockPrefetcher() {
  // Let a running read finish before its buffer goes away; its errors no longer matter.
  if (pending_.valid()) {
    try {
      pending_.get();
    } catch (...) {
    }
  }
}

void BlockPrefetcher::launch() {
  pending_ = std::async(std::launch::async, [this] { return reader_.read_next(ahead_, block_tags_); });
}

bool BlockPrefetcher::next(TagBlock& out) {
  if (!pending_.valid()) {  // finished, or a previous read failed
    out.clear();
    return false;
  }
  const bool ok = pending_.get();  // rethrows the reader's InputError
  std::swap(out, ahead_);
  if (ok) launch();
  return ok;
}

}  // namespace flyby::records
