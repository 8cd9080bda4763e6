// The scenario as read from a TOML config: plain model structs filled by the config layer, the
// only code that touches TOML (STYLE.md guideline 2). Keys and units: config_keys.h.
//
// Errors: every problem throws flyby::InputError with one line "FILE:LINE: what is wrong", e.g.
//   run.toml:12: unknown key 'resonator.lenght_mm'; did you mean 'resonator.length_mm'?
//   run.toml:12: 'resonator.length' has no unit in its name; write 'resonator.length_mm'
//   run.toml:7: [resonator] is missing the required key 'waist_um'
//   run.toml:30: [[channel]] 'sigma_p': analyzer 'A': ports … are not orthogonal
#pragma once

#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "models/drives/resonator_drive.h"
#include "models/drives/side_drive.h"
#include "models/feedback/feedback_rule.h"
#include "models/levels/level_structure.h"
#include "models/resonator/resonator.h"
#include "models/source/arrivals.h"
#include "models/source/initial_populations.h"

namespace flyby::config {

using geometry::Vec3;

struct AtomConfig {
  bool custom = false;
  levels::LevelRequest request;        // named species (custom == false); field_G set from [field]
  levels::CustomAtom custom_atom;      // custom == true
  std::optional<double> custom_mass_u;  // custom == true: mass, u (needed by an effusive beam)
  int reference_ground_2F = 0;         // reference transition for every detuning
  int reference_excited_2F = 0;
};

struct FieldConfig {
  Vec3 field_G = Vec3::Zero();                 // lab frame, gauss
  Vec3 axis_when_zero = Vec3::UnitZ();         // quantization axis when B = 0
  // ∂B_i/∂x_j in G/mm (symmetric, traceless); only its component along B is used: the field
  // magnitude seen at r is B∥(r) = |B| + B̂·(G r), the axis stays along B (valid while |G r| ≪ |B|).
  std::optional<Eigen::Matrix3d> gradient_G_per_mm;
};

struct FreeSpaceDetector {
  std::string channel;
  Vec3 direction = Vec3::UnitX();              // atoms → detector, lab
  std::optional<geometry::PolarizationSpec> polarization;  // nullopt: unpolarized (two channels summed)
  double solid_angle_sr = 0.0;
  double efficiency = 1.0;
};

// Detector-chain parameters of one channel, field for field those of
// detectors::DetectorChannelOptions (models/detectors, records branch), which the engine's
// assembly fills from here. Efficiency is not here: it is part of the channel's collapse
// operator, so the chain's own efficiency stays 1.
struct DetectorParams {
  std::string channel;
  double dead_time_ns = 0.0;
  bool paralyzable = false;                    // dead-time model
  double jitter_fwhm_ps = 0.0;
  double dark_rate_per_s = 0.0;
  double afterpulse_probability = 0.0;
  double afterpulse_delay_ns = 0.0;
  double afterpulse_time_constant_ns = 0.0;
  double cable_delay_ns = 0.0;
};

enum class SourceKind { kBeam, kStationary };

struct SourceConfig {
  SourceKind kind = SourceKind::kBeam;
  source::BeamSpec beam;                       // kBeam
  std::vector<Vec3> positions_um;              // kStationary
  source::PopulationSpec populations;
};

// run.cluster_method: how joint clusters are integrated (docs/simulate.md, "Cluster methods").
enum class ClusterMethodChoice { kAuto, kExact, kTruncated, kEliminated, kIndependent };
const char* to_string(ClusterMethodChoice c);
// Throws flyby::InputError for an unknown name (the config reader has checked it already).
ClusterMethodChoice cluster_method_from_string(const std::string& name);

struct RunConfig {
  double duration_s = 0.0;
  std::uint64_t seed = 1;
  double interaction_cutoff = 1e-3;
  long long max_cluster_dimension = 20000;
  // Excitation-number truncation of joint clusters (run.max_excitation_count): set = every
  // cluster keeps states with ≤ this many excitations; unset = only clusters above
  // max_cluster_dimension, with kDefaultMaxExcitation (docs/simulate.md, "Cluster methods").
  std::optional<int> max_excitation;
  static constexpr int kDefaultMaxExcitation = 2;
  ClusterMethodChoice cluster_method = ClusterMethodChoice::kAuto;
  double relative_tolerance = 1e-6;
  double arrival_block_us = 100.0;
  double tagger_resolution_ps = 1.0;
  std::optional<double> tagger_max_rate_per_s;
};

struct ScenarioConfig {
  std::string source_name;                     // file path (or a label for text input)
  std::string text;                            // the full config text (for provenance)
  AtomConfig atom;
  FieldConfig field;
  std::optional<resonator::ResonatorSpec> resonator;  // outputs filled from resonator channels
  std::vector<drives::SideDrive> side_drives;
  std::vector<drives::ResonatorDrive> resonator_drives;
  std::vector<FreeSpaceDetector> free_space_detectors;
  std::vector<DetectorParams> detectors;       // every channel, in file order
  SourceConfig source;
  std::vector<feedback::FeedbackRule> feedback;
  RunConfig run;
  // "FILE:LINE" of each object for later semantic errors: keys "atom", "field", "resonator",
  // "source", "run", "drive:<name>", "channel:<name>", "feedback:<name>", "population".
  std::map<std::string, std::string> where;

