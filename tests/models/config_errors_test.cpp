// Scenario config: every kind of bad input gives one line naming the problem and where
// (models/config). The key-table properties (every numeric key carries a unit) are checked too.
#include <catch2/catch.hpp>
#include <string>

#include "engine/common/errors.h"
#include "models/config/config_keys.h"
#include "models/config/scenario_config.h"

using namespace flyby::config;

namespace {

// A valid scenario; tests replace one line. Line numbers matter: keep them stable.
const std::string kBase = R"([atom]
species = "Rb87"
ground_F = [1, 2]
excited_F = [2, 3]
[field]
B_G = [0, 0, 1]
[resonator]
length_mm = 0.5
waist_um = 30
kappa_MHz = 2.5
[[drive]]
name = "pump"
kind = "side"
direction_dir = [0, 1, 0]
polarization_dir = [0, 0, 1]
waist_um = 40
rabi_MHz = 3
[[channel]]
name = "H"
source = "resonator"
polarization_angle_deg = 0
[[channel]]
name = "V"
source = "resonator"
polarization_angle_deg = 90
[source]
kind = "beam"
oven_temperature_K = 400
slit_width_um = 200
flux_per_s = 1e6
[run]
duration_s = 0.001
)";

std::string replace_line(const std::string& text, int line, const std::string& with) {
  std::string out;
  int n = 1;
  std::size_t pos = 0;
  while (pos < text.size()) {
    const std::size_t end = text.find('\n', pos);
    const std::string l = text.substr(pos, end - pos);
    out += (n == line ? with : l) + "\n";
    pos = end + 1;
    ++n;
  }
  return out;
}

// The error message of parsing + checking `text` (empty if it is accepted).
std::string error_of(const std::string& text) {
  try {
    check_scenario(parse_config(text, "test.toml"));
  } catch (const flyby::InputError& e) {
    const std::string msg = e.what();
    REQUIRE(msg.find('\n') == std::string::npos);  // one line
    return msg;
  }
  return "";
}

}  // namespace

TEST_CASE("the base config is valid", "[config]") { CHECK(error_of(kBase).empty()); }

TEST_CASE("unknown key: file:line and the nearest valid key", "[config]") {
  const std::string e = error_of(replace_line(kBase, 8, "lenght_mm = 0.5"));
  CHECK_THAT(e, Catch::Contains("test.toml:8"));
  CHECK_THAT(e, Catch::Contains("unknown key 'resonator.lenght_mm'"));
  CHECK_THAT(e, Catch::Contains("did you mean 'resonator.length_mm'"));
  // In an array of tables too.
  const std::string d = error_of(replace_line(kBase, 17, "rabbi_MHz = 3"));
  CHECK_THAT(d, Catch::Contains("test.toml:17"));
  CHECK_THAT(d, Catch::Contains("did you mean 'drive[].rabi_MHz'"));
  // Unknown section.
  const std::string s = error_of(replace_line(kBase, 7, "[resonater]"));
  CHECK_THAT(s, Catch::Contains("test.toml:7"));
  CHECK_THAT(s, Catch::Contains("did you mean 'resonator'"));
}

TEST_CASE("a bare number in a key without unit is refused", "[config]") {
  const std::string e = error_of(replace_line(kBase, 8, "length = 0.5"));
  CHECK_THAT(e, Catch::Contains("test.toml:8"));
  CHECK_THAT(e, Catch::Contains("has no unit"));
  CHECK_THAT(e, Catch::Contains("resonator.length_mm"));
  const std::string k = error_of(replace_line(kBase, 10, "kappa = 2.5"));
  CHECK_THAT(k, Catch::Contains("resonator.kappa_MHz"));
}

