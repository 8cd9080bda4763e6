// `flyby analyze` and the config form of `flyby plan` as a user runs them: report directory
// contents, figures (or the documented exit code 4 when plotting is unavailable), --json,
// one-line errors and no half-written output.
#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include <filesystem>
#include <algorithm>
#include <cmath>
#include <fstream>
#include <string>

#include "tests/support/run_cli.h"
#include "tests/support/scenario_text.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

using flyby::test::run_flyby;
using flyby::test::ScratchDir;

namespace {

// A stationary 87Rb atom with heralded Δm = 2 beats (tests/support/scenario_text.h).
std::string config(std::uint64_t seed) {
  flyby::test::BeatScenario o;
  o.seed = seed;
  o.duration_s = 0.4;
  return flyby::test::beat_scenario_text(o);
}

}  // namespace

TEST_CASE("flyby analyze writes a report directory with figures and a JSON summary", "[cli][analyze]") {
  ScratchDir d("cli-analyze");
  {
    std::ofstream(d / "c.toml") << config(flyby::test::seed("cli analyze"));
  }
  REQUIRE(run_flyby("simulate c.toml -o run.h5", d.path().string()).status == 0);
  const auto r = run_flyby("analyze run.h5 -o rep --json --bin-ns 10 --range-ns 3000", d.path().string());
  INFO(r.err);
  // Exit 0 with figures; 4 if this machine cannot plot (then the report says so).
  REQUIRE((r.status == 0 || r.status == 4));
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["status"].is_string());
  CHECK(j["atom"]["species"] == "Rb87");
  CHECK(j["pairs"].size() == 1);
  REQUIRE(j["field_G"].is_object());
  CHECK(std::isfinite(j["field_G"]["value"].get<double>()));
  const auto md = flyby::test::read_text((d / "rep" / "report.md").string());
  CHECK(md.find("magnetic field B") != std::string::npos);
  CHECK(md.find("Δm = 2") != std::string::npos);
  for (const char* f : {"summary.json", "singles.csv", "g2_det_det.csv", "fit_g2_det_det.json"})
    CHECK(std::filesystem::exists(d / "rep" / f));
  if (r.status == 0) {
    CHECK(std::filesystem::exists(d / "rep" / "singles.png"));
    CHECK(std::filesystem::exists(d / "rep" / "g2_det_det.png"));
    CHECK(md.find("Figure missing") == std::string::npos);
  }
  for (const auto& e : d.entries()) CHECK(e.find(".part-") == std::string::npos);
}

TEST_CASE("flyby analyze without a plotter writes the report and exits 4", "[cli][analyze]") {
  ScratchDir d("cli-analyze-noplot");
  {
    std::ofstream(d / "c.toml") << config(flyby::test::seed("cli analyze noplot"));
  }
  REQUIRE(run_flyby("simulate c.toml -o run.h5", d.path().string()).status == 0);
  const std::string cmd = "cd '" + d.path().string() + "' && FLYBY_PYTHON=/nonexistent/python3 '" + FLYBY_EXE +
                          "' analyze run.h5 -o rep >out.txt 2>err.txt";
  const int raw = std::system(cmd.c_str());
  REQUIRE(WIFEXITED(raw));
  CHECK(WEXITSTATUS(raw) == 4);
  const auto md = flyby::test::read_text((d / "rep" / "report.md").string());
  CHECK(md.find("Figure missing") != std::string::npos);
  CHECK(!std::filesystem::exists(d / "rep" / "singles.png"));
}

TEST_CASE("flyby analyze: bad input is one line, nothing left behind", "[cli][analyze]") {
  ScratchDir d("cli-analyze-err");
  {
    std::ofstream(d / "junk.h5") << "not a record";
  }
  for (const std::string args : {"analyze missing.h5 -o rep", "analyze junk.h5 -o rep"}) {
    const auto r = run_flyby(args, d.path().string());
    INFO(args << "\n" << r.err);
    CHECK(r.status == 2);
    CHECK(std::count(r.err.begin(), r.err.end(), '\n') == 1);
    CHECK(!std::filesystem::exists(d / "rep"));
  }
  for (const auto& e : d.entries()) CHECK(e.find(".part-") == std::string::npos);
}

TEST_CASE("flyby plan CONFIG prints the plan with its assumptions", "[cli][plan]") {
  ScratchDir d("cli-plan-config");
  {
    std::ofstream(d / "c.toml") << config(flyby::test::seed("cli plan config"));
  }
  const auto r = run_flyby("plan c.toml --simulate-s 0.5 --bin-ns 10 --range-ns 3000 --target beat-freq-kHz=2 --json",
                           d.path().string());
  INFO(r.err);
  REQUIRE(r.status == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["scenario"]["assumptions"].size() >= 3);
  CHECK(j["targets"][0]["duration_s"].get<double>() > 0);
  // Model options do not mix with a config.
  const auto bad = run_flyby("plan c.toml --contrast 0.1 --target beat-freq-kHz=2", d.path().string());
  CHECK(bad.status == 2);
}
