// Streaming HDF5 writer of time-tag records: chunked, extendible /tags datasets filled one
// buffer at a time; channel table, index, provenance and the completeness marker at commit.
#include "engine/records/record_writer.h"

#include <algorithm>
#include <array>
#include <limits>
#include <string>

#include "engine/common/atomic_output.h"
#include "engine/common/errors.h"
#include "engine/records/hdf5_io.h"
#include "engine/records/record_reader.h"

namespace flyby::records {

using h5::Handle;

struct RecordWriter::Impl {
  Impl(const std::filesystem::path& path, RecordHeader h, RecordWriterOptions o)
      : out(path), header(std::move(h)), options(o) {}

  AtomicOutputPath out;
  RecordHeader header;
  RecordWriterOptions options;
  bool fit_window = false;
  bool done = false;

  Handle file, time_dset, chan_dset;
  TagBlock buffer;
  std::uint64_t written = 0;  // tags already in the file
  std::uint64_t total = 0;    // tags appended (written + buffered)
  std::optional<std::int64_t> first_time, last_time;
  std::array<std::uint64_t, 256> counts{};
  std::array<bool, 256> known{};
  std::vector<std::int64_t> index;

  [[noreturn]] void fail_input(const std::string& msg) const {
    throw InputError(out.target().string() + ": " + msg);
  }

  Handle make_tag_dataset(const char* name, hid_t type) {
    const hsize_t zero = 0, unlimited = H5S_UNLIMITED, chunk = options.chunk_tags;
    Handle space(H5Screate_simple(1, &zero, &unlimited));
    Handle dcpl(H5Pcreate(H5P_DATASET_CREATE));
    if (!space.valid() || !dcpl.valid() || H5Pset_chunk(dcpl.get(), 1, &chunk) < 0) {
      throw IoError("HDF5: cannot set up dataset " + std::string(name));
    }
    if (options.deflate_level > 0) {
      H5Pset_shuffle(dcpl.get());
      H5Pset_deflate(dcpl.get(), static_cast<unsigned>(options.deflate_level));
    }
    Handle d(H5Dcreate2(file.get(), name, type, space.get(), H5P_DEFAULT, dcpl.get(), H5P_DEFAULT));
    if (!d.valid()) throw IoError("HDF5: cannot create dataset " + std::string(name) + " in " + out.temp_path().string());
    return d;
  }

  void write_slab(hid_t dset, hid_t mem_type, const void* data, std::uint64_t n, const char* name) {
    const hsize_t new_size = written + n;
    if (H5Dset_extent(dset, &new_size) < 0) throw IoError("HDF5: cannot extend " + std::string(name));
    Handle fspace(H5Dget_space(dset));
    const hsize_t start = written, count = n;
    Handle mspace(H5Screate_simple(1, &count, nullptr));
    if (!fspace.valid() || H5Sselect_hyperslab(fspace.get(), H5S_SELECT_SET, &start, nullptr, &count, nullptr) < 0 ||
        H5Dwrite(dset, mem_type, mspace.get(), fspace.get(), H5P_DEFAULT, data) < 0) {
      throw IoError("HDF5: cannot write " + std::string(name) + " of " + out.target().string() + " (disk full?)");
    }
  }

