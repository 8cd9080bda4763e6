// `flyby bench --quick --json` runs and reports every workload at 1..N threads with the fields a
// lab needs to size a job (no timed assertions: speed is measured, never asserted, STYLE.md §10).
// The work done (jumps, atom transits, tags) must not depend on the thread count: the engine's
// streams are keyed by trajectory index and the scenario's by atom and cluster (DESIGN.md §4).
#include <catch2/catch.hpp>
#include <cmath>
#include <nlohmann/json.hpp>

#include "tests/support/run_cli.h"
#include "tests/support/scratch_dir.h"

using flyby::test::run_flyby;

TEST_CASE("flyby bench --quick --json reports every workload at 1 and 2 threads", "[cli][bench]") {
  flyby::test::ScratchDir dir("bench");
  const std::string scenario = std::string(FLYBY_SOURCE_DIR) + "/configs/thermal_beam_reference.toml";
  const auto r = run_flyby("bench --quick --json --threads-max 2 --scenario '" + scenario + "'", dir.path().string());
  INFO(r.err);
  REQUIRE(r.status == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j.at("quick").get<bool>());
  CHECK(j.at("threads_max_count").get<int>() == 2);
  CHECK(!j.at("flyby_version").get<std::string>().empty());
  const auto& ws = j.at("workloads");
  REQUIRE(ws.size() == 4);
  const char* names[] = {"two_level", "rb87_two_mode_resonator", "thermal_beam_reference", "correlator"};
  for (std::size_t k = 0; k < 4; ++k) {
    const auto& w = ws[k];
    INFO(w.dump());
    CHECK(w.at("name").get<std::string>() == names[k]);
    CHECK(!w.at("unit").get<std::string>().empty());
    const auto& runs = w.at("runs");
    REQUIRE(runs.size() == 2);
    for (std::size_t t = 0; t < 2; ++t) {
      const auto& m = runs[t];
      CHECK(m.at("threads_count").get<int>() == int(t) + 1);
      for (const char* f : {"work_count", "wall_s", "cpu_s", "rate_per_s", "rate_per_core_per_s", "rate_per_cpu_s",
                            "efficiency_fraction"}) {
        INFO(f);
        const double v = m.at(f).get<double>();
        CHECK(std::isfinite(v));
        CHECK(v >= 0.0);
      }
      CHECK(m.at("work_count").get<double>() > 0.0);
      // rate per core = work / (wall · threads), by definition.
      const double wall = m.at("wall_s").get<double>();
      if (wall > 0)
        CHECK(m.at("rate_per_core_per_s").get<double>() ==
              Approx(m.at("work_count").get<double>() / (wall * double(t + 1))).epsilon(1e-12));
    }
    // Efficiency is relative to one thread; the work is the same for any thread count.
    CHECK(runs[0].at("efficiency_fraction").get<double>() == 1.0);
    CHECK(runs[0].at("work_count").get<double>() == runs[1].at("work_count").get<double>());
    if (k == 2) {
      for (const auto& m : runs) {
        CHECK(m.at("lab_s").get<double>() > 0.0);
        CHECK(std::isfinite(m.at("lab_s_per_core_s").get<double>()));
      }
    }
  }
  CHECK(ws[3].at("runs")[0].at("work_count").get<double>() == 1e6);
}

TEST_CASE("flyby bench names a missing scenario file", "[cli][bench]") {
  flyby::test::ScratchDir dir("bench-missing");
  const auto r = run_flyby("bench --quick --scenario no-such-file.toml", dir.path().string());
  CHECK(r.status != 0);
  CHECK(r.err.find("no-such-file.toml") != std::string::npos);
}
