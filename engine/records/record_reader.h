// Streaming, validating reader of flyby time-tag records (layout: docs/record-format.md).
//
// Opening validates the whole structure: format name and version, completeness marker, every
// required dataset and attribute with its type and shape, the channel table, the window and the
// coarse time index. Reading tags validates each block: times sorted (across blocks too when
// reading sequentially), inside the window, channel ids in the table; a complete sequential
// pass also checks the stored per-channel counts. Any problem throws flyby::InputError with one
// line "<file>: <problem>". The HDF5 library's own error printing is switched off.
//
// A reader is not thread-safe: use one reader per thread. Debian's HDF5 is built thread-safe
// (one global lock), so several readers may run at once, but their I/O is serialized:
// parallelize the work on blocks after reading them.
#pragma once

#include <cstdint>
#include <filesystem>
#include <memory>
#include <optional>
#include <vector>

#include "engine/records/record_format.h"

namespace flyby::records {

class RecordReader {
 public:
  explicit RecordReader(const std::filesystem::path& path);
  ~RecordReader();
  RecordReader(RecordReader&&) noexcept;
  RecordReader& operator=(RecordReader&&) noexcept;

  const std::filesystem::path& path() const;
  const RecordHeader& header() const;
  std::uint32_t format_version() const;
  std::uint64_t tag_count() const;
  // Stored tag counts per channel, in the order of header().channels.
  const std::vector<std::uint64_t>& channel_counts() const;
  // Times of the first and last tag (from the index and one read), nullopt for an empty record.
  std::optional<std::int64_t> first_time_ps() const;
  std::optional<std::int64_t> last_time_ps() const;

  // Sequential reading: replaces `out` with the next up to `max_tags` tags (>= 1) and returns
  // true, or returns false (and clears `out`) at the end. Validates as described above.
  bool read_next(TagBlock& out, std::size_t max_tags = 65536);
  // Position of the next sequential read (a tag index) and moving it.
  std::uint64_t position() const;
  void seek(std::uint64_t tag_index);

  // Random access: replaces `out` with tags [first, min(first + count, tag_count())).
  void read(std::uint64_t first, std::size_t count, TagBlock& out);

  // Index of the first tag with time >= t_ps (tag_count() if none): one index lookup and a
  // binary search inside one index block.
  std::uint64_t lower_bound(std::int64_t t_ps);

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

// Reads and validates a whole record into memory (for tests and small files).
RecordData read_record(const std::filesystem::path& path);

// Switches off the HDF5 library's automatic error-stack printing for the calling thread.
// Reader and writer call it themselves; exposed for other HDF5 users in flyby.
void silence_hdf5_errors();

}  // namespace flyby::records
