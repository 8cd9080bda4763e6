// Validating streaming reader of time-tag records. Structure is checked once at open; tag data
// block by block as it is read.
#include "engine/records/record_reader.h"

#include <algorithm>
#include <array>
#include <fstream>
#include <limits>

#include "engine/common/errors.h"
#include "engine/records/hdf5_io.h"

namespace flyby::records {

using h5::Handle;
using h5::Kind;

void silence_hdf5_errors() { H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr); }

struct RecordReader::Impl {
  std::filesystem::path path;
  Handle file, time_dset, chan_dset;
  RecordHeader header;
  std::uint32_t version = 0;
  std::uint64_t n = 0;
  std::vector<std::uint64_t> counts;       // stored, per table entry
  std::array<int, 256> slot{};             // channel id -> table position, -1 if absent
  std::vector<std::int64_t> index;
  std::uint64_t block_tags = 1;
  std::optional<std::int64_t> last_time;

  // Sequential state.
  std::uint64_t pos = 0;
  std::optional<std::int64_t> prev_time;   // time of tag pos-1 if known
  bool counting = true;                    // reading contiguously from tag 0
  std::array<std::uint64_t, 256> seen{};

  [[noreturn]] void fail(const std::string& msg) const { throw InputError(path.string() + ": " + msg); }

  void open();
  // Reads and validates tags [first, first + count); with `seen`, also adds the tags per
  // channel id to it (in the same pass).
  void read_block(std::uint64_t first, std::size_t count, TagBlock& out, std::array<std::uint64_t, 256>* seen = nullptr);
  void validate_slowly(std::uint64_t first, const TagBlock& out) const;
};

