// Cross-read of a record written by flyby with h5py (Debian's python3-h5py), following only
// docs/record-format.md (tests/reference/record_h5py_check.py): proves the documented layout.
#include <catch2/catch.hpp>
#include <cstdio>
#include <cstring>
#include <nlohmann/json.hpp>
#include <string>

#include "engine/common/random.h"
#include "engine/records/record_writer.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

using namespace flyby::records;

namespace {
std::string run_capture(const std::string& cmd, int& status) {
  std::string out;
  FILE* p = popen(cmd.c_str(), "r");
  REQUIRE(p != nullptr);
  char buf[4096];
  std::size_t k;
  while ((k = fread(buf, 1, sizeof buf, p)) > 0) out.append(buf, k);
  status = pclose(p);
  return out;
}
}  // namespace

TEST_CASE("h5py reads a flyby record by the documented layout", "[records][reference]") {
  flyby::test::ScratchDir dir("h5py");
  const auto seed = flyby::test::seed("h5py cross-read");
  auto rng = flyby::make_stream(seed, flyby::StreamPurpose::kTest, 0);
  RecordData d;
  d.header.channels = {{0, "sigma+", ChannelRole::kHerald}, {1, "sigma-", ChannelRole::kDetector},
                       {17, "feedback.on", ChannelRole::kMarker}};
  d.header.resolution_ps = 80.955;
  d.header.start_ps = 123;
  d.header.duration_ps = 3'000'000'000'000;
  d.header.provenance = current_record_provenance("simulation", "# config\n[atom]\nspecies = \"87Rb\"\n", seed);
  std::int64_t t = 123;
  std::uint64_t checksum = 0;
  std::uint64_t counts[3] = {0, 0, 0};
  const ChannelId ids[3] = {0, 1, 17};
  for (int i = 0; i < 200'000; ++i) {
    t += static_cast<std::int64_t>(rng() % 20'000'000);
    const int k = static_cast<int>(rng() % 3);
    d.tags.push_back(t, ids[k]);
    ++counts[k];
    checksum = (checksum + static_cast<std::uint64_t>(t) % 1000003) % (std::uint64_t{1} << 61);
  }
  RecordWriterOptions opt;
  opt.chunk_tags = 10000;
  opt.index_block_tags = 4096;
  write_record(dir / "run.h5", d, opt);

  int status = 0;
  const std::string out = run_capture(std::string(FLYBY_TEST_PYTHON) + " " + FLYBY_SOURCE_DIR +
                                          "/tests/reference/record_h5py_check.py " + (dir / "run.h5").string(), status);
  INFO(out);
  REQUIRE(status == 0);
  const auto j = nlohmann::json::parse(out);
  CHECK(j["tag_count"] == 200'000);
  CHECK(j["first_ps"] == d.tags.time_ps.front());
  CHECK(j["last_ps"] == d.tags.time_ps.back());
  CHECK(j["start_ps"] == 123);
  CHECK(j["duration_ps"] == 3'000'000'000'000);
  CHECK(j["resolution_ps"] == 80.955);
  CHECK(j["time_checksum"] == checksum);
  CHECK(j["seed"] == seed);
  CHECK(j["source"] == "simulation");
  CHECK(j["config_text"] == d.header.provenance.config_text);
  REQUIRE(j["channels"].size() == 3);
  for (int k = 0; k < 3; ++k) {
    CHECK(j["channels"][k]["id"] == ids[k]);
    CHECK(j["channels"][k]["name"] == d.header.channels[k].name);
    CHECK(j["channels"][k]["count"] == counts[k]);
  }
  CHECK(j["channels"][2]["role"] == "marker");

  // The example reader printed in docs/record-format.md runs as documented on this file and
  // prints every channel with its rate.
  const std::string example = std::string(FLYBY_TEST_PYTHON) +
                               " -c 'import re, sys; doc = open(sys.argv[1]).read(); "
                               "code = re.search(r\"```python\\n(.*?)```\", doc, re.S).group(1); "
                               "exec(code.replace(\"path = \\\"run.h5\\\"\", \"path = sys.argv[2]\"))' " +
                               FLYBY_SOURCE_DIR + "/docs/record-format.md " + (dir / "run.h5").string();
  const std::string printed = run_capture(example, status);
  INFO(printed);
  REQUIRE(status == 0);
  for (int k = 0; k < 3; ++k) {
    const double rate = static_cast<double>(counts[k]) / 3.0;  // 3 s window
    char line[128];
    std::snprintf(line, sizeof line, "%s %s ", d.header.channels[k].name.c_str(),
                  std::string(to_string(d.header.channels[k].role)).c_str());
    const auto pos = printed.find(line);
    REQUIRE(pos != std::string::npos);
    CHECK(std::stod(printed.substr(pos + std::strlen(line))) == Approx(rate).epsilon(1e-12));
  }
}
