// Read-ahead over a RecordReader: while the caller works on one block of tags, the next block
// is read on a background thread, so HDF5 I/O and analysis overlap. Memory stays bounded by
// three blocks (the caller's, the one being read and the spare swapped between them).
#pragma once

#include <cstddef>
#include <future>

#include "engine/records/record_reader.h"

namespace flyby::records {

class BlockPrefetcher {
 public:
  // Reads `reader` sequentially from its current position in blocks of `block_tags` (>= 1).
  // The reader must outlive the prefetcher and must not be used by anyone else meanwhile.
  BlockPrefetcher(RecordReader& reader, std::size_t block_tags);
  ~BlockPrefetcher();
  BlockPrefetcher(const BlockPrefetcher&) = delete;
  BlockPrefetcher& operator=(const BlockPrefetcher&) = delete;

  // Like RecordReader::read_next: replaces `out` with the next block and returns true, or
  // returns false at the end. Errors of the background read (InputError) are rethrown here.
  bool next(TagBlock& out);

 private:
  void launch();
  RecordReader& reader_;
  std::size_t block_tags_;
  TagBlock ahead_;                 // filled by the background read
  std::future<bool> pending_;      // result of read_next on ahead_
};

}  // namespace flyby::records