  std::vector<std::string> channel_names() const;
  std::vector<std::string> drive_names() const;
};

// Parse and check keys, types, ranges and required keys. Throws flyby::InputError.
ScenarioConfig load_config_file(const std::string& path);
ScenarioConfig parse_config(std::string_view text, std::string_view source_name);

// Everything the config implies, built and cross-checked: level structure, quantization frame,
// resonator model with its output channels, free-space channels, drives, populations, feedback
// rules, arrival rate. The engine's scenario assembly starts from this.
struct CheckedScenario {
  CheckedScenario(ScenarioConfig c, levels::LevelStructure l, geometry::QuantizationFrame f)
      : config(std::move(c)), levels(std::move(l)), frame(std::move(f)) {}
  ScenarioConfig config;
  levels::LevelStructure levels;
  geometry::QuantizationFrame frame;
  double unit_dipole_C_m = 0.0;                       // d of a unit-weight transition
  double reference_frequency_MHz = 0.0;               // ν_ref of the reference transition at B = 0
  std::optional<resonator::ResonatorModel> resonator;
  std::vector<geometry::LinearCollapse> free_space_channels;  // on (A₋₁, A₀, A₊₁), detected + undetected
  std::vector<double> side_drive_rabi_rad_per_us;     // peak Ω of each side drive
  std::vector<double> resonator_drive_amplitude_rad_per_us;
  std::vector<double> ground_populations;             // per ground sublevel
  // Sublevel energies in the reference frame at B = 0 and at |B| (scenario::AtomView interpolates
  // linearly in the local field when there is a gradient).
  std::vector<double> energies_zero_field_rad_per_us;
  std::optional<double> arrival_rate_per_us;          // beam only
  std::optional<double> mean_atoms_in_mode;           // beam with a resonator
  std::vector<source::GaussianTube> interaction_elements;  // resonator first, then side drives

  std::string summary() const;                        // a few lines for `flyby config --check`
};

// Throws flyby::InputError "FILE:LINE: …" naming the object at fault.
CheckedScenario check_scenario(const ScenarioConfig& config);

// Sublevel energies (rad/µs) in the reference frame: the reference ground level at zero
// hyperfine shift, the excited manifold shifted down by the reference optical frequency, so the
// reference transition at B = 0 has zero energy difference (docs/scenario.md §3).
std::vector<double> reference_frame_energies(const levels::LevelStructure& levels, int reference_ground_2F,
                                             int reference_excited_2F);

}  // namespace flyby::config
