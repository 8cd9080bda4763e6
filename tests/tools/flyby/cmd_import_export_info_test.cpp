// End-to-end tests of `flyby import`, `flyby export` and `flyby info` through the real program:
// a simulated-style record survives export -> import bit for bit and is indistinguishable to
// `flyby info`; broken inputs of every kind give one line on stderr, exit status 2 and no output.
#include <hdf5.h>

#include <catch2/catch.hpp>
#include <cstring>
#include <fstream>
#include <nlohmann/json.hpp>

#include "engine/records/record_reader.h"
#include "engine/records/record_writer.h"
#include "models/detectors/detector_chain.h"
#include "tests/support/run_cli.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

using namespace flyby::records;
using flyby::test::run_flyby;
using flyby::test::ScratchDir;

namespace {

// A record shaped like a simulation's: Poisson photons through the detector chain (two
// detectors, a herald and a marker channel), with config text and seed in the provenance.
void write_sim_like(const std::filesystem::path& path, std::uint64_t seed) {
  using namespace flyby::detectors;
  DetectorChainOptions opt;
  const char* names[4] = {"sigma+", "sigma-", "herald", "feedback"};
  const ChannelRole roles[4] = {ChannelRole::kDetector, ChannelRole::kDetector, ChannelRole::kHerald, ChannelRole::kMarker};
  for (int k = 0; k < 4; ++k) {
    DetectorChannelOptions c;
    c.channel = {static_cast<ChannelId>(k == 3 ? 9 : k), names[k], roles[k]};
    if (k < 3) {
      c.efficiency = 0.6;
      c.dead_time_ns = 25;
      c.jitter_fwhm_ps = 350;
      c.dark_rate_per_s = 500;
      c.afterpulse_probability = 0.01;
      c.afterpulse_delay_ns = 40;
      c.afterpulse_time_constant_ns = 60;
      c.cable_delay_ns = 1.5 * k;
    }
    opt.channels.push_back(c);
  }
  opt.tagger.resolution_ps = 80.955;
  const std::int64_t end = 200'000'000'000;  // 0.2 s
  DetectorChain chain(opt, seed, 0, end);
  auto rng = flyby::make_stream(seed, flyby::StreamPurpose::kTest, 7);
  std::vector<Photon> photons;
  double t = 0;
  while ((t += -std::log(flyby::uniform_open0(rng)) * 1e12 / 3e5) < static_cast<double>(end)) {
    photons.push_back({static_cast<std::int64_t>(t), static_cast<std::uint32_t>(rng() % 4)});
  }
  TagBlock tags;
  chain.push(photons, tags);
  chain.finish(tags);
  RecordHeader h;
  h.channels = chain.record_channels();
  h.resolution_ps = 80.955;
  h.start_ps = 0;
  h.duration_ps = end;
  h.provenance = current_record_provenance("simulation", "# invented scenario\n[run]\nduration_s = 0.2\n", seed);
  write_record(path, RecordData{h, tags});
}

bool one_error_line(const flyby::test::CliResult& r) {
  return r.status == 2 && r.out.empty() && r.err.rfind("flyby: error: ", 0) == 0 &&
         r.err.find('\n') == r.err.size() - 1;
}

std::vector<std::string> data_lines(const std::string& csv) {
  std::vector<std::string> v;
  std::istringstream s(csv);
  std::string l;
  while (std::getline(s, l)) {
    if (l.rfind("#@flyby provenance=", 0) != 0) v.push_back(l);
  }
  return v;
}

}  // namespace

