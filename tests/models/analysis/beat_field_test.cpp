// B from a beat frequency and the Δm of the heralded coherence (models/analysis/beat_field.h).
#include <catch2/catch.hpp>

#include <cmath>

#include "engine/common/errors.h"
#include "models/analysis/beat_field.h"
#include "models/config/scenario_config.h"
#include "tests/support/scenario_text.h"

using namespace flyby::analysis;

TEST_CASE("ground-level g_F of named species matches the handbook-derived values", "[beat_field]") {
  // Arguments are 2F. REFERENCES.md [derived] from Steck's D line data: 87Rb F=1 −0.5018267, F=2 +0.4998364;
  // 85Rb F=3 +0.3334772; Cs F=4 +0.2499685 (7 digits given: tolerance 1e-7).
  CHECK(std::abs(ground_level_from_species("Rb87", "D2", 4).gF - 0.4998364) < 1e-7);
  CHECK(std::abs(ground_level_from_species("Rb87", "D1", 4).gF - 0.4998364) < 1e-7);
  CHECK(std::abs(ground_level_from_species("Rb87", "D2", 2).gF + 0.5018267) < 1e-7);
  CHECK(std::abs(ground_level_from_species("Rb85", "D2", 6).gF - 0.3334772) < 1e-7);
  CHECK(std::abs(ground_level_from_species("Cs133", "D2", 8).gF - 0.2499685) < 1e-7);
  CHECK_THROWS_AS(ground_level_from_species("Rb87", "D2", 6), flyby::InputError);
  CHECK_THROWS_AS(ground_level_from_species("Xx1", "D2", 2), flyby::InputError);
}

TEST_CASE("field from the beat frequency: f = |Δm| |g_F| μB B / h", "[beat_field]") {
  // Linear Zeeman shift of 85Rb F = 3: 0.46674 MHz/G per unit m (REFERENCES.md [derived]).
  const auto r = field_from_beat(2 * 0.46674 * 1.5, 2 * 0.46674 * 0.01, 0.3334772, 2);
  CHECK(std::abs(r.field_G - 1.5) < 1e-4);
  CHECK(std::abs(r.field_err_G - 0.01) < 1e-6);
}

namespace {

flyby::config::CheckedScenario scenario(const std::string& detector) {
  flyby::test::BeatScenario o;
  o.field_G = 2.0;
  o.duration_s = 0.001;
  o.solid_angle_sr = 1.0;
  o.detector = detector + "\n";
  const std::string text = flyby::test::beat_scenario_text(o);
  return flyby::config::check_scenario(flyby::config::parse_config(text, "test"));
}

}  // namespace

TEST_CASE("Δm of the heralded coherence from the herald channel's polarization components", "[beat_field]") {
  // Dipole radiation along B carries only σ±; perpendicular to B a polarizer along B passes π
  // and one across B passes σ± (common practice, no source).
  {
    const auto s = scenario("direction_dir = [1, 0, 0]\npolarization = \"linear\"\npolarization_dir = [0, 1, 0]");
    const auto d = heralded_delta_m(&s, "det", std::nullopt);
    CHECK(d.value == 2);
    CHECK_FALSE(d.assumed);
  }
  {
    // Viewed along y, polarizer at 45° between x (π) and z (σ): π and σ together.
    const auto s = scenario("direction_dir = [0, 1, 0]\npolarization = \"linear\"\npolarization_dir = [1, 0, 1]");
    const auto d = heralded_delta_m(&s, "det", std::nullopt);
    CHECK(d.value == 1);
    CHECK_FALSE(d.assumed);
  }
  {
    // Circular analyzer along B: one σ component only, no coherence from the herald.
    const auto s = scenario("direction_dir = [1, 0, 0]\npolarization = \"sigma_plus\"");
    const auto d = heralded_delta_m(&s, "det", std::nullopt);
    CHECK(d.assumed);
    CHECK(heralded_delta_m(&s, "det", 1).value == 1);
  }
  CHECK(heralded_delta_m(nullptr, "x", std::nullopt).assumed);
}
