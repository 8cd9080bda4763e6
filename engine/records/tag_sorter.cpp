// External merge sort of time tags (see tag_sorter.h). Spill records are 9 bytes: int64 time
// (native byte order; the file lives only as long as the process) and the channel id.
#include "engine/records/tag_sorter.h"

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <cstring>
#include <queue>

#include "engine/common/errors.h"

namespace flyby::records {

namespace {
constexpr std::size_t kRecordBytes = 9;
constexpr std::size_t kBlockTags = 65536;

bool by_time(const std::pair<std::int64_t, ChannelId>& a, const std::pair<std::int64_t, ChannelId>& b) {
  return a.first < b.first;
}
}  // namespace

TagSorter::TagSorter(const std::filesystem::path& near, std::size_t run_tags) : near_(near), run_tags_(run_tags) {
  FLYBY_CHECK(run_tags >= 2, "TagSorter: run_tags must be >= 2");
}

TagSorter::~TagSorter() = default;  // AtomicOutputPath removes the spill file

void TagSorter::add(std::int64_t time_ps, ChannelId channel) {
  buf_.emplace_back(time_ps, channel);
  if (buf_.size() >= run_tags_) spill();
}

void TagSorter::spill() {
  if (buf_.empty()) return;
  if (!spill_path_) {
    auto spill_target = near_;
    spill_target += ".sort-runs";
    spill_path_ = std::make_unique<AtomicOutputPath>(spill_target);
    spill_.open(spill_path_->temp_path(), std::ios::binary | std::ios::trunc);
    if (!spill_) throw IoError(spill_path_->temp_path().string() + ": cannot create the sort spill file");
  }
  std::stable_sort(buf_.begin(), buf_.end(), by_time);
  std::vector<char> out(std::min(buf_.size(), kBlockTags) * kRecordBytes);
  for (std::size_t i = 0; i < buf_.size(); i += kBlockTags) {
    const std::size_t m = std::min(kBlockTags, buf_.size() - i);
    for (std::size_t j = 0; j < m; ++j) {
      std::memcpy(out.data() + j * kRecordBytes, &buf_[i + j].first, 8);
      out[j * kRecordBytes + 8] = static_cast<char>(buf_[i + j].second);
    }
    spill_.write(out.data(), static_cast<std::streamsize>(m * kRecordBytes));
  }
  if (!spill_) throw IoError(spill_path_->temp_path().string() + ": cannot write the sort spill file (disk full?)");
  runs_.push_back({spill_bytes_, buf_.size()});
  spill_bytes_ += buf_.size() * kRecordBytes;
  buf_.clear();
}

void TagSorter::finish(const std::function<void(const TagBlock&)>& sink) {
  TagBlock block;
  block.reserve(kBlockTags);
  auto emit = [&](std::int64_t t, ChannelId c) {
    block.push_back(t, c);
    if (block.size() == kBlockTags) {
      sink(block);
      block.clear();
    }
  };
  if (runs_.empty()) {  // everything fits in memory
    std::stable_sort(buf_.begin(), buf_.end(), by_time);
    for (const auto& [t, c] : buf_) emit(t, c);
    buf_.clear();
    buf_.shrink_to_fit();
  } else {
    spill();
    buf_.shrink_to_fit();
    spill_.close();
    if (!spill_) throw IoError(spill_path_->temp_path().string() + ": cannot write the sort spill file (disk full?)");
    // One file descriptor, one small buffer per run (pread at the run's own offset). Buffers
    // hold run_tags / runs records (16..4096), so the merge needs about as much memory as one
    // run, plus 144 bytes per run at least.
    const auto& path = spill_path_->temp_path();
    const int fd = ::open(path.c_str(), O_RDONLY);
    if (fd < 0) throw IoError(path.string() + ": cannot read back the sort spill file");
    struct CloseFd {
      int fd;
      ~CloseFd() { ::close(fd); }
    } close_fd{fd};
    const std::size_t per_refill = std::clamp<std::size_t>(run_tags_ / runs_.size(), 16, 4096);
    struct Reader {
      std::vector<char> raw;
      std::uint64_t offset = 0;  // next byte to load
      std::uint64_t left = 0;    // tags not yet loaded
      std::size_t pos = 0, n = 0;
      std::int64_t time() const {
        std::int64_t t;
        std::memcpy(&t, raw.data() + pos * kRecordBytes, 8);
        return t;
      }
      ChannelId channel() const { return static_cast<ChannelId>(raw[pos * kRecordBytes + 8]); }
    };
    auto refill = [&](Reader& r) {
      const std::size_t m = static_cast<std::size_t>(std::min<std::uint64_t>(r.left, per_refill));
      r.raw.resize(m * kRecordBytes);
      std::size_t got = 0;
      while (got < r.raw.size()) {
        const ssize_t k = ::pread(fd, r.raw.data() + got, r.raw.size() - got, static_cast<off_t>(r.offset + got));
        if (k <= 0) throw IoError(path.string() + ": cannot read back the sort spill file");
        got += static_cast<std::size_t>(k);
      }
      r.offset += r.raw.size();
      r.left -= m;
      r.pos = 0;
      r.n = m;
    };
    std::vector<Reader> rd(runs_.size());
    using Head = std::pair<std::int64_t, std::size_t>;  // (time, run): ties go to the earlier run
    std::priority_queue<Head, std::vector<Head>, std::greater<>> heap;
    for (std::size_t k = 0; k < runs_.size(); ++k) {
      rd[k].offset = runs_[k].offset;
      rd[k].left = runs_[k].count;
      refill(rd[k]);
      heap.emplace(rd[k].time(), k);
    }
    while (!heap.empty()) {
      const std::size_t k = heap.top().second;
      heap.pop();
      Reader& r = rd[k];
      emit(r.time(), r.channel());
      if (++r.pos == r.n) {
        if (r.left == 0) continue;
        refill(r);
      }
      heap.emplace(r.time(), k);
    }
    spill_path_->discard();
  }
  if (!block.empty()) sink(block);
}

}  // namespace flyby::records
