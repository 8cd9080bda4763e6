// Stable external sort of time tags by time, with bounded memory: tags are collected in runs of
// at most `run_tags`; a full run is sorted and appended to one hidden spill file next to the
// output; at the end the runs are merged (k-way, ties broken by run order, so the sort is
// stable) and handed out in blocks. Input that fits in one run never touches the disk.
// Used by `flyby import --sort` for measured data in arbitrary order.
#pragma once

#include <cstdint>
#include <filesystem>
#include <fstream>
#include <functional>
#include <memory>
#include <utility>
#include <vector>

#include "engine/common/atomic_output.h"
#include "engine/records/record_format.h"

namespace flyby::records {

class TagSorter {
 public:
  // `near` names a file whose directory holds the spill file (the output record); run_tags >= 2.
  TagSorter(const std::filesystem::path& near, std::size_t run_tags);
  ~TagSorter();
  TagSorter(const TagSorter&) = delete;
  TagSorter& operator=(const TagSorter&) = delete;

  void add(std::int64_t time_ps, ChannelId channel);
  // Calls `sink` with consecutive sorted blocks (at most 65536 tags each), then releases the
  // spill file. IoError if the spill file cannot be written or read back.
  void finish(const std::function<void(const TagBlock&)>& sink);

  std::size_t runs() const { return runs_.size(); }        // runs spilled to disk so far
  std::size_t run_tags() const { return run_tags_; }        // largest run held in memory

 private:
  struct Run {
    std::uint64_t offset;  // byte offset in the spill file
    std::uint64_t count;   // tags
  };
  void spill();

  std::filesystem::path near_;
  std::size_t run_tags_;
  std::vector<std::pair<std::int64_t, ChannelId>> buf_;
  std::unique_ptr<AtomicOutputPath> spill_path_;
  std::ofstream spill_;
  std::uint64_t spill_bytes_ = 0;
  std::vector<Run> runs_;
};

}  // namespace flyby::records
