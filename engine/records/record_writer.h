// Streaming writer of flyby time-tag records (layout: docs/record-format.md). Tags are appended
// in time order in blocks of any size; memory stays bounded by one HDF5 chunk. The file is
// written under a temporary name and renamed onto the target by commit(); a writer destroyed
// without commit() (exception, early return) removes its temporary file, and SIGINT/SIGTERM
// remove it too (engine/common/atomic_output.h). A complete file also carries the root
// attribute complete=1, written last, which readers require.
#pragma once

#include <cstdint>
#include <filesystem>
#include <memory>
#include <span>

#include "engine/records/record_format.h"

namespace flyby::records {

struct RecordWriterOptions {
  // Tags per HDF5 chunk of /tags/time_ps and /tags/channel; also the writer's buffer size.
  // Range 1024 .. 16777216. 16384 tags = 144 KiB per chunk pair: large enough for fast
  // sequential I/O, small enough that a short record is not mostly padding.
  std::size_t chunk_tags = 16384;
  // Tags per entry of the coarse time index /index/time_ps. Range 1 .. 16777216.
  std::size_t index_block_tags = 65536;
  // gzip level of the tag datasets, 0 (off, default: time tags compress poorly) .. 9.
  int deflate_level = 0;
};

class RecordWriter {
 public:
  // Validates the header (InputError naming the problem) and creates the temporary file
  // (IoError if that fails). The header's window may be replaced later by set_window() or
  // fit_window_to_tags().
  RecordWriter(const std::filesystem::path& path, RecordHeader header, RecordWriterOptions options = {});
  ~RecordWriter();
  RecordWriter(const RecordWriter&) = delete;
  RecordWriter& operator=(const RecordWriter&) = delete;

  // Adds a channel to the table (the table is written at commit). InputError on a duplicate.
  void add_channel(const Channel& channel);
  const RecordHeader& header() const;

  // Sets the acquisition window [start_ps, start_ps + duration_ps).
  void set_window(std::int64_t start_ps, std::int64_t duration_ps);
  // At commit, use the smallest window holding every tag: start = first time,
  // duration = last - first + 1 (start 0, duration 0 for an empty record).
  void fit_window_to_tags();

  // Appends tags. Times must not decrease (also across calls) and every channel id must be in
  // the table; otherwise InputError naming the tag's running index. Spans must be equally long.
  void append(std::span<const std::int64_t> time_ps, std::span<const ChannelId> channel);
  void append(const TagBlock& block) { append(block.time_ps, block.channel); }
  void append(std::int64_t time_ps, ChannelId channel);

  std::uint64_t tag_count() const;

  // Flushes, checks that every tag lies in the window (InputError otherwise), writes the channel
  // table with per-channel counts, the time index and the completeness marker, closes the file
  // and renames it onto the target. After commit() the writer accepts nothing more.
  void commit();

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

// Writes a whole record in one call (atomic like RecordWriter).
void write_record(const std::filesystem::path& path, const RecordData& data, RecordWriterOptions options = {});

}  // namespace flyby::records