TEST_CASE("export -> import is bit-exact and indistinguishable to flyby info", "[records][cli]") {
  ScratchDir dir("cli-roundtrip");
  const auto seed = flyby::test::seed("cli round trip");
  write_sim_like(dir / "sim.h5", seed);
  const std::string d = dir.path().string();

  auto info1 = run_flyby("info sim.h5 --json", d);
  REQUIRE(info1.status == 0);
  REQUIRE(run_flyby("export sim.h5 --csv -o sim.csv", d).status == 0);
  auto imp = run_flyby("import sim.csv -o back.h5", d);
  INFO(imp.err);
  REQUIRE(imp.status == 0);
  auto info2 = run_flyby("info back.h5 --json", d);
  REQUIRE(info2.status == 0);

  const RecordData a = read_record(dir / "sim.h5"), b = read_record(dir / "back.h5");
  CHECK(a.tags.time_ps == b.tags.time_ps);
  CHECK(a.tags.channel == b.tags.channel);
  REQUIRE(a.tags.size() > 10000);
  CHECK(a.header.resolution_ps == b.header.resolution_ps);
  CHECK(a.header.start_ps == b.header.start_ps);
  CHECK(a.header.duration_ps == b.header.duration_ps);
  REQUIRE(a.header.channels.size() == b.header.channels.size());
  for (std::size_t i = 0; i < a.header.channels.size(); ++i) {
    CHECK(a.header.channels[i].id == b.header.channels[i].id);
    CHECK(a.header.channels[i].name == b.header.channels[i].name);
    CHECK(a.header.channels[i].role == b.header.channels[i].role);
  }
  // flyby info: everything but the file name and the provenance (which records the import and
  // keeps the simulation's provenance as parent) is identical.
  auto j1 = nlohmann::json::parse(info1.out), j2 = nlohmann::json::parse(info2.out);
  CHECK(j2["provenance"]["source"] == "import");
  CHECK(j2["provenance"]["parent"]["seed"] == seed);
  CHECK(j2["provenance"]["parent"]["config_text"] == a.header.provenance.config_text);
  for (auto* j : {&j1, &j2}) {
    j->erase("file");
    j->erase("provenance");
  }
  CHECK(j1 == j2);

  // import -> export -> import: the second export equals the first (apart from provenance) and
  // the third record has the same tags.
  REQUIRE(run_flyby("export back.h5 --csv -o back.csv", d).status == 0);
  CHECK(data_lines(flyby::test::read_text((dir / "sim.csv").string())) ==
        data_lines(flyby::test::read_text((dir / "back.csv").string())));
  REQUIRE(run_flyby("import back.csv -o again.h5", d).status == 0);
  const RecordData c = read_record(dir / "again.h5");
  CHECK(c.tags.time_ps == a.tags.time_ps);
  CHECK(c.tags.channel == a.tags.channel);

  // An export with numeric channel ids reads back the same way.
  REQUIRE(run_flyby("export sim.h5 --csv --channel-ids --delimiter tab -o ids.tsv", d).status == 0);
  REQUIRE(run_flyby("import ids.tsv -o ids.h5 --delimiter tab", d).status == 0);
  const RecordData e = read_record(dir / "ids.h5");
  CHECK(e.tags.time_ps == a.tags.time_ps);
  CHECK(e.tags.channel == a.tags.channel);
  CHECK(e.header.channels[3].name == "feedback");

  // Export to standard output gives the same text.
  auto so = run_flyby("export sim.h5 --csv", d);
  CHECK(so.out == flyby::test::read_text((dir / "sim.csv").string()));
}

