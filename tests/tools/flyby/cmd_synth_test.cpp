// End-to-end tests of `flyby synth` through the real program: the record it writes is valid for
// `flyby info`, is reproducible from the seed, correlates to the same histogram for any block
// size and thread count, and bad flags give one error line, exit status 2 and no file.
#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "engine/records/record_reader.h"
#include "tests/support/run_cli.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

using flyby::test::run_flyby;
using flyby::test::ScratchDir;

namespace {

bool one_error_line(const flyby::test::CliResult& r) {
  return r.status == 2 && r.out.empty() && r.err.rfind("flyby: error: ", 0) == 0 && r.err.find('\n') == r.err.size() - 1;
}

}  // namespace

TEST_CASE("flyby synth: valid, reproducible record that correlates the same for any block size", "[cli][synth]") {
  ScratchDir dir("cli_synth");
  const std::string d = dir.path().string();
  const std::string seed = std::to_string(flyby::test::seed("cli synth"));
  const std::string args = " --channel A:4e5 --channel B:3e5:herald --channel M:1e3:marker --duration-s 0.5 --seed " + seed +
                           " --pair-rate-per-s 2e4 --pair-first B --pair-second A --beat-MHz 4 --beat-visibility 0.7"
                           " --pair-decay-us 0.3 --resolution-ps 4";
  auto r = run_flyby("synth -o s1.h5" + args, d);
  INFO(r.err);
  REQUIRE(r.status == 0);
  REQUIRE(run_flyby("synth -o s2.h5" + args, d).status == 0);
  const auto a = flyby::records::read_record(dir / "s1.h5"), b = flyby::records::read_record(dir / "s2.h5");
  REQUIRE(a.tags.size() > 100000);
  CHECK(a.tags.time_ps == b.tags.time_ps);
  CHECK(a.tags.channel == b.tags.channel);
  for (auto t : a.tags.time_ps) REQUIRE(t % 4 == 0);  // quantized to the 4 ps resolution

  auto info = run_flyby("info s1.h5 --json", d);
  REQUIRE(info.status == 0);
  const auto j = nlohmann::json::parse(info.out);
  CHECK(j.dump().find("\"synthetic\"") != std::string::npos);

  // Same histogram from one big block on one thread and from small blocks on two threads.
  auto c1 = run_flyby("correlate s1.h5 --start B --stop A --bin-ns 5 --range-ns 1500 --json --threads 1", d);
  auto c2 = run_flyby("correlate s1.h5 --start B --stop A --bin-ns 5 --range-ns 1500 --json --threads 2 --block-tags 1000", d);
  REQUIRE(c1.status == 0);
  REQUIRE(c2.status == 0);
  const auto j1 = nlohmann::json::parse(c1.out), j2 = nlohmann::json::parse(c2.out);
  CHECK(j1["counts"] == j2["counts"]);
  CHECK(j1["n_start"] == j2["n_start"]);
}

TEST_CASE("flyby synth: bad flags are one-line errors and leave no file", "[cli][synth]") {
  ScratchDir dir("cli_synth_bad");
  const std::string d = dir.path().string();
  CHECK(one_error_line(run_flyby("synth -o x.h5", d)));                                   // no channel
  CHECK(one_error_line(run_flyby("synth -o x.h5 --channel A", d)));                       // no rate
  CHECK(one_error_line(run_flyby("synth -o x.h5 --channel A:fast", d)));                  // rate not a number
  CHECK(one_error_line(run_flyby("synth -o x.h5 --channel A:10:boss", d)));               // unknown role
  CHECK(one_error_line(run_flyby("synth -o x.h5 --channel A:10 --duration-s -1", d)));    // negative window
  CHECK(one_error_line(run_flyby("synth -o x.h5 --channel A:10 --pair-rate-per-s 5 --pair-first A --pair-second Z", d)));
  CHECK(one_error_line(run_flyby("synth -o x.h5 --channel A:10 --chunk-tags 5", d)));     // chunk size out of range
  CHECK(dir.entries().empty());
}