TEST_CASE("missing required key or section", "[config]") {
  const std::string e = error_of(replace_line(kBase, 9, ""));
  CHECK_THAT(e, Catch::Contains("test.toml:7"));
  CHECK_THAT(e, Catch::Contains("[resonator] is missing the required key 'waist_um'"));
  const std::string k = error_of(replace_line(kBase, 10, ""));
  CHECK_THAT(k, Catch::Contains("needs one of 'kappa_MHz' and 'finesse_ratio'"));
  const std::string r = error_of(replace_line(replace_line(kBase, 31, ""), 32, ""));
  CHECK_THAT(r, Catch::Contains("missing required section [run]"));
  const std::string f = error_of(replace_line(kBase, 30, ""));
  CHECK_THAT(f, Catch::Contains("needs exactly one of 'flux_per_s' and 'mean_atoms_in_mode_count'"));
}

TEST_CASE("wrong type and TOML syntax", "[config]") {
  const std::string t = error_of(replace_line(kBase, 8, "length_mm = \"long\""));
  CHECK_THAT(t, Catch::Contains("test.toml:8"));
  CHECK_THAT(t, Catch::Contains("'resonator.length_mm' must be number"));
  const std::string v = error_of(replace_line(kBase, 6, "B_G = [0, 1]"));
  CHECK_THAT(v, Catch::Contains("'field.B_G' must be [x, y, z]"));
  const std::string c = error_of(replace_line(kBase, 27, "kind = \"fountain\""));
  CHECK_THAT(c, Catch::Contains("choose one of: beam, stationary"));
  const std::string s = error_of(replace_line(kBase, 8, "length_mm = = 0.5"));
  CHECK_THAT(s, Catch::Contains("test.toml:8"));
  CHECK_THAT(s, Catch::Contains("TOML syntax error"));
}

TEST_CASE("unphysical values: negative rates, efficiencies, probabilities", "[config]") {
  const std::string k = error_of(replace_line(kBase, 10, "kappa_MHz = -2.5"));
  CHECK_THAT(k, Catch::Contains("test.toml:10"));
  CHECK_THAT(k, Catch::Contains("'resonator.kappa_MHz' = -2.5 is out of range: must be > 0"));
  const std::string f = error_of(replace_line(kBase, 30, "flux_per_s = -1e6"));
  CHECK_THAT(f, Catch::Contains("test.toml:30"));
  CHECK_THAT(f, Catch::Contains("out of range"));
  const std::string d = error_of(replace_line(kBase, 21, "dark_rate_per_s = -10"));
  CHECK_THAT(d, Catch::Contains("test.toml:21"));
  const std::string e = error_of(replace_line(kBase, 21, "efficiency_fraction = 1.4"));
  CHECK_THAT(e, Catch::Contains("must be ≤ 1"));
  const std::string t = error_of(replace_line(kBase, 28, "oven_temperature_K = 0"));
  CHECK_THAT(t, Catch::Contains("source.oven_temperature_K"));
}

TEST_CASE("F not allowed for the species", "[config]") {
  // 87Rb: I = 3/2, J = 1/2 → ground F ∈ {1, 2} (Steck [memory]; angular momentum addition).
  const std::string e = error_of(replace_line(kBase, 3, "ground_F = [1, 3]"));
  CHECK_THAT(e, Catch::Contains("test.toml:1"));
  CHECK_THAT(e, Catch::Contains("F=3"));
  const std::string h = error_of(replace_line(kBase, 3, "ground_F = 1.25"));
  CHECK_THAT(h, Catch::Contains("not an integer or half-integer"));
  // Custom atom: |F − F′| ≤ 1.
  // (Replace from the bottom up: the multi-line replacement shifts later lines.)
  const std::string c = error_of(replace_line(replace_line(replace_line(kBase, 4, "excited_F = 2"), 3, "ground_F = 0"), 2,
      "species = \"custom\"\ngamma_MHz = 6\nwavelength_nm = 780\nground_gF = 0.5\nexcited_gF = 0.6\nmass_u = 87"));
  CHECK_THAT(c, Catch::Contains("custom atom"));
}