void RecordReader::Impl::open() {
  std::error_code ec;
  if (!std::filesystem::exists(path, ec)) fail("no such file");
  if (!std::filesystem::is_regular_file(path, ec)) fail("not a regular file");
  const auto size = std::filesystem::file_size(path, ec);
  if (ec) fail("cannot determine the file size");
  if (size == 0) fail("empty file (0 bytes), not a flyby record");
  {
    std::ifstream probe(path, std::ios::binary);
    if (!probe) fail("cannot open for reading");
  }
  const htri_t is_h5 = H5Fis_hdf5(path.c_str());
  if (is_h5 <= 0) fail("not an HDF5 file (no HDF5 signature; wrong file or truncated at the start)");
  file = Handle(H5Fopen(path.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT));
  if (!file.valid()) fail("cannot open as HDF5 (truncated or corrupt)");
  const hid_t f = file.get();
  try {
    const std::string root = "root group";
    const auto format = h5::read_attr_string(f, "format", root);
    if (!format) fail("not a flyby time-tag record (root attribute 'format' missing)");
    if (*format != kFormatName) fail("not a flyby time-tag record (format is '" + format->substr(0, 80) + "')");
    const auto v = h5::read_attr_u32(f, "format_version", root);
    if (!v) fail("root attribute 'format_version' missing");
    if (*v == 0 || *v > kFormatVersion) {
      fail("format version " + std::to_string(*v) + " is not supported (this flyby reads version 1.." +
           std::to_string(kFormatVersion) + ")");
    }
    version = *v;
    const auto complete = h5::read_attr_u8(f, "complete", root);
    if (!complete || *complete != 1) {
      fail("incomplete record (writing was interrupted: root attribute 'complete' is not 1)");
    }
    const auto tc = h5::read_attr_u64(f, "tag_count", root);
    const auto res = h5::read_attr_f64(f, "resolution_ps", root);
    const auto start = h5::read_attr_i64(f, "start_ps", root);
    const auto dur = h5::read_attr_i64(f, "duration_ps", root);
    if (!tc) fail("root attribute 'tag_count' missing");
    if (!res) fail("root attribute 'resolution_ps' missing");
    if (!start) fail("root attribute 'start_ps' missing");
    if (!dur) fail("root attribute 'duration_ps' missing");
    n = *tc;
    header.resolution_ps = *res;
    header.start_ps = *start;
    header.duration_ps = *dur;

    auto [td, tn] = h5::open_dataset_1d(f, "/tags/time_ps", Kind::kInt64);
    auto [cd, cn] = h5::open_dataset_1d(f, "/tags/channel", Kind::kUint8);
    if (tn != n) fail("/tags/time_ps has " + std::to_string(tn) + " entries but tag_count is " + std::to_string(n));
    if (cn != n) fail("/tags/channel has " + std::to_string(cn) + " entries but tag_count is " + std::to_string(n));
    time_dset = std::move(td);
    chan_dset = std::move(cd);

    auto [idd, m] = h5::open_dataset_1d(f, "/channels/id", Kind::kUint8);
    if (m > 256) fail("/channels/id has " + std::to_string(m) + " entries, at most 256 allowed");
    std::vector<std::uint8_t> ids(m);
    h5::read_slab(idd.get(), Kind::kUint8, 0, m, ids.data(), "/channels/id");
    const auto names = h5::read_strings(f, "/channels/name", 256);
    const auto roles = h5::read_strings(f, "/channels/role", 256);
    auto [ctd, ctn] = h5::open_dataset_1d(f, "/channels/tag_count", Kind::kUint64);
    if (names.size() != m || roles.size() != m || ctn != m) {
      fail("channel table datasets /channels/{id,name,role,tag_count} differ in length");
    }
    counts.resize(m);
    h5::read_slab(ctd.get(), Kind::kUint64, 0, m, counts.data(), "/channels/tag_count");
    for (std::size_t i = 0; i < m; ++i) {
      const auto role = channel_role_from_string(roles[i]);
      if (!role) fail("channel '" + names[i].substr(0, 80) + "' has unknown role '" + roles[i].substr(0, 80) + "' (detector, herald or marker)");
      header.channels.push_back(Channel{ids[i], names[i], *role});
    }
    if (auto p = header_problem(header)) fail(*p);
    slot.fill(-1);
    std::uint64_t sum = 0;
    for (std::size_t i = 0; i < m; ++i) {
      slot[ids[i]] = static_cast<int>(i);
      if (counts[i] > n - sum) fail("/channels/tag_count sums to more than tag_count");
      sum += counts[i];
    }
    if (sum != n) fail("/channels/tag_count sums to " + std::to_string(sum) + " but tag_count is " + std::to_string(n));

    auto [ixd, k] = h5::open_dataset_1d(f, "/index/time_ps", Kind::kInt64);
    const auto bt = h5::read_attr_u64(ixd.get(), "block_tags", "dataset /index/time_ps");
    if (!bt || *bt == 0 || *bt > (std::uint64_t{1} << 24)) {
      fail("dataset /index/time_ps: attribute 'block_tags' missing or outside 1..16777216");
    }
    block_tags = *bt;
    const std::uint64_t want_k = n == 0 ? 0 : (n - 1) / block_tags + 1;
    if (k != want_k) {
      fail("/index/time_ps has " + std::to_string(k) + " entries, expected " + std::to_string(want_k) +
           " for " + std::to_string(n) + " tags in blocks of " + std::to_string(block_tags));
    }
    index.resize(k);
    h5::read_slab(ixd.get(), Kind::kInt64, 0, k, index.data(), "/index/time_ps");
    for (std::uint64_t i = 1; i < k; ++i) {
      if (index[i] < index[i - 1]) fail("/index/time_ps is not sorted at entry " + std::to_string(i));
    }

    if (h5::exists(f, "/provenance")) {
      Handle g(H5Gopen2(f, "/provenance", H5P_DEFAULT));
      if (!g.valid()) fail("/provenance is not a group");
      const std::string w = "group /provenance";
      RecordProvenance& p = header.provenance;
      p.flyby_version = h5::read_attr_string(g.get(), "flyby_version", w).value_or("");
      p.command_line = h5::read_attr_string(g.get(), "command_line", w).value_or("");
      p.host = h5::read_attr_string(g.get(), "host", w).value_or("");
      p.date_utc = h5::read_attr_string(g.get(), "date_utc", w).value_or("");
      p.source = h5::read_attr_string(g.get(), "source", w).value_or("");
      p.config_text = h5::read_attr_string(g.get(), "config_text", w).value_or("");
      p.parent = h5::read_attr_string(g.get(), "parent", w).value_or("");
      p.seed = h5::read_attr_u64(g.get(), "seed", w);
    }
  } catch (const h5::ReadError& e) {
    fail(e.message);
  }
  if (n > 0) {
    TagBlock last;
    read_block(n - 1, 1, last);
    last_time = last.time_ps[0];
    if (index[0] > *last_time) fail("/index/time_ps[0] is later than the last tag");
  }
}

