// Scenario configs shared by the simulate and analyze tests: the two workhorse scenarios (a
// stationary 87Rb atom with heralded Δm = 2 Zeeman beats; a beam of two-level model atoms
// crossing a Gaussian side drive, seen by one free-space detector) with the knobs the tests
// turn, and one call that checks a config text and simulates it to a record. Tests that need a
// different scenario write their own text; these two exist so that the many tests built on them
// do not carry near-copies that drift apart.
#pragma once

#include <cstdint>
#include <optional>
#include <sstream>
#include <string>

#include "models/analysis/record_analysis.h"
#include "models/config/scenario_config.h"
#include "models/simulation/simulation.h"
#include "tests/support/scenario_fragments.h"

namespace flyby::test {

// A stationary 87Rb atom, F = 1 → F′ = 0, B along lab x, driven along z with linear polarization
// (x̂ + ŷ)/√2 (π and σ± with respect to B, so no dark state survives the Larmor precession). The
// detector along B behind a ŷ polarizer sees only σ± light; its click leaves the atom in the
// ground state ∝ ŷ, a superposition of m = ±1 (Δm = 2), which precesses about B: the next
// photon's rate beats at 2 |g_F| μB B / h.
struct BeatScenario {
  std::uint64_t seed = 1;          // run.seed_id
  double duration_s = 0.1;         // run.duration_s, lab seconds
  double field_G = 3.0;            // |B| along lab x, gauss
  double rabi_MHz = 1.0;           // drive Rabi frequency Ω/2π, MHz
  double solid_angle_sr = 8.0;     // detector solid angle, sr
  // The detector's direction and polarization lines (TOML keys of the channel table).
  std::string detector = "direction_dir = [1, 0, 0]\npolarization = \"linear\"\npolarization_dir = [0, 1, 0]\n";
  std::string extra_tables;        // whole TOML tables placed before [run] (more drives, feedback)
  std::string run_lines;           // extra `key = value` lines of the [run] table
};

inline std::string beat_scenario_text(const BeatScenario& o) {
  return R"([atom]
species = "Rb87"
ground_F = 1
excited_F = 0
[field]
B_G = [)" + toml_number(o.field_G) + R"(, 0, 0]
[[drive]]
name = "probe"
kind = "side"
direction_dir = [0, 0, 1]
polarization = "linear"
polarization_dir = [1, 1, 0]
waist_um = 50.0
rabi_MHz = )" + toml_number(o.rabi_MHz) + R"(
[[channel]]
name = "det"
source = "free_space"
)" + o.detector + "solid_angle_sr = " + toml_number(o.solid_angle_sr) + R"(
efficiency_fraction = 1.0
[source]
kind = "stationary"
positions_um = [[0, 0, 0]]
)" + o.extra_tables + R"(
[run]
duration_s = )" + toml_number(o.duration_s) + "\nseed_id = " + std::to_string(o.seed) + "\n" + o.run_lines;
}

// A beam of two-level model atoms (custom F = 0 → F′ = 1, driven on π) along x crossing a side
// drive along z of 1/e² intensity radius `waist_um`; detector "det" along x, unpolarized.
struct BeamScenario {
  std::uint64_t seed = 1;           // run.seed_id
  double duration_s = 0.003;        // run.duration_s, lab seconds
  double flux_per_s = 477000.0;     // atoms per second through the source aperture
  double speed_m_per_s = 2.0;       // monochromatic beam speed, m/s
  double waist_um = 20.0;           // drive 1/e² intensity radius, µm
  double rabi_MHz = 0.6;            // peak drive Rabi frequency Ω/2π, MHz
  double gamma_MHz = 6.0;           // excited-state decay rate Γ/2π, MHz
  double excited_gF = 0.0;          // g_F of F′ = 1 (0: no Zeeman shifts)
  double field_G = 0.0;             // |B| along lab y, gauss (0: quantization axis y without field)
  // Transverse profile: a slit of this width (µm), or when unset a Gaussian line of the given σ.
  std::optional<double> slit_width_um = 200.0;
  double transverse_sigma_um = 0.01;  // Gaussian σ when no slit, µm
  double axial_extent_um = 100.0;     // spread of starting points along the beam, µm
  double solid_angle_sr = 4.0;        // detector solid angle, sr
  std::string extra_tables;           // whole TOML tables placed before [run]
  std::string run_lines;              // extra `key = value` lines of the [run] table
};