TEST_CASE("import of foreign text layouts and of binary records", "[records][cli]") {
  ScratchDir dir("cli-import");
  const std::string d = dir.path().string();
  {
    std::ofstream f(dir / "lab.txt");
    f << "lab acquisition 7\nsome free text line\n"
      << "% comment\n"
      << "det\tstamp_s\tother\n"
      << "2\t0.000001000001\tx\n"
      << "1\t0.0000010000015\ty\n"
      << "\n"
      << "2\t0.5\tz\n";
  }
  auto r = run_flyby("import lab.txt -o lab.h5 --delimiter tab --skip-lines 2 --comment-prefix % --time-column stamp_s "
                     "--channel-column det --time-unit s --channel 1=H:herald --channel 2=V --resolution-ps 4",
                     d);
  INFO(r.err);
  REQUIRE(r.status == 0);
  RecordData a = read_record(dir / "lab.h5");
  // 0.000001000001 s = 1000001 ps; 0.0000010000015 s = 1000001.5 ps -> 1000002 (half away from zero).
  CHECK(a.tags.time_ps == std::vector<std::int64_t>{1000001, 1000002, 500000000000});
  CHECK(a.tags.channel == std::vector<ChannelId>{2, 1, 2});
  CHECK(a.header.channels[0].name == "H");
  CHECK(a.header.channels[0].role == ChannelRole::kHerald);
  CHECK(a.header.resolution_ps == 4);

  // Whitespace-separated, no header, unsorted: refused, then sorted with --sort.
  {
    std::ofstream f(dir / "ws.txt");
    f << "  5   A\n3 B\n 9\tA\n";
  }
  r = run_flyby("import ws.txt -o ws.h5 --delimiter space --time-unit ns", d);
  CHECK(one_error_line(r));
  CHECK(r.err.find("ws.txt:2: time 3000 ps is earlier than the previous tag") != std::string::npos);
  CHECK(r.err.find("--sort") != std::string::npos);
  CHECK(!std::filesystem::exists(dir / "ws.h5"));
  r = run_flyby("import ws.txt -o ws.h5 --delimiter space --time-unit ns --sort --start-ps 0 --duration-ps 10000", d);
  REQUIRE(r.status == 0);
  CHECK(r.out.find("sorted") != std::string::npos);
  a = read_record(dir / "ws.h5");
  CHECK(a.tags.time_ps == std::vector<std::int64_t>{3000, 5000, 9000});
  CHECK(a.header.channels.size() == 2);
  CHECK(a.header.duration_ps == 10000);

  // Binary: 16-byte records, 8-byte header; channel uint16 at 0, time uint64 at 4 in units of
  // 80.955 ps, 4 padding bytes. Expected ps = round(count * 80955 / 1000), computed here in integers.
  std::vector<std::uint64_t> counts = {0, 1, 7, 123456789, 9'000'000'000'000ULL};
  std::vector<std::uint16_t> chans = {3, 4, 3, 300, 4};
  {
    std::ofstream f(dir / "raw.bin", std::ios::binary);
    f.write("HDRHDRHD", 8);
    for (std::size_t i = 0; i < counts.size(); ++i) {
      unsigned char rec[16] = {};
      for (int k = 0; k < 2; ++k) rec[k] = static_cast<unsigned char>(chans[i] >> (8 * k));
      for (int k = 0; k < 8; ++k) rec[4 + k] = static_cast<unsigned char>(counts[i] >> (8 * k));
      f.write(reinterpret_cast<const char*>(rec), 16);
    }
  }
  r = run_flyby("import raw.bin -o raw.h5 --record-bytes 16 --header-bytes 8 --time-field 4:8 --channel-field 0:2 "
                "--time-unit 80.955ps --channel 3=A --channel 4=B --channel 300=trigger:marker",
                d);
  INFO(r.err);
  REQUIRE(r.status == 0);
  a = read_record(dir / "raw.h5");
  std::vector<std::int64_t> want;
  for (auto c : counts) want.push_back(static_cast<std::int64_t>((static_cast<unsigned __int128>(c) * 80955 + 500) / 1000));
  CHECK(a.tags.time_ps == want);
  CHECK(a.header.channels[2].name == "trigger");
  CHECK(a.tags.channel[3] == a.header.channels[2].id);
  // Unmapped values are refused, or dropped on request.
  r = run_flyby("import raw.bin -o raw2.h5 --record-bytes 16 --header-bytes 8 --time-field 4:8 --channel-field 0:2 "
                "--time-unit 80.955ps --channel 3=A --channel 4=B",
                d);
  CHECK(one_error_line(r));
  CHECK(r.err.find("record 3: channel '300' is not in the channel map") != std::string::npos);
  r = run_flyby("import raw.bin -o raw2.h5 --record-bytes 16 --header-bytes 8 --time-field 4:8 --channel-field 0:2 "
                "--time-unit 80.955ps --channel 3=A --channel 4=B --drop-unmapped",
                d);
  CHECK(r.status == 0);
  CHECK(r.out.find("1 unmapped tags dropped") != std::string::npos);
  // Signed 4-byte times.
  {
    std::ofstream f(dir / "signed.bin", std::ios::binary);
    const std::int32_t ts[3] = {-5, -1, 2};
    for (auto t : ts) {
      f.write(reinterpret_cast<const char*>(&t), 4);
      f.put(1);
    }
  }
  r = run_flyby("import signed.bin -o signed.h5 --record-bytes 5 --time-field 0:4:signed --channel-field 4:1 --time-unit ns", d);
  REQUIRE(r.status == 0);
  CHECK(read_record(dir / "signed.h5").tags.time_ps == std::vector<std::int64_t>{-5000, -1000, 2000});
}