  void flush() {
    silence_hdf5_errors();
    if (buffer.empty()) return;
    const std::uint64_t n = buffer.size();
    write_slab(time_dset.get(), H5T_NATIVE_INT64, buffer.time_ps.data(), n, "/tags/time_ps");
    write_slab(chan_dset.get(), H5T_NATIVE_UINT8, buffer.channel.data(), n, "/tags/channel");
    written += n;
    buffer.clear();
  }
};

RecordWriter::RecordWriter(const std::filesystem::path& path, RecordHeader header, RecordWriterOptions options) {
  silence_hdf5_errors();
  if (options.chunk_tags < 1024 || options.chunk_tags > (std::size_t{1} << 24)) {
    throw InputError(path.string() + ": chunk_tags must be in 1024..16777216, got " + std::to_string(options.chunk_tags));
  }
  if (options.index_block_tags < 1 || options.index_block_tags > (std::size_t{1} << 24)) {
    throw InputError(path.string() + ": index_block_tags must be in 1..16777216");
  }
  if (options.deflate_level < 0 || options.deflate_level > 9) {
    throw InputError(path.string() + ": deflate_level must be in 0..9, got " + std::to_string(options.deflate_level));
  }
  if (auto p = header_problem(header)) throw InputError(path.string() + ": " + *p);
  impl_ = std::make_unique<Impl>(path, std::move(header), options);
  Impl& m = *impl_;
  for (const Channel& c : m.header.channels) m.known[c.id] = true;
  m.buffer.reserve(options.chunk_tags);

  Handle fapl(H5Pcreate(H5P_FILE_ACCESS));
  m.file = Handle(H5Fcreate(m.out.temp_path().c_str(), H5F_ACC_EXCL, H5P_DEFAULT, fapl.get()));
  if (!m.file.valid()) throw IoError("cannot create HDF5 file " + m.out.temp_path().string());
  h5::create_group(m.file.get(), "/tags");
  m.time_dset = m.make_tag_dataset("/tags/time_ps", H5T_STD_I64LE);
  m.chan_dset = m.make_tag_dataset("/tags/channel", H5T_STD_U8LE);
}

RecordWriter::~RecordWriter() = default;  // Impl's AtomicOutputPath removes an uncommitted file

void RecordWriter::add_channel(const Channel& channel) {
  Impl& m = *impl_;
  RecordHeader h = m.header;
  h.channels.push_back(channel);
  if (auto p = header_problem(h)) m.fail_input(*p);
  m.header = std::move(h);
  m.known[channel.id] = true;
}

const RecordHeader& RecordWriter::header() const { return impl_->header; }

void RecordWriter::set_window(std::int64_t start_ps, std::int64_t duration_ps) {
  Impl& m = *impl_;
  RecordHeader h = m.header;
  h.start_ps = start_ps;
  h.duration_ps = duration_ps;
  if (auto p = header_problem(h)) m.fail_input(*p);
  m.header = std::move(h);
  m.fit_window = false;
}

void RecordWriter::fit_window_to_tags() { impl_->fit_window = true; }

void RecordWriter::append(std::span<const std::int64_t> time_ps, std::span<const ChannelId> channel) {
  Impl& m = *impl_;
  if (m.done) throw InternalError("RecordWriter::append after commit");
  FLYBY_CHECK(time_ps.size() == channel.size(), "append: time and channel spans differ in length");
  for (std::size_t i = 0; i < time_ps.size(); ++i) {
    const std::int64_t t = time_ps[i];
    const ChannelId c = channel[i];
    if (m.last_time && t < *m.last_time) {
      m.fail_input("tag " + std::to_string(m.total) + " has time " + std::to_string(t) +
                   " ps, earlier than the previous tag (" + std::to_string(*m.last_time) + " ps); tags must be sorted");
    }
    if (!m.known[c]) m.fail_input("tag " + std::to_string(m.total) + " has channel id " + std::to_string(c) + " that is not in the channel table");
    if (!m.first_time) m.first_time = t;
    m.last_time = t;
    if (m.total % m.options.index_block_tags == 0) m.index.push_back(t);
    ++m.counts[c];
    ++m.total;
    m.buffer.push_back(t, c);
    if (m.buffer.size() >= m.options.chunk_tags) m.flush();
  }
}

void RecordWriter::append(std::int64_t time_ps, ChannelId channel) {
  append(std::span<const std::int64_t>(&time_ps, 1), std::span<const ChannelId>(&channel, 1));
}

std::uint64_t RecordWriter::tag_count() const { return impl_->total; }

void RecordWriter::commit() {
  Impl& m = *impl_;
  if (m.done) return;
  silence_hdf5_errors();
  m.flush();
  RecordHeader& h = m.header;
  if (m.fit_window) {
    h.start_ps = m.first_time.value_or(0);
    h.duration_ps = 0;
    if (m.total > 0) {
      std::int64_t span = 0;
      if (__builtin_sub_overflow(*m.last_time, *m.first_time, &span) || span == std::numeric_limits<std::int64_t>::max()) {
        m.fail_input("tag times span more than the int64 range of ps");
      }
      h.duration_ps = span + 1;
    }
  }
  if (m.total > 0) {
    if (*m.first_time < h.start_ps) {
      m.fail_input("first tag at " + std::to_string(*m.first_time) + " ps is before the window start " +
                   std::to_string(h.start_ps) + " ps");
    }
    if (static_cast<std::uint64_t>(*m.last_time) - static_cast<std::uint64_t>(h.start_ps) >=
        static_cast<std::uint64_t>(h.duration_ps)) {
      m.fail_input("last tag at " + std::to_string(*m.last_time) + " ps is not before the window end " +
                   std::to_string(h.start_ps + h.duration_ps) + " ps");
    }
  }
  const hid_t f = m.file.get();
  {
    Handle g = h5::create_group(f, "/channels");
    std::vector<std::uint8_t> ids;
    std::vector<std::string> names, roles;
    std::vector<std::uint64_t> counts;
    for (const Channel& c : h.channels) {
      ids.push_back(c.id);
      names.push_back(c.name);
      roles.emplace_back(to_string(c.role));
      counts.push_back(m.counts[c.id]);
    }
    h5::write_dataset(g.get(), "id", ids);
    h5::write_dataset(g.get(), "name", names);
    h5::write_dataset(g.get(), "role", roles);
    h5::write_dataset(g.get(), "tag_count", counts);
  }
  {
    Handle g = h5::create_group(f, "/index");
    h5::write_dataset(g.get(), "time_ps", m.index);
    Handle d(H5Dopen2(g.get(), "time_ps", H5P_DEFAULT));
    h5::write_attr(d.get(), "block_tags", static_cast<std::uint64_t>(m.options.index_block_tags));
  }
  {
    Handle g = h5::create_group(f, "/provenance");
    const RecordProvenance& p = h.provenance;
    h5::write_attr(g.get(), "flyby_version", p.flyby_version);
    h5::write_attr(g.get(), "command_line", p.command_line);
    h5::write_attr(g.get(), "host", p.host);
    h5::write_attr(g.get(), "date_utc", p.date_utc);
    h5::write_attr(g.get(), "source", p.source);
    h5::write_attr(g.get(), "config_text", p.config_text);
    h5::write_attr(g.get(), "parent", p.parent);
    if (p.seed) h5::write_attr(g.get(), "seed", *p.seed);
  }
  h5::write_attr(f, "format", std::string(kFormatName));
  h5::write_attr(f, "format_version", kFormatVersion);
  h5::write_attr(f, "tag_count", m.total);
  h5::write_attr(f, "resolution_ps", h.resolution_ps);
  h5::write_attr(f, "start_ps", h.start_ps);
  h5::write_attr(f, "duration_ps", h.duration_ps);
  // Everything else is on disk before the marker; the marker is the last thing written.
  if (H5Fflush(f, H5F_SCOPE_GLOBAL) < 0) throw IoError("HDF5: flush failed for " + m.out.target().string());
  h5::write_attr(f, "complete", std::uint8_t{1});
  m.time_dset.reset();
  m.chan_dset.reset();
  m.file.release();
  if (H5Fclose(f) < 0) {
    throw IoError("HDF5: closing " + m.out.temp_path().string() + " failed (disk full?)");
  }
  m.out.commit();
  m.done = true;
}

void write_record(const std::filesystem::path& path, const RecordData& data, RecordWriterOptions options) {
  RecordWriter w(path, data.header, options);
  w.append(data.tags);
  w.commit();
}

}  // namespace flyby::records