inline std::string beam_scenario_text(const BeamScenario& o) {
  const std::string field = o.field_G > 0 ? "B_G = [0, " + toml_number(o.field_G) + ", 0]\n"
                                          : std::string("axis_when_zero_dir = [0, 1, 0]\n");
  const std::string profile =
      o.slit_width_um ? "transverse_profile = \"slit\"\nslit_width_um = " + toml_number(*o.slit_width_um) + "\n"
                      : "transverse_profile = \"gaussian\"\ntransverse_sigma_um = " + toml_number(o.transverse_sigma_um) + "\n";
  return R"([atom]
species = "custom"
ground_F = 0
excited_F = 1
gamma_MHz = )" + toml_number(o.gamma_MHz) + R"(
wavelength_nm = 780.0
mass_u = 87.0
ground_gF = 0.0
excited_gF = )" + toml_number(o.excited_gF) + R"(
[field]
)" + field + R"([[drive]]
name = "probe"
kind = "side"
direction_dir = [0, 0, 1]
polarization = "linear"
polarization_dir = [0, 1, 0]
waist_um = )" + toml_number(o.waist_um) + R"(
rabi_MHz = )" + toml_number(o.rabi_MHz) + R"(
[[channel]]
name = "det"
source = "free_space"
direction_dir = [1, 0, 0]
polarization = "unpolarized"
solid_angle_sr = )" + toml_number(o.solid_angle_sr) + R"(
efficiency_fraction = 1.0
[source]
kind = "beam"
speed_distribution = "monochromatic"
speed_m_per_s = )" + toml_number(o.speed_m_per_s) + "\n" + profile + "axial_extent_um = " + toml_number(o.axial_extent_um) +
         "\nflux_per_s = " + toml_number(o.flux_per_s) + "\n" + o.extra_tables + R"(
[run]
duration_s = )" + toml_number(o.duration_s) + "\nseed_id = " + std::to_string(o.seed) + "\n" + o.run_lines;
}

// How the beam runs are analysed for atom number and transit time: g2 in 500 ns bins to ±40 µs,
// the single-atom antibunching (≈ 1/Γ) left out (g2_1 = 1 beyond 400 ns), a flat level plus the
// Gaussian transit envelope.
inline analysis::RecordAnalysisOptions beam_analysis_options() {
  analysis::RecordAnalysisOptions o;
  o.bin_width_ns = 500;
  o.range_ns = 40000;
  o.tau_min_ns = 400;
  o.model = "level+transit_gauss";
  o.threads = 1;
  return o;
}

// N identical two-level atoms at one antinode of a weakly driven resonator: a custom F = 0 → F′ = 1
// atom with B along x (the quantization axis) and mode 1 polarized along x, so mode 1 drives only
// the π transition |0,0⟩ ↔ |1′,0⟩ with Clebsch–Gordan weight 1 (a two-level atom in the sense of
// the weak-drive closed forms); mode 2 stays empty. Channel "H" behind a polarizing beam splitter
// sees mode 1.
struct AntinodeScenario {
  std::uint64_t seed = 1;             // run.seed_id
  double duration_s = 1e-3;           // run.duration_s, lab seconds
  int atoms_count = 1;                // atoms, all at the origin
  double gamma_MHz = 6.0;             // excited-state decay rate Γ/2π, MHz
  double kappa_MHz = 3.0;             // resonator field decay κ/2π, MHz
  double g0_MHz = 3.0;                // peak coupling g0/2π, MHz
  double empty_photons = 0.01;        // mean photons of the driven empty resonator
  std::string resonator_lines;        // extra keys of the [resonator] table (cutoff, detuning, frame)
  std::string run_lines;              // extra `key = value` lines of the [run] table
};

inline std::string antinode_scenario_text(const AntinodeScenario& o) {
  std::string pos;
  for (int k = 0; k < o.atoms_count; ++k) pos += std::string(k ? ", " : "") + "[0, 0, 0]";
  return R"([atom]
species = "custom"
ground_F = 0
excited_F = 1
gamma_MHz = )" + toml_number(o.gamma_MHz) + R"(
wavelength_nm = 780.0
ground_gF = 0.0
excited_gF = 0.5
[field]
B_G = [0.1, 0, 0]
)" + probed_resonator_text({o.kappa_MHz, o.empty_photons, "g0_MHz = " + toml_number(o.g0_MHz) + "\n" + o.resonator_lines}) +
         pbs_channel_text("H", 0) + R"([source]
kind = "stationary"
positions_um = [)" + pos + R"(]
[run]
duration_s = )" + toml_number(o.duration_s) + "\nseed_id = " + std::to_string(o.seed) + "\n" + o.run_lines;
}

// Checks `text` as a scenario (named `name` in errors) and simulates it to `output_path`; the
// caller checks `ok` of the summary it returns.
inline simulation::Summary simulate_text(const std::string& text, const std::string& name,
                                         const std::string& output_path, int threads = 1) {
  const auto scenario = config::check_scenario(config::parse_config(text, name));
  simulation::Options o;
  o.output_path = output_path;
  o.threads = threads;
  return simulation::simulate(scenario, o);
}

}  // namespace flyby::test