TEST_CASE("broken inputs give one line, exit status 2 and no output", "[records][cli]") {
  ScratchDir dir("cli-broken");
  const std::string d = dir.path().string();
  write_sim_like(dir / "good.h5", 5);
  const auto good_size = std::filesystem::file_size(dir / "good.h5");
  auto write = [&](const char* name, const std::string& content) {
    std::ofstream f(dir / name, std::ios::binary);
    f << content;
  };
  write("empty.csv", "");
  write("header_only.csv", "time_ps,channel\n");
  write("comments.csv", "# nothing\n# here\n");
  write("badtime.csv", "time_ps,channel\n1,A\nabc,A\n");
  write("overflow.csv", "time_s,channel\n1,A\n10000000,A\n");
  write("fewfields.csv", "time_ps,channel\n1,A\n2\n");
  write("badname.csv", "time_ps,channel\n1,A B\n");
  write("nounit.csv", "1,A\n2,B\n");
  write("badmeta.csv", "#@flyby format_version=7\ntime_ps,channel\n1,A\n");
  write("nul.csv", std::string("time_ps,channel\n1,A\n2\0,A\n", 24));
  write("huge_header.csv", std::string(3 << 20, 'x') + "\n1,A\n");
  write("short.bin", "abc");
  write("trunc.bin", std::string(21, '\x01'));
  std::filesystem::copy_file(dir / "good.h5", dir / "trunc.h5");
  std::filesystem::resize_file(dir / "trunc.h5", good_size / 2);
  std::filesystem::copy_file(dir / "good.h5", dir / "trunc_start.h5");
  std::filesystem::resize_file(dir / "trunc_start.h5", 100);
  {  // An HDF5 file that is not a flyby record, and one with a wrong-typed time dataset.
    hid_t f = H5Fcreate((dir / "other.h5").c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
    const hsize_t n = 4;
    hid_t s = H5Screate_simple(1, &n, nullptr);
    H5Dclose(H5Dcreate2(f, "data", H5T_IEEE_F32LE, s, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT));
    H5Sclose(s);
    H5Fclose(f);
    std::filesystem::copy_file(dir / "good.h5", dir / "wrongtype.h5");
    f = H5Fopen((dir / "wrongtype.h5").c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
    H5Ldelete(f, "/tags/time_ps", H5P_DEFAULT);
    hsize_t m = 0;
    {
      hid_t c = H5Dopen2(f, "/tags/channel", H5P_DEFAULT);
      hid_t cs = H5Dget_space(c);
      H5Sget_simple_extent_dims(cs, &m, nullptr);
      H5Sclose(cs);
      H5Dclose(c);
    }
    s = H5Screate_simple(1, &m, nullptr);
    H5Dclose(H5Dcreate2(f, "/tags/time_ps", H5T_IEEE_F64LE, s, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT));
    H5Sclose(s);
    H5Fclose(f);
  }
  const auto before = dir.entries();

  struct Case {
    std::string args, fragment;
  };
  const std::vector<Case> cases = {
      {"import empty.csv -o out.h5 --time-unit ps", "empty.csv: no time tags found"},
      {"import header_only.csv -o out.h5", "no time tags found"},
      {"import comments.csv -o out.h5 --time-unit ps", "no time tags found"},
      {"import badtime.csv -o out.h5", "badtime.csv:3: time field 'abc' is not a number"},
      {"import overflow.csv -o out.h5", "overflow.csv:3: time '10000000' s does not fit in int64 picoseconds"},
      {"import fewfields.csv -o out.h5", "fewfields.csv:3: expected at least 2 fields, found 1"},
      {"import badname.csv -o out.h5", "is not a valid channel name"},
      {"import nounit.csv -o out.h5", "the time unit is unknown"},
      {"import badmeta.csv -o out.h5", "format_version '7' is not supported"},
      {"import nul.csv -o out.h5", "time field '2\\x00' is not a number"},
      {"import huge_header.csv -o out.h5 --time-unit ps", "huge_header.csv:1: line longer than 1048576 bytes"},
      {"import good.h5 -o out.h5 --time-unit ps", "good.h5:"},
      {"import missing.csv -o out.h5", "missing.csv: no such file"},
      {"import nounit.csv -o out.h5 --time-unit fortnights", "time unit 'fortnights' is not one of"},
      {"import nounit.csv -o out.h5 --time-unit ps --channel A", "--channel 'A': expected TOKEN=NAME"},
      {"import nounit.csv -o out.h5 --time-unit ps --time-column time", "no column named 'time' in the header"},
      {"import short.bin -o out.h5 --record-bytes 9 --header-bytes 16 --time-unit ps", "shorter than the 16-byte header"},
      {"import trunc.bin -o out.h5 --record-bytes 10 --time-field 0:8 --channel-field 8:1 --time-unit ps",
       "file ends inside record 2 (1 trailing bytes"},
      {"import trunc.bin -o out.h5 --record-bytes 8 --time-unit ps", "does not fit in a record of 8 bytes"},
      {"import trunc.bin -o out.h5 --record-bytes 10 --time-field 0:8 --channel-field 8:1", "needs the time unit"},
      {"info empty.csv", "empty.csv: empty file"},
      {"info nounit.csv", "not an HDF5 file"},
      {"info trunc.h5", "trunc.h5: "},
      {"info trunc_start.h5", "trunc_start.h5: "},
      {"info other.h5", "not a flyby time-tag record"},
      {"info wrongtype.h5", "/tags/time_ps must be a 64-bit signed integer, found a 64-bit float"},
      {"info missing.h5", "missing.h5: no such file"},
      {"export trunc.h5 --csv -o out.csv", "trunc.h5: "},
      {"export wrongtype.h5 --csv", "wrongtype.h5: "},
      {"export good.h5 -o out.csv", "choose the output format: --csv"},
  };
  for (const Case& c : cases) {
    const auto r = run_flyby(c.args, d);
    INFO("flyby " << c.args << "\n  status " << r.status << "\n  stderr: " << r.err << "\n  stdout: " << r.out.substr(0, 200));
    CHECK(one_error_line(r));
    CHECK(r.err.find(c.fragment) != std::string::npos);
    // Nothing written: no output, no leftover temporary file.
    CHECK(dir.entries() == before);
  }
}
