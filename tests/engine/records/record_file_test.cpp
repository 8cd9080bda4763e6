// Tests of the time-tag record file (engine/records): round trip through the streaming writer
// and reader, random access by time, atomic writing (exception and SIGINT leave nothing), and
// rejection of incomplete, wrong-type, unsorted and otherwise corrupt files with one line.
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <catch2/catch.hpp>
#include <cstdint>
#include <fstream>
#include <hdf5.h>
#include <random>

#include "engine/common/errors.h"
#include "engine/common/random.h"
#include "engine/records/record_reader.h"
#include "engine/records/record_writer.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

using namespace flyby::records;
using flyby::test::ScratchDir;

namespace {

RecordHeader make_header() {
  RecordHeader h;
  h.channels = {{3, "H", ChannelRole::kHerald}, {7, "V", ChannelRole::kDetector}, {200, "sync", ChannelRole::kMarker}};
  h.resolution_ps = 4.0;
  h.start_ps = -1000;
  h.duration_ps = 5'000'000'000'000;  // 5 s
  h.provenance = current_record_provenance("test", "[run]\nseed = 1\n", 42);
  return h;
}

// A sorted random tag stream with exponential gaps (mean gap 2 us) and random channels.
TagBlock random_tags(std::uint64_t seed, std::size_t n) {
  auto rng = flyby::make_stream(seed, flyby::StreamPurpose::kTest, 0);
  TagBlock b;
  std::int64_t t = -1000;
  const ChannelId ids[3] = {3, 7, 200};
  for (std::size_t i = 0; i < n; ++i) {
    t += static_cast<std::int64_t>(-2e6 * std::log(flyby::uniform_open0(rng)));
    b.push_back(t, ids[rng() % 3]);
  }
  return b;
}

// Message of the InputError thrown by fn, or "" if none.
template <class F>
std::string input_error(F&& fn) {
  try {
    fn();
  } catch (const flyby::InputError& e) {
    return e.what();
  }
  return "";
}

bool one_line(const std::string& s) { return !s.empty() && s.find('\n') == std::string::npos; }

// Rewrites one root attribute of an existing file with a different type or value (HDF5 C API).
void set_root_u8(const std::filesystem::path& p, const char* name, std::uint8_t v) {
  hid_t f = H5Fopen(p.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
  REQUIRE(f >= 0);
  H5Adelete(f, name);
  hid_t s = H5Screate(H5S_SCALAR);
  hid_t a = H5Acreate2(f, name, H5T_STD_U8LE, s, H5P_DEFAULT, H5P_DEFAULT);
  H5Awrite(a, H5T_NATIVE_UINT8, &v);
  H5Aclose(a);
  H5Sclose(s);
  H5Fclose(f);
}

void write_elements_i64(const std::filesystem::path& p, const char* dset, hsize_t at, std::int64_t v) {
  hid_t f = H5Fopen(p.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
  REQUIRE(f >= 0);
  hid_t d = H5Dopen2(f, dset, H5P_DEFAULT);
  hid_t fs = H5Dget_space(d);
  const hsize_t one = 1;
  H5Sselect_hyperslab(fs, H5S_SELECT_SET, &at, nullptr, &one, nullptr);
  hid_t ms = H5Screate_simple(1, &one, nullptr);
  H5Dwrite(d, H5T_NATIVE_INT64, ms, fs, H5P_DEFAULT, &v);
  H5Sclose(ms);
  H5Sclose(fs);
  H5Dclose(d);
  H5Fclose(f);
}

}  // namespace

TEST_CASE("record round trip through chunked writer and streaming reader", "[records]") {
  ScratchDir dir("roundtrip");
  const auto seed = flyby::test::seed("record round trip");
  RecordData data{make_header(), random_tags(seed, 300'000)};
  RecordWriterOptions opt;
  opt.chunk_tags = 4096;
  opt.index_block_tags = 1000;
  {
    RecordWriter w(dir / "run.h5", data.header, opt);
    // Uneven appends cross chunk and index boundaries.
    std::size_t pos = 0, step = 1;
    while (pos < data.tags.size()) {
      const std::size_t n = std::min(step, data.tags.size() - pos);
      w.append(std::span(data.tags.time_ps).subspan(pos, n), std::span(data.tags.channel).subspan(pos, n));
      pos += n;
      step = step * 3 + 1;
    }
    w.commit();
  }
  CHECK(dir.entries() == std::vector<std::string>{"run.h5"});

  RecordReader r(dir / "run.h5");
  const RecordHeader& h = r.header();
  REQUIRE(h.channels.size() == 3);
  CHECK(h.channels[0].name == "H");
  CHECK(h.channels[0].role == ChannelRole::kHerald);
  CHECK(h.channels[2].id == 200);
  CHECK(h.resolution_ps == 4.0);
  CHECK(h.start_ps == -1000);
  CHECK(h.duration_ps == 5'000'000'000'000);
  CHECK(h.provenance.config_text == "[run]\nseed = 1\n");
  CHECK(h.provenance.seed == std::optional<std::uint64_t>(42));
  CHECK(h.provenance.source == "test");
  CHECK(r.format_version() == kFormatVersion);
  CHECK(r.tag_count() == data.tags.size());
  CHECK(r.first_time_ps() == data.tags.time_ps.front());
  CHECK(r.last_time_ps() == data.tags.time_ps.back());
  std::uint64_t sum = 0;
  for (auto c : r.channel_counts()) sum += c;
  CHECK(sum == data.tags.size());

  TagBlock all, b;
  while (r.read_next(b, 7777)) {
    all.time_ps.insert(all.time_ps.end(), b.time_ps.begin(), b.time_ps.end());
    all.channel.insert(all.channel.end(), b.channel.begin(), b.channel.end());
  }
  CHECK(all.time_ps == data.tags.time_ps);
  CHECK(all.channel == data.tags.channel);

  // Random access by time agrees with std::lower_bound on the full array.
  auto rng = flyby::make_stream(seed, flyby::StreamPurpose::kTest, 1);
  const auto& t = data.tags.time_ps;
  for (int k = 0; k < 200; ++k) {
    const std::int64_t q = t.front() - 5 + static_cast<std::int64_t>(rng() % static_cast<std::uint64_t>(t.back() - t.front() + 10));
    const auto want = static_cast<std::uint64_t>(std::lower_bound(t.begin(), t.end(), q) - t.begin());
    REQUIRE(r.lower_bound(q) == want);
  }
  CHECK(r.lower_bound(t[1000]) == static_cast<std::uint64_t>(std::lower_bound(t.begin(), t.end(), t[1000]) - t.begin()));
  r.read(123456, 10, b);
  REQUIRE(b.size() == 10);
  CHECK(b.time_ps[0] == t[123456]);
}

TEST_CASE("empty record and fitted window", "[records]") {
  ScratchDir dir("empty");
  RecordHeader h = make_header();
  {
    RecordWriter w(dir / "e.h5", h);
    w.commit();
  }
  RecordReader r(dir / "e.h5");
  CHECK(r.tag_count() == 0);
  CHECK(!r.first_time_ps());
  TagBlock b;
  CHECK(!r.read_next(b));
  {
    RecordWriter w(dir / "f.h5", h);
    w.fit_window_to_tags();
    w.append(10, 3);
    w.append(25, 7);
    w.commit();
  }
  RecordReader f(dir / "f.h5");
  CHECK(f.header().start_ps == 10);
  CHECK(f.header().duration_ps == 16);
}

TEST_CASE("writer refuses bad tags and leaves no file behind", "[records]") {
  ScratchDir dir("refuse");
  {
    RecordWriter w(dir / "x.h5", make_header());
    w.append(100, 3);
    const std::string e = input_error([&] { w.append(99, 3); });
    CHECK(e.find("sorted") != std::string::npos);
    CHECK(one_line(e));
    CHECK(input_error([&] { w.append(200, 4); }).find("channel id 4") != std::string::npos);
  }
  CHECK(dir.entries().empty());
  RecordHeader h = make_header();
  h.channels.push_back({3, "dup", ChannelRole::kDetector});
  CHECK(input_error([&] { RecordWriter w(dir / "y.h5", h); }).find("appears twice") != std::string::npos);
  h = make_header();
  h.channels[0].name = "bad name";
  CHECK(input_error([&] { RecordWriter w(dir / "y.h5", h); }).find("invalid") != std::string::npos);
  h = make_header();
  h.duration_ps = 10;
  h.start_ps = 0;
  {
    RecordWriter w(dir / "z.h5", h);
    w.append(10, 3);  // outside [0, 10)
    CHECK(input_error([&] { w.commit(); }).find("window end") != std::string::npos);
  }
  CHECK(dir.entries().empty());
}

TEST_CASE("an exception while writing removes the temporary file", "[records]") {
  ScratchDir dir("exception");
  try {
    RecordWriter w(dir / "x.h5", make_header());
    w.append(random_tags(1, 100'000));
    CHECK(dir.entries().size() == 1);  // the hidden temporary file
    CHECK(dir.entries()[0].find(".x.h5.part-") == 0);
    throw std::runtime_error("simulated failure");
  } catch (const std::runtime_error&) {
  }
  CHECK(dir.entries().empty());
}

TEST_CASE("SIGINT while writing removes the temporary file", "[records]") {
  ScratchDir dir("sigint");
  const pid_t pid = fork();
  REQUIRE(pid >= 0);
  if (pid == 0) {
    // The test framework catches SIGINT itself; give the child the default action, as a
    // command-line run has it.
    ::signal(SIGINT, SIG_DFL);
    RecordWriter w(dir / "x.h5", make_header());
    w.append(random_tags(2, 200'000));
    ::raise(SIGINT);
    _exit(0);  // not reached: the default action of SIGINT ends the process
  }
  int status = 0;
  REQUIRE(waitpid(pid, &status, 0) == pid);
  CHECK(WIFSIGNALED(status));
  if (WIFSIGNALED(status)) CHECK(WTERMSIG(status) == SIGINT);
  CHECK(dir.entries().empty());
}

TEST_CASE("reader rejects broken files with one line naming the file", "[records]") {
  ScratchDir dir("broken");
  const auto good = dir / "good.h5";
  RecordWriterOptions opt;
  opt.chunk_tags = 1024;
  opt.index_block_tags = 1000;
  write_record(good, RecordData{make_header(), random_tags(3, 5000)}, opt);
  REQUIRE_NOTHROW(read_record(good));

  auto expect = [&](const std::filesystem::path& p, const std::string& fragment) {
    const std::string e = input_error([&] { read_record(p); });
    INFO(e);
    CHECK(one_line(e));
    CHECK(e.find(p.string()) == 0);
    CHECK(e.find(fragment) != std::string::npos);
  };
  auto copy = [&](const std::string& name) {
    const auto p = dir / name;
    std::filesystem::copy_file(good, p);
    return p;
  };

  expect(dir / "missing.h5", "no such file");
  { std::ofstream(dir / "empty.h5"); }
  expect(dir / "empty.h5", "empty file");
  { std::ofstream(dir / "text.h5") << "time_ps,channel\n1,H\n"; }
  expect(dir / "text.h5", "not an HDF5 file");

  // Truncations at several lengths: never a crash, always a one-line InputError.
  const auto size = std::filesystem::file_size(good);
  for (double frac : {0.001, 0.01, 0.1, 0.5, 0.9, 0.99}) {
    const auto p = copy("trunc" + std::to_string(frac) + ".h5");
    std::filesystem::resize_file(p, static_cast<std::uintmax_t>(frac * static_cast<double>(size)));
    const std::string e = input_error([&] { read_record(p); });
    INFO(frac << ": " << e);
    CHECK(one_line(e));
  }

  const auto inc = copy("incomplete.h5");
  set_root_u8(inc, "complete", 0);
  expect(inc, "incomplete record");

  const auto wrong = copy("wrongtype.h5");
  {
    hid_t f = H5Fopen(wrong.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
    H5Ldelete(f, "/tags/channel", H5P_DEFAULT);
    const hsize_t n = 5000;
    hid_t s = H5Screate_simple(1, &n, nullptr);
    hid_t d = H5Dcreate2(f, "/tags/channel", H5T_STD_I32LE, s, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    H5Dclose(d);
    H5Sclose(s);
    H5Fclose(f);
  }
  expect(wrong, "/tags/channel must be an 8-bit unsigned integer, found a 32-bit signed integer");

  const auto nodata = copy("nodata.h5");
  {
    hid_t f = H5Fopen(nodata.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
    H5Ldelete(f, "/tags/time_ps", H5P_DEFAULT);
    H5Fclose(f);
  }
  expect(nodata, "/tags/time_ps is missing");

  const auto unsorted = copy("unsorted.h5");
  write_elements_i64(unsorted, "/tags/time_ps", 2500, -1000);
  expect(unsorted, "not sorted");

  const auto badindex = copy("badindex.h5");
  write_elements_i64(badindex, "/index/time_ps", 2, 0);
  expect(badindex, "/index/time_ps");

  const auto badch = copy("badchannel.h5");
  {
    hid_t f = H5Fopen(badch.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
    hid_t d = H5Dopen2(f, "/tags/channel", H5P_DEFAULT);
    hid_t fs = H5Dget_space(d);
    const hsize_t at = 4321, one = 1;
    H5Sselect_hyperslab(fs, H5S_SELECT_SET, &at, nullptr, &one, nullptr);
    hid_t ms = H5Screate_simple(1, &one, nullptr);
    const std::uint8_t v = 9;
    H5Dwrite(d, H5T_NATIVE_UINT8, ms, fs, H5P_DEFAULT, &v);
    H5Sclose(ms);
    H5Sclose(fs);
    H5Dclose(d);
    H5Fclose(f);
  }
  expect(badch, "channel id 9");

  const auto newer = copy("newer.h5");
  {
    hid_t f = H5Fopen(newer.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
    H5Adelete(f, "format_version");
    hid_t s = H5Screate(H5S_SCALAR);
    hid_t a = H5Acreate2(f, "format_version", H5T_STD_U32LE, s, H5P_DEFAULT, H5P_DEFAULT);
    const std::uint32_t v = 99;
    H5Awrite(a, H5T_NATIVE_UINT32, &v);
    H5Aclose(a);
    H5Sclose(s);
    H5Fclose(f);
  }
  expect(newer, "format version 99 is not supported");
}