void RecordReader::Impl::read_block(std::uint64_t first, std::size_t count, TagBlock& out,
                                    std::array<std::uint64_t, 256>* seen) {
  silence_hdf5_errors();  // per thread: the reader may be used on another thread than it was made on
  if (first >= n || count == 0) {
    out.clear();
    return;
  }
  count = static_cast<std::size_t>(std::min<std::uint64_t>(count, n - first));
  // Resizing a block of the same size (the usual case in a sequential pass) costs nothing.
  out.time_ps.resize(count);
  out.channel.resize(count);
  try {
    h5::read_slab(time_dset.get(), Kind::kInt64, first, count, out.time_ps.data(), "/tags/time_ps");
    h5::read_slab(chan_dset.get(), Kind::kUint8, first, count, out.channel.data(), "/tags/channel");
  } catch (const h5::ReadError& e) {
    out.clear();
    fail(e.message);
  }
  // One fast pass without data-dependent branches (this loop runs on every tag of every
  // analysis); only a block that fails it is scanned again to name the first bad tag. Per tag
  // it checks only the order (and counts the tags per channel): in a sorted block every tag
  // lies between the first and the last, so the window is checked on those two, and a channel
  // outside the table shows as a nonzero count of that id.
  const std::int64_t lo = header.start_ps;
  const std::int64_t span = header.duration_ps;
  const auto ulo = static_cast<std::uint64_t>(lo), uspan = static_cast<std::uint64_t>(span);
  const std::int64_t* t = out.time_ps.data();
  const ChannelId* c = out.channel.data();
  // t >= lo makes the unsigned difference exact even where t - lo would overflow int64.
  bool bad = (t[0] < lo) | (static_cast<std::uint64_t>(t[count - 1]) - ulo >= uspan);
  bool unsorted = false;
  // Four count tables in turn: consecutive tags of one channel would otherwise wait for each
  // other's increment of the same counter.
  std::array<std::array<std::uint64_t, 256>, 4> n{};
  std::size_t i = 1;
  ++n[0][c[0]];
  for (; i + 4 <= count; i += 4) {
    unsorted |= (t[i] < t[i - 1]) | (t[i + 1] < t[i]) | (t[i + 2] < t[i + 1]) | (t[i + 3] < t[i + 2]);
    ++n[0][c[i]];
    ++n[1][c[i + 1]];
    ++n[2][c[i + 2]];
    ++n[3][c[i + 3]];
  }
  for (; i < count; ++i) {
    unsorted |= t[i] < t[i - 1];
    ++n[0][c[i]];
  }
  bad |= unsorted;
  for (std::size_t k = 0; k < 256; ++k) {
    const std::uint64_t m = n[0][k] + n[1][k] + n[2][k] + n[3][k];
    bad |= (m != 0) & (slot[k] < 0);
    if (seen) (*seen)[k] += m;
  }
  for (std::uint64_t k = (first + block_tags - 1) / block_tags; k * block_tags < first + count; ++k)
    bad |= index[k] != t[k * block_tags - first];
  if (bad) validate_slowly(first, out);
}

void RecordReader::Impl::validate_slowly(std::uint64_t first, const TagBlock& out) const {
  const std::int64_t lo = header.start_ps;
  const std::int64_t span = header.duration_ps;
  for (std::size_t i = 0; i < out.size(); ++i) {
    const std::int64_t t = out.time_ps[i];
    const std::uint64_t tag = first + i;
    if (i > 0 && t < out.time_ps[i - 1]) {
      fail("tags are not sorted in time: tag " + std::to_string(tag) + " (" + std::to_string(t) +
           " ps) is earlier than tag " + std::to_string(tag - 1) + " (" + std::to_string(out.time_ps[i - 1]) + " ps)");
    }
    // t >= lo makes the unsigned difference exact even where t - lo would overflow int64.
    if (t < lo || static_cast<std::uint64_t>(t) - static_cast<std::uint64_t>(lo) >= static_cast<std::uint64_t>(span)) {
      fail("tag " + std::to_string(tag) + " at " + std::to_string(t) + " ps lies outside the window [" +
           std::to_string(lo) + ", " + std::to_string(lo + span) + ") ps");
    }
    if (slot[out.channel[i]] < 0) {
      fail("tag " + std::to_string(tag) + " has channel id " + std::to_string(out.channel[i]) +
           " that is not in the channel table");
    }
    if (tag % block_tags == 0 && index[tag / block_tags] != t) {
      fail("/index/time_ps[" + std::to_string(tag / block_tags) + "] does not match the time of tag " + std::to_string(tag));
    }
  }
}

