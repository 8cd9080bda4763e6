// The scenario-config key table (see config_keys.h). Adding a key: add a row here, read it in
// scenario_config.cpp, and regenerate configs/README.md with `flyby config --markdown`.
#include "models/config/config_keys.h"

#include <algorithm>
#include <numbers>
#include <sstream>

namespace flyby::config {

std::string to_string(KeyType t) {
  switch (t) {
    case KeyType::kString: return "string";
    case KeyType::kBool: return "bool";
    case KeyType::kNumber: return "number";
    case KeyType::kInteger: return "integer";
    case KeyType::kNumberList: return "number or array of numbers";
    case KeyType::kVec3: return "[x, y, z]";
    case KeyType::kVec3List: return "array of [x, y, z]";
    case KeyType::kJones: return "[[re, im], [re, im]]";
    case KeyType::kMatrix3: return "3×3 matrix [[..], [..], [..]]";
  }
  return "?";
}

namespace {

using T = KeyType;
constexpr auto R = Need::kRequired;
constexpr auto O = Need::kOptional;
constexpr auto C = Need::kConditional;

KeySpec num(std::string path, std::string unit, std::string def, Need need, std::string meaning,
            std::optional<double> min = std::nullopt, bool min_exclusive = false,
            std::optional<double> max = std::nullopt, KeyType type = T::kNumber) {
  return KeySpec{std::move(path), type, std::move(unit), std::move(def), need, std::move(meaning), min,
                 min_exclusive, max, {}};
}
KeySpec str(std::string path, std::string def, Need need, std::string meaning, std::vector<std::string> choices = {}) {
  return KeySpec{std::move(path), T::kString, "", std::move(def), need, std::move(meaning),
                 std::nullopt, false, std::nullopt, std::move(choices)};
}
KeySpec vec(std::string path, std::string unit, std::string def, Need need, std::string meaning,
            KeyType type = T::kVec3) {
  return KeySpec{std::move(path), type, std::move(unit), std::move(def), need, std::move(meaning),
                 std::nullopt, false, std::nullopt, {}};
}

const std::vector<std::string> kPolarizations = {"linear", "sigma_plus", "sigma_minus", "jones"};
const std::vector<std::string> kDetectorPolarizations = {"linear", "sigma_plus", "sigma_minus", "jones", "unpolarized"};

std::vector<KeySpec> build_keys() {
  const double four_pi = 4.0 * std::numbers::pi;
  std::vector<KeySpec> k;
  // ---- [atom]
  k.push_back(str("atom.species", "", R, "Atom: Rb87, Rb85, Cs133, Na23, K39 (handbook data), or custom (give "
                  "gamma_MHz, wavelength_nm, ground_gF, excited_gF and one F, F′).",
                  {"Rb87", "Rb85", "Cs133", "Na23", "K39", "custom"}));
  k.push_back(str("atom.line", "D2", O, "Optical line of a named species.", {"D1", "D2"}));
  k.push_back(num("atom.ground_F", "F (quantum number)", "", R,
                  "Ground hyperfine level(s) in the model, e.g. 2 or [1, 2]; integer or half-integer.", 0.0, false,
                  std::nullopt, T::kNumberList));
  k.push_back(num("atom.excited_F", "F (quantum number)", "", R,
                  "Excited hyperfine level(s) F′ in the model, e.g. [1, 2, 3].", 0.0, false, std::nullopt, T::kNumberList));
  k.push_back(num("atom.reference_ground_F", "F (quantum number)", "first of ground_F", O,
                  "Ground F of the reference transition; every detuning_MHz is measured from the zero-field "
                  "frequency of reference_ground_F → reference_excited_F.", 0.0));
  k.push_back(num("atom.reference_excited_F", "F (quantum number)", "largest of excited_F", O,
                  "Excited F′ of the reference transition (see reference_ground_F).", 0.0));
  k.push_back(str("atom.ground_zeeman", "linear", O,
                  "Ground-level Zeeman energies: linear (g_F μB m B) or breit_rabi (exact for J = 1/2).",
                  {"linear", "breit_rabi"}));
  k.push_back(num("atom.gamma_MHz", "MHz (Γ/2π)", "", C, "Custom atom only: excited-state decay rate Γ/2π (natural FWHM).",
                  0.0, true));
  k.push_back(num("atom.wavelength_nm", "nm (vacuum)", "", C, "Custom atom only: transition wavelength.", 0.0, true));
  k.push_back(num("atom.mass_u", "u (atomic mass units)", "", C, "Custom atom only: mass (needed by an effusive beam).",
                  0.0, true));
  k.push_back(num("atom.ground_gF", "Landé g_F", "", C, "Custom atom only: ground-level g_F."));
  k.push_back(num("atom.excited_gF", "Landé g_F", "", C, "Custom atom only: excited-level g_F."));
  // ---- [field]
  k.push_back(vec("field.B_G", "G (lab frame)", "[0, 0, 0]", O,
                  "Magnetic field vector; its direction is the quantization axis."));
  k.push_back(vec("field.gradient_G_per_mm", "G/mm (lab frame)", "none", O,
                  "Field gradient ∂B_i/∂x_j (row i, column j) about the origin; must be symmetric and traceless "
                  "(curl B = div B = 0). Only the component along B is kept (see docs/scenario.md).",
                  T::kMatrix3));
  k.push_back(vec("field.axis_when_zero_dir", "direction (lab frame)", "[0, 0, 1]", O,
                  "Quantization axis used when B = 0."));
  // ---- [resonator]
  k.push_back(num("resonator.length_mm", "mm", "", R, "Mirror separation L (sets the mode volume and, with finesse, κ).",
                  0.0, true));
  k.push_back(num("resonator.waist_um", "µm", "", R, "Mode waist w0, 1/e² intensity radius.", 0.0, true));
  k.push_back(num("resonator.kappa_MHz", "MHz (κ/2π)", "", C,
                  "Field decay rate κ/2π (linewidth FWHM is 2κ). Give this or finesse_ratio.", 0.0, true));
  k.push_back(num("resonator.finesse_ratio", "finesse", "", C, "Finesse F; κ = π c / (2 L F). Give this or kappa_MHz.",
                  0.0, true));
  k.push_back(num("resonator.g0_MHz", "MHz (g0/2π)", "from dipole and V", O,
                  "Coupling g0/2π at an antinode on the axis for unit Clebsch–Gordan weight; default "
                  "d √(ω/(2ħε0V)), V = π w0² L/4.", 0.0, true));
  k.push_back(num("resonator.mode1_angle_deg", "deg", "0", O,
                  "Polarization of mode 1, from lab x̂ towards ŷ; mode 2 is orthogonal (ẑ × mode 1)."));
  k.push_back(num("resonator.splitting_MHz", "MHz", "0", O, "Birefringent splitting ν(mode 2) − ν(mode 1)."));
  k.push_back(num("resonator.detuning_MHz", "MHz", "0", O, "ν(mode 1) − ν(reference transition)."));
  k.push_back(num("resonator.output_mirror_fraction", "fraction", "1", O,
                  "Fraction of the field decay 2κ that leaves through the output mirror towards the analyzers.", 0.0,
                  false, 1.0));
  k.push_back(num("resonator.fock_cutoff_count", "photons", "2", O, "Highest photon number kept per mode.", 1.0, false,
                  50.0, T::kInteger));
  k.push_back(str("resonator.field_frame", "displaced", O,
                  "displaced: each mode is written as a → α + a around the coherent amplitude α of the empty driven "
                  "resonator at the cluster start (an exact change of frame; the Fock cutoff then only holds the "
                  "atoms' field, so a strong resonator drive needs no large cutoff); plain: the photon-number basis "
                  "of the whole field. Identical without a resonator drive.",
                  {"displaced", "plain"}));
  k.push_back(str("resonator.mode_shape", "standing", O,
                  "standing: g ∝ exp(−ρ²/w0²) cos(kz); running: exp(−ρ²/w0²) e^{ikz} (V = π w0² L/2).",
                  {"standing", "running"}));
  // ---- [[drive]]
  k.push_back(str("drive[].name", "", R, "Unique name; feedback rules refer to it."));
  k.push_back(str("drive[].kind", "", R, "side: a laser beam crossing the atoms; resonator: drives one resonator mode.",
                  {"side", "resonator"}));
  k.push_back(vec("drive[].direction_dir", "direction (lab frame)", "", C, "Side drive: propagation direction k."));
  k.push_back(vec("drive[].focus_um", "µm (lab frame)", "[0, 0, 0]", O, "Side drive: a point on the beam axis."));
  k.push_back(str("drive[].polarization", "linear", O,
                  "Side drive polarization: linear (polarization_dir or polarization_angle_deg), sigma_plus / "
                  "sigma_minus about k (−(e1 + i e2)/√2, (e1 − i e2)/√2), or jones (polarization_jones).",
                  kPolarizations));
  k.push_back(vec("drive[].polarization_dir", "direction (lab frame)", "", O,
                  "Side drive, linear: polarization direction (must be ⊥ k)."));
  k.push_back(num("drive[].polarization_angle_deg", "deg", "0", O,
                  "Side drive, linear: angle from e1 towards e2 when polarization_dir is not given."));
  k.push_back(vec("drive[].polarization_jones", "Jones vector (e1, e2)", "", C,
                  "Side drive, polarization = jones: complex components along (e1, e2); normalized.", T::kJones));
  k.push_back(vec("drive[].jones_e1_dir", "direction (lab frame)", "lab x̂ ⊥ k", O,
                  "Side drive: first transverse basis vector e1 (its k part is removed); e2 = k × e1."));
  k.push_back(num("drive[].waist_um", "µm", "", C, "Side drive: 1/e² intensity radius.", 0.0, true));
  k.push_back(num("drive[].rabi_MHz", "MHz (Ω/2π)", "", C,
                  "Side drive: Rabi frequency at the beam centre for unit Clebsch–Gordan weight. Give this or "
                  "intensity_mW_per_cm2.", 0.0));
  k.push_back(num("drive[].intensity_mW_per_cm2", "mW/cm²", "", C,
                  "Side drive: peak intensity; Ω = d √(2I/(c ε0))/ħ with the unit-weight dipole d.", 0.0));
  k.push_back(num("drive[].detuning_MHz", "MHz", "0", O, "Laser frequency minus the reference transition frequency."));
  k.push_back(num("drive[].mode_index", "mode number", "1", O, "Resonator drive: which mode, 1 or 2.", 1.0, false, 2.0,
                  T::kInteger));
  k.push_back(num("drive[].amplitude_MHz", "MHz (E/2π)", "", C,
                  "Resonator drive: amplitude E/2π in H = ħE(a + a†). Give this or empty_mean_photons_count.", 0.0));
  k.push_back(num("drive[].empty_mean_photons_count", "photons", "", C,
                  "Resonator drive: mean photon number of the empty resonator driven on resonance, (E/κ)².", 0.0));
  // ---- [[channel]]
  k.push_back(str("channel[].name", "", R, "Unique channel name, as written to the time-tag record."));
  k.push_back(str("channel[].source", "", R,
                  "resonator: a port of a polarization analyzer behind the output mirror; free_space: a detector "
                  "looking at the atoms.", {"resonator", "free_space"}));
  k.push_back(str("channel[].analyzer", "analyzer", O,
                  "Resonator: name of the analyzer this port belongs to; ports of one analyzer must be orthogonal."));
  k.push_back(str("channel[].polarization", "linear", O,
                  "Polarization the detector is sensitive to (as for drives; Jones basis e1 = x̂, e2 = ŷ for the "
                  "resonator output along +ẑ); free space also allows unpolarized.", kDetectorPolarizations));
  k.push_back(num("channel[].polarization_angle_deg", "deg", "0", O, "Linear: angle from e1 towards e2."));
  k.push_back(vec("channel[].polarization_dir", "direction (lab frame)", "", O,
                  "Free space, linear: polarization direction (⊥ direction_dir)."));
  k.push_back(vec("channel[].polarization_jones", "Jones vector (e1, e2)", "", C, "polarization = jones: components.",
                  T::kJones));
  k.push_back(vec("channel[].jones_e1_dir", "direction (lab frame)", "lab x̂ ⊥ k", O, "Free space: Jones basis vector e1."));
  k.push_back(vec("channel[].direction_dir", "direction (lab frame)", "", C,
                  "Free space: direction from the atoms to the detector."));
  k.push_back(num("channel[].solid_angle_sr", "sr", "", C, "Free space: collection solid angle (small-angle pattern).",
                  0.0, true, four_pi));
  k.push_back(num("channel[].efficiency_fraction", "fraction", "1", O,
                  "Detection efficiency of the channel (optics after the analyzer and detector quantum efficiency); "
                  "the rest goes to the undetected channel.", 0.0, false, 1.0));
  // Detector-chain keys mirror detectors::DetectorChannelOptions (models/detectors) and its ranges.
  k.push_back(num("channel[].dead_time_ns", "ns", "0", O, "Detector dead time after a click.", 0.0, false, 1e9));
  k.push_back(str("channel[].dead_time_model", "non-paralyzable", O,
                  "non-paralyzable: arrivals during the dead time are lost; paralyzable: every arrival restarts it.",
                  {"non-paralyzable", "paralyzable"}));
  k.push_back(num("channel[].jitter_fwhm_ps", "ps", "0", O, "Gaussian timing jitter, FWHM.", 0.0, false, 1e6));
  k.push_back(num("channel[].dark_rate_per_s", "1/s", "0", O, "Dark-count rate (Poisson).", 0.0, false, 1e8));
  k.push_back(num("channel[].afterpulse_fraction", "probability", "0", O,
                  "Probability that a click triggers one afterpulse.", 0.0, false, 0.5));
  k.push_back(num("channel[].afterpulse_delay_ns", "ns", "0", O,
                  "Fixed delay of an afterpulse after its click (plus an exponential time).", 0.0, false, 1e9));
  k.push_back(num("channel[].afterpulse_time_constant_ns", "ns", "0", O,
                  "Mean of the exponential part of the afterpulse delay.", 0.0, false, 1e9));
  k.push_back(num("channel[].cable_delay_ns", "ns", "0", O,
                  "Signal delay from detector to tagger; negative aligns the channel earlier.", -1e6, false, 1e6));
  // ---- [source]
  k.push_back(str("source.kind", "", R, "beam: atoms crossing the mode; stationary: atoms at fixed positions.",
                  {"beam", "stationary"}));
  k.push_back(str("source.speed_distribution", "effusive", O,
                  "Beam: effusive (v³ exp(−v²/α²), oven_temperature_K), monochromatic (speed_m_per_s) or gaussian "
                  "(speed_m_per_s ± speed_spread_m_per_s).", {"effusive", "monochromatic", "gaussian"}));
  k.push_back(num("source.oven_temperature_K", "K", "", C, "Beam, effusive: oven temperature.", 0.0, true));
  k.push_back(num("source.speed_m_per_s", "m/s", "", C, "Beam, monochromatic or gaussian: (mean) speed.", 0.0, true));
  k.push_back(num("source.speed_spread_m_per_s", "m/s", "0", O, "Beam, gaussian: standard deviation of the speed.", 0.0));
  k.push_back(vec("source.direction_dir", "direction (lab frame)", "[1, 0, 0]", O, "Beam: nominal direction (before tilt)."));
  k.push_back(num("source.tilt_deg", "deg", "0", O,
                  "Beam: tilt of the direction towards the resonator axis +ẑ (motion along the standing wave).",
                  -90.0, true, 90.0));
  k.push_back(str("source.transverse_profile", "slit", O,
                  "Beam: slit (uniform over slit_width_um) or gaussian (transverse_sigma_um), across the mode.",
                  {"slit", "gaussian"}));
  k.push_back(num("source.slit_width_um", "µm", "", C, "Beam, slit: full width across the mode.", 0.0, true));
  k.push_back(num("source.transverse_sigma_um", "µm", "", C, "Beam, gaussian: standard deviation across the mode.", 0.0,
                  true));
  k.push_back(num("source.offset_um", "µm", "0", O, "Beam: centre of the transverse profile relative to the mode axis."));
  k.push_back(num("source.axial_extent_um", "µm", "100", O,
                  "Beam: full extent along the resonator axis (uniform; ≫ λ averages over the standing wave).", 0.0));
  k.push_back(num("source.divergence_mrad", "mrad", "0", O, "Beam: standard deviation of each transverse velocity angle.",
                  0.0));
  k.push_back(num("source.flux_per_s", "atoms/s", "", C, "Beam: arrival rate of atoms. Give this or mean_atoms_in_mode_count.",
                  0.0, true));
  k.push_back(num("source.mean_atoms_in_mode_count", "atoms", "", C,
                  "Beam: time-averaged number of atoms within the 1/e² intensity radius w0 of the resonator axis.",
                  0.0, true));
  k.push_back(vec("source.positions_um", "µm (lab frame)", "", C, "Stationary: one [x, y, z] per atom.", T::kVec3List));
  // ---- [[population]]
  k.push_back(num("population[].ground_F", "F (quantum number)", "", R, "Ground level of this sublevel.", 0.0));
  k.push_back(num("population[].m_F", "m (quantum number)", "", R, "Magnetic quantum number of this sublevel."));
  k.push_back(num("population[].probability_fraction", "probability", "", R,
                  "Probability that an atom starts in this sublevel; all entries sum to 1. No [[population]] "
                  "entries: uniform over all included ground sublevels.", 0.0, false, 1.0));
  // ---- [[feedback]]
  k.push_back(str("feedback[].name", "rule<N>", O, "Label for the run summary."));
  k.push_back(str("feedback[].trigger_channel", "", R, "Detected channel whose clicks trigger the rule."));
  k.push_back(str("feedback[].drive", "", R, "Name of the drive that is changed."));
  k.push_back(num("feedback[].latency_ns", "ns", "0", O, "Delay from the click to the change.", 0.0));
  k.push_back(num("feedback[].level_ratio", "amplitude factor", "", R,
                  "Drive amplitude during the action relative to its configured value (0 = off).", 0.0));
  k.push_back(num("feedback[].duration_ns", "ns", "", R, "How long the changed level lasts.", 0.0, true));
  k.push_back(num("feedback[].holdoff_ns", "ns", "latency + duration", O,
                  "After a trigger, clicks are ignored by this rule for this long (≥ latency + duration).", 0.0));
  // ---- [run]
  k.push_back(num("run.duration_s", "s", "", R, "Lab time to simulate.", 0.0, true));
  k.push_back(num("run.seed_id", "integer", "1", O, "Master seed of all random streams.", 0.0, false, std::nullopt,
                  T::kInteger));
  k.push_back(num("run.interaction_cutoff_fraction", "fraction", "0.001", O,
                  "An atom interacts while a coupling or drive field envelope exceeds this fraction of its peak.", 0.0,
                  true, 1.0));
  k.push_back(num("run.max_cluster_dimension_count", "states", "20000", O,
                  "Clusters whose joint Hilbert space is larger fall back to the documented approximation.", 1.0, false,
                  std::nullopt, T::kInteger));
  k.push_back(num("run.max_excitation_count", "excitations", "2 above the dimension cap", O,
                  "Weak-drive truncation of joint clusters: keep basis states with at most this many excitations "
                  "(photons plus excited atoms). Set: every cluster uses it; unset: only clusters whose full basis "
                  "exceeds run.max_cluster_dimension_count, with 2. The leaked norm is reported.",
                  0.0, false, 20.0, T::kInteger));
  k.push_back(str("run.cluster_method", "auto", O,
                  "How clusters of atoms sharing the resonator are integrated (docs/simulate.md, Cluster methods). "
                  "auto: exact basis, else excitation-truncated, else the eliminated modes where valid (bad "
                  "cavity: N g² and the atomic rates small against κ), else independent atoms; exact, truncated, "
                  "eliminated, independent: force that method.",
                  {"auto", "exact", "truncated", "eliminated", "independent"}));
  k.push_back(num("run.relative_tolerance_fraction", "fraction", "1e-6", O,
                  "Relative accuracy of the trajectory integrator.", 0.0, true, 1.0));
  k.push_back(num("run.arrival_block_us", "µs", "100", O,
                  "Lab-time block that owns one arrival random stream (changing it changes the atoms drawn).", 0.0,
                  true));
  k.push_back(num("run.tagger_resolution_ps", "ps", "1", O, "Time-tag bin width of the record.", 0.0, true, 1e6));
  k.push_back(num("run.tagger_max_rate_per_s", "1/s", "unlimited", O,
                  "Largest sustained tag rate of the tagger over all channels.", 1.0, false, 1e10));
  return k;
}

}  // namespace

const std::vector<SectionSpec>& config_sections() {
  static const std::vector<SectionSpec> s = {
      {"atom", false, "The atom: species and line, or a custom model atom; which hyperfine levels are included."},
      {"field", false, "Magnetic field (lab frame); sets the quantization axis."},
      {"resonator", false, "Optional resonator along lab ẑ: geometry, decay, polarization modes."},
      {"drive", true, "Lasers: side beams crossing the atoms or a drive of one resonator mode."},
      {"channel", true, "Detection channels: resonator analyzer ports and free-space detectors, with detector data."},
      {"source", false, "Where atoms come from: an atomic beam or stationary atoms."},
      {"population", true, "Initial ground-sublevel populations (optical pumping), sampled per atom."},
      {"feedback", true, "Rules that change a drive after a click."},
      {"run", false, "Duration, seed and accuracy of the run."},
  };
  return s;
}

const std::vector<KeySpec>& config_keys() {
  static const std::vector<KeySpec> keys = build_keys();
  return keys;
}

const KeySpec* find_key(std::string_view path) {
  for (const auto& k : config_keys()) {
    if (k.path == path) return &k;
  }
  return nullptr;
}

const SectionSpec* find_section(std::string_view name) {
  for (const auto& s : config_sections()) {
    if (s.name == name) return &s;
  }
  return nullptr;
}

const std::vector<std::string>& unit_suffixes() {
  static const std::vector<std::string> s = {
      "_mW_per_cm2", "_G_per_mm", "_m_per_s", "_per_s", "_fraction", "_ratio", "_count", "_index", "_jones", "_mrad",
      "_MHz", "_deg", "_dir", "_gF", "_ns", "_us", "_ps", "_um", "_mm", "_nm", "_sr", "_id", "_s", "_G",
      "_K", "_F", "_u"};
  return s;
}

std::size_t edit_distance(std::string_view a, std::string_view b) {
  std::vector<std::size_t> prev(b.size() + 1), cur(b.size() + 1);
  for (std::size_t j = 0; j <= b.size(); ++j) prev[j] = j;
  for (std::size_t i = 1; i <= a.size(); ++i) {
    cur[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j) {
      cur[j] = std::min({prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + (a[i - 1] == b[j - 1] ? 0 : 1)});
    }
    std::swap(prev, cur);
  }
  return prev[b.size()];
}

namespace {
std::pair<std::string, std::string> split(std::string_view path) {
  const auto dot = path.rfind('.');
  if (dot == std::string_view::npos) return {"", std::string(path)};
  return {std::string(path.substr(0, dot)), std::string(path.substr(dot + 1))};
}
}  // namespace

std::optional<std::string> nearest_key(std::string_view path) {
  // Named members rather than a structured binding: clang 14 cannot capture bindings in lambdas.
  const auto parts = split(path);
  const std::string& section = parts.first;
  const std::string& name = parts.second;
  std::optional<std::string> best;
  std::size_t best_d = std::string::npos;
  auto consider = [&](const std::string& candidate, const std::string& candidate_name) {
    const std::size_t d = edit_distance(name, candidate_name);
    if (d < best_d) {
      best_d = d;
      best = candidate;
    }
  };
  if (section.empty()) {
    for (const auto& s : config_sections()) consider(s.name, s.name);
  } else {
    for (const auto& k : config_keys()) {
      const auto [ks, kn] = split(k.path);
      if (ks == section) consider(k.path, kn);
    }
  }
  // Sensible: at most about half the name changed.
  if (!best || best_d > std::max<std::size_t>(2, name.size() / 2 + 1)) return std::nullopt;
  return best;
}

std::vector<std::string> keys_missing_unit(std::string_view path) {
  std::vector<std::string> out;
  for (const auto& k : config_keys()) {
    if (k.path.size() <= path.size() || k.path.compare(0, path.size(), path) != 0) continue;
    const std::string rest = k.path.substr(path.size());
    if (std::find(unit_suffixes().begin(), unit_suffixes().end(), rest) != unit_suffixes().end()) out.push_back(k.path);
  }
  return out;
}

namespace {
std::string range_text(const KeySpec& k, const char* sep = " | ") {
  std::ostringstream os;
  if (k.min && k.max) {
    os << (k.min_exclusive ? "(" : "[") << *k.min << ", " << *k.max << "]";
  } else if (k.min) {
    os << (k.min_exclusive ? "> " : "≥ ") << *k.min;
  } else if (k.max) {
    os << "≤ " << *k.max;
  }
  if (!k.choices.empty()) {
    for (std::size_t i = 0; i < k.choices.size(); ++i) os << (i ? sep : "") << k.choices[i];
  }
  return os.str();
}
std::string need_text(Need n) {
  switch (n) {
    case Need::kRequired: return "required";
    case Need::kOptional: return "optional";
    case Need::kConditional: return "conditional";
  }
  return "";
}
}  // namespace

std::string explain(const KeySpec& k) {
  std::ostringstream os;
  const auto [section, name] = split(k.path);
  const bool array = section.size() > 2 && section.substr(section.size() - 2) == "[]";
  os << k.path << "\n"
     << "  section: " << (array ? "[[" + section.substr(0, section.size() - 2) + "]]" : "[" + section + "]") << "\n"
     << "  type:    " << to_string(k.type) << "\n";
  if (!k.unit.empty()) os << "  unit:    " << k.unit << "\n";
  const std::string range = range_text(k);
  if (!range.empty()) os << "  allowed: " << range << "\n";
  os << "  need:    " << need_text(k.need) << "\n";
  if (!k.default_value.empty()) os << "  default: " << k.default_value << "\n";
  os << "  meaning: " << k.meaning << "\n";
  return os.str();
}

std::string markdown_reference() {
  std::ostringstream os;
  for (const auto& s : config_sections()) {
    os << "### " << (s.array ? "[[" + s.name + "]]" : "[" + s.name + "]") << "\n\n" << s.meaning << "\n\n";
    os << "| key | type | unit | allowed | need | default | meaning |\n|---|---|---|---|---|---|---|\n";
    const std::string prefix = s.name + (s.array ? "[]." : ".");
    for (const auto& k : config_keys()) {
      if (k.path.compare(0, prefix.size(), prefix) != 0) continue;
      os << "| `" << k.path.substr(prefix.size()) << "` | " << to_string(k.type) << " | " << k.unit << " | "
         << range_text(k, ", ") << " | " << need_text(k.need) << " | " << k.default_value << " | " << k.meaning << " |\n";
    }
    os << "\n";
  }
  return os.str();
}

}  // namespace flyby::config
