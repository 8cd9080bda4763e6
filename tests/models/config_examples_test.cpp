// The example scenarios in configs/ all pass the checker (library and `flyby config --check`),
// and configs/README.md carries the key reference generated from the key table.
#include <catch2/catch.hpp>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "engine/common/errors.h"
#include "models/config/config_keys.h"
#include "models/config/scenario_config.h"

namespace fs = std::filesystem;
using namespace flyby::config;

TEST_CASE("every example config passes the checker", "[config][examples]") {
  int n = 0;
  for (const auto& e : fs::directory_iterator(fs::path(FLYBY_SOURCE_DIR) / "configs")) {
    if (e.path().extension() != ".toml") continue;
    ++n;
    INFO(e.path().string());
    const ScenarioConfig cfg = load_config_file(e.path().string());
    const CheckedScenario s = check_scenario(cfg);
    CHECK(!s.summary().empty());
    // The same through the command line (exit status 0).
    const std::string cmd = std::string(FLYBY_EXE) + " config --check " + e.path().string() + " > /dev/null";
    CHECK(std::system(cmd.c_str()) == 0);
  }
  CHECK(n >= 3);
}

TEST_CASE("the example scenarios describe what their comments say", "[config][examples]") {
  const fs::path dir = fs::path(FLYBY_SOURCE_DIR) / "configs";
  const CheckedScenario beam = check_scenario(load_config_file((dir / "thermal_beam_resonator.toml").string()));
  REQUIRE(beam.resonator);
  CHECK(beam.mean_atoms_in_mode.has_value());
  CHECK(std::abs(*beam.mean_atoms_in_mode - 0.05) < 1e-9);
  CHECK(beam.config.feedback.size() == 1);
  const CheckedScenario free = check_scenario(load_config_file((dir / "stationary_free_space.toml").string()));
  CHECK(!free.resonator);
  int detected = 0;
  for (const auto& c : free.free_space_channels) detected += c.detected;
  CHECK(detected == 2);
  // "plus" (σ+ about +x = B̂) couples only to A₋₁ (decays m → m − 1, σ+ light); "minus" (σ+ about
  // −x, i.e. σ− about B̂) only to A₊₁ — the helicity convention of docs/scenario.md §2.
  const auto& plus = free.free_space_channels[0];
  const auto& minus = free.free_space_channels[1];
  REQUIRE(plus.channel == "plus");
  REQUIRE(minus.channel == "minus");
  CHECK(std::abs(plus.coefficients(0)) > 0.1);
  CHECK(std::abs(plus.coefficients(1)) < 1e-12);
  CHECK(std::abs(plus.coefficients(2)) < 1e-12);
  CHECK(std::abs(minus.coefficients(2)) > 0.1);
  CHECK(std::abs(minus.coefficients(0)) < 1e-12);
  CHECK(std::abs(minus.coefficients(1)) < 1e-12);
  // Γ Σ A_q†A_q bookkeeping of the free-space channels.
  CHECK(flyby::geometry::completeness_error(free.free_space_channels, 3, free.levels.gamma_rad_per_us()) <
        1e-12 * free.levels.gamma_rad_per_us());
}

TEST_CASE("configs/README.md contains the generated key reference", "[config][examples]") {
  std::ifstream in(fs::path(FLYBY_SOURCE_DIR) / "configs" / "README.md");
  REQUIRE(in);
  std::stringstream ss;
  ss << in.rdbuf();
  // Regenerate with: flyby config --markdown (see configs/README.md).
  CHECK(ss.str().find(markdown_reference()) != std::string::npos);
}