TEST_CASE("non-orthogonal analyzer basis", "[config]") {
  const std::string e = error_of(replace_line(kBase, 25, "polarization_angle_deg = 60"));
  CHECK_THAT(e, Catch::Contains("test.toml:22"));
  CHECK_THAT(e, Catch::Contains("non-orthogonal"));
  // Ports in different analyzers may overlap as long as the total does not exceed 2κ a†a:
  const std::string twice = replace_line(replace_line(kBase, 25, "polarization_angle_deg = 60\nanalyzer = \"other\"\n"
                                                                 "efficiency_fraction = 0.5"), 21,
                                         "polarization_angle_deg = 0\nefficiency_fraction = 0.5");
  CHECK(error_of(twice).empty());
}

TEST_CASE("bad initial populations", "[config]") {
  const std::string pop = "[[population]]\nground_F = 2\nm_F = 2\nprobability_fraction = ";
  const std::string sum = error_of(kBase + pop + "0.9\n");
  CHECK_THAT(sum, Catch::Contains("test.toml:33"));
  CHECK_THAT(sum, Catch::Contains("sum to 0.9"));
  const std::string range = error_of(kBase + pop + "1.5\n");
  CHECK_THAT(range, Catch::Contains("test.toml:36"));
  CHECK_THAT(range, Catch::Contains("must be ≤ 1"));
  const std::string m = error_of(kBase + "[[population]]\nground_F = 1\nm_F = 2\nprobability_fraction = 1\n");
  CHECK_THAT(m, Catch::Contains("not a sublevel of F = 1"));
  CHECK(error_of(kBase + pop + "1.0\n").empty());
}

TEST_CASE("cross-references: feedback channel and drive, resonator drive without resonator", "[config]") {
  const std::string fb = "[[feedback]]\ntrigger_channel = \"H\"\ndrive = \"pump\"\nlevel_ratio = 0\nduration_ns = 500\n";
  CHECK(error_of(kBase + fb).empty());
  const std::string bad_ch = error_of(kBase + replace_line(fb, 2, "trigger_channel = \"X\""));
  CHECK_THAT(bad_ch, Catch::Contains("test.toml:33"));
  CHECK_THAT(bad_ch, Catch::Contains("'X' is not a detected channel"));
  const std::string bad_dr = error_of(kBase + replace_line(fb, 3, "drive = \"probe\""));
  CHECK_THAT(bad_dr, Catch::Contains("drive 'probe' does not exist"));
  const std::string hold = error_of(kBase + fb + "holdoff_ns = 100\n");
  CHECK_THAT(hold, Catch::Contains("hold-off"));
  // A key that does not apply to the chosen kind.
  const std::string kind = error_of(replace_line(kBase, 17, "rabi_MHz = 3\nmode_index = 1"));
  CHECK_THAT(kind, Catch::Contains("test.toml:18"));
  CHECK_THAT(kind, Catch::Contains("only for kind = \"resonator\""));
}

TEST_CASE("channel names follow the record format; names are unique", "[config]") {
  const std::string e = error_of(replace_line(kBase, 19, "name = \"H V\""));
  CHECK_THAT(e, Catch::Contains("test.toml:19"));
  CHECK_THAT(e, Catch::Contains("must be 1-64 characters"));
  const std::string d = error_of(replace_line(kBase, 23, "name = \"H\""));
  CHECK_THAT(d, Catch::Contains("test.toml:23"));
  CHECK_THAT(d, Catch::Contains("used twice"));
  const std::string a = error_of(replace_line(kBase, 21, "polarization_angle_deg = 0\nafterpulse_fraction = 0.7"));
  CHECK_THAT(a, Catch::Contains("must be ≤ 0.5"));
}

TEST_CASE("every numeric key carries a unit suffix; every key is explained", "[config]") {
  for (const auto& k : config_keys()) {
    INFO(k.path);
    CHECK(!k.meaning.empty());
    if (k.type == KeyType::kString || k.type == KeyType::kBool) continue;
    bool has_unit = false;
    for (const auto& s : unit_suffixes()) {
      has_unit = has_unit || (k.path.size() > s.size() && k.path.compare(k.path.size() - s.size(), s.size(), s) == 0);
    }
    CHECK(has_unit);
    CHECK(!k.unit.empty());
  }
  CHECK(edit_distance("kitten", "sitting") == 3);  // the textbook Levenshtein example
}