RecordReader::RecordReader(const std::filesystem::path& path) : impl_(std::make_unique<Impl>()) {
  silence_hdf5_errors();
  impl_->path = path;
  impl_->open();
}

RecordReader::~RecordReader() = default;
RecordReader::RecordReader(RecordReader&&) noexcept = default;
RecordReader& RecordReader::operator=(RecordReader&&) noexcept = default;

const std::filesystem::path& RecordReader::path() const { return impl_->path; }
const RecordHeader& RecordReader::header() const { return impl_->header; }
std::uint32_t RecordReader::format_version() const { return impl_->version; }
std::uint64_t RecordReader::tag_count() const { return impl_->n; }
const std::vector<std::uint64_t>& RecordReader::channel_counts() const { return impl_->counts; }
std::optional<std::int64_t> RecordReader::first_time_ps() const {
  if (impl_->n == 0) return std::nullopt;
  return impl_->index[0];
}
std::optional<std::int64_t> RecordReader::last_time_ps() const { return impl_->last_time; }

bool RecordReader::read_next(TagBlock& out, std::size_t max_tags) {
  Impl& m = *impl_;
  FLYBY_CHECK(max_tags >= 1, "read_next: max_tags must be >= 1");
  if (m.pos >= m.n) {
    out.clear();
    return false;
  }
  m.read_block(m.pos, max_tags, out, m.counting ? &m.seen : nullptr);
  if (m.prev_time && out.time_ps.front() < *m.prev_time) {
    m.fail("tags are not sorted in time: tag " + std::to_string(m.pos) + " is earlier than tag " + std::to_string(m.pos - 1));
  }
  m.pos += out.size();
  m.prev_time = out.time_ps.back();
  if (m.pos == m.n && m.counting) {
    for (std::size_t i = 0; i < m.header.channels.size(); ++i) {
      const ChannelId id = m.header.channels[i].id;
      if (m.seen[id] != m.counts[i]) {
        m.fail("channel '" + m.header.channels[i].name + "' has " + std::to_string(m.seen[id]) +
               " tags but /channels/tag_count says " + std::to_string(m.counts[i]));
      }
    }
  }
  return true;
}

std::uint64_t RecordReader::position() const { return impl_->pos; }

void RecordReader::seek(std::uint64_t tag_index) {
  Impl& m = *impl_;
  m.pos = std::min(tag_index, m.n);
  m.counting = m.pos == 0;
  m.seen.fill(0);
  m.prev_time.reset();
  if (m.pos > 0 && m.pos < m.n) {
    TagBlock prev;
    m.read_block(m.pos - 1, 1, prev);
    m.prev_time = prev.time_ps[0];
  }
}

void RecordReader::read(std::uint64_t first, std::size_t count, TagBlock& out) { impl_->read_block(first, count, out); }

std::uint64_t RecordReader::lower_bound(std::int64_t t_ps) {
  Impl& m = *impl_;
  if (m.n == 0) return 0;
  const auto it = std::lower_bound(m.index.begin(), m.index.end(), t_ps);
  const std::uint64_t k = static_cast<std::uint64_t>(it - m.index.begin());
  if (k == 0) return 0;
  // Tag (k-1)*B is < t; the answer lies in ((k-1)*B, k*B].
  const std::uint64_t first = (k - 1) * m.block_tags;
  const std::uint64_t end = std::min<std::uint64_t>(k * m.block_tags, m.n);
  TagBlock b;
  m.read_block(first, static_cast<std::size_t>(end - first), b);
  const auto jt = std::lower_bound(b.time_ps.begin(), b.time_ps.end(), t_ps);
  return first + static_cast<std::uint64_t>(jt - b.time_ps.begin());
}

RecordData read_record(const std::filesystem::path& path) {
  RecordReader r(path);
  RecordData d;
  d.header = r.header();
  d.tags.reserve(static_cast<std::size_t>(std::min<std::uint64_t>(r.tag_count(), std::uint64_t{1} << 24)));
  TagBlock b;
  while (r.read_next(b)) {
    d.tags.time_ps.insert(d.tags.time_ps.end(), b.time_ps.begin(), b.time_ps.end());
    d.tags.channel.insert(d.tags.channel.end(), b.channel.begin(), b.channel.end());
  }
  return d;
}

}  // namespace flyby::records
