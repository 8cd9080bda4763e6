// TOML fragments that several test scenarios share, in a header light enough for every test
// executable (tests/mpi included): the number format, the probed short resonator and the
// channels behind a polarizing beam splitter. The whole scenarios live in scenario_text.h and
// block_driver_config.h; build new ones from these pieces rather than pasting the lines again.
#pragma once

#include <sstream>
#include <string>

namespace flyby::test {

// TOML number: shortest text that reads back to the same double (std::to_string would cut
// 1e-7 to "0.000000").
inline std::string toml_number(double x) {
  std::ostringstream s;
  s.precision(17);
  s << x;
  const std::string t = s.str();
  return (t.find_first_of(".eE") == std::string::npos && t.find("inf") == std::string::npos &&
          t.find("nan") == std::string::npos)
             ? t + ".0"
             : t;
}

// The short resonator the probed-resonator tests use (0.25 mm, 25 µm waist, 70 % of the loss
// through the output mirror) and its resonator drive "probe" on mode 1.
struct ProbedResonator {
  double kappa_MHz = 3.0;          // field decay κ/2π, MHz
  double empty_photons = 0.01;     // mean photons of the driven empty resonator
  std::string resonator_lines;     // extra keys of the [resonator] table (g0, cutoff, detuning, frame)
};

inline std::string probed_resonator_text(const ProbedResonator& r) {
  return R"([resonator]
length_mm = 0.25
waist_um = 25.0
kappa_MHz = )" + toml_number(r.kappa_MHz) + R"(
output_mirror_fraction = 0.7
)" + r.resonator_lines + R"(
[[drive]]
name = "probe"
kind = "resonator"
mode_index = 1
empty_mean_photons_count = )" + toml_number(r.empty_photons) + "\n";
}

// A detector `name` on the resonator output behind a polarizing beam splitter at `angle_deg`
// (0: H, 90: V), detection efficiency 0.6, plus `extra_lines` (dead time, dark counts, ...).
inline std::string pbs_channel_text(const std::string& name, double angle_deg, const std::string& extra_lines = "") {
  return "[[channel]]\nname = \"" + name + R"("
source = "resonator"
analyzer = "pbs"
polarization = "linear"
polarization_angle_deg = )" + toml_number(angle_deg) + R"(
efficiency_fraction = 0.6
)" + extra_lines;
}

}  // namespace flyby::test
