// TOML → ScenarioConfig, and the cross-checks of check_scenario (see scenario_config.h).
#include "models/config/scenario_config.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <fstream>
#include <numbers>
#include <set>
#include <sstream>
#include <toml++/toml.h>

#include "engine/common/errors.h"
#include "engine/common/units.h"
#include "models/config/config_keys.h"
#include "models/geometry/dipole_emission.h"
#include "models/species/species.h"

namespace flyby::config {

std::vector<std::string> ScenarioConfig::channel_names() const {
  std::vector<std::string> v;
  for (const auto& d : detectors) v.push_back(d.channel);
  return v;
}

std::vector<std::string> ScenarioConfig::drive_names() const {
  std::vector<std::string> v;
  for (const auto& d : side_drives) v.push_back(d.name);
  for (const auto& d : resonator_drives) v.push_back(d.name);
  return v;
}

namespace {

std::string fmt(double x) {
  std::ostringstream os;
  os << x;
  return os.str();
}

// Reads one config; knows the file name for "FILE:LINE" prefixes.
class Reader {
 public:
  explicit Reader(std::string name) : name_(std::move(name)) {}

  std::string loc(const toml::node& n) const { return loc(n.source()); }
  std::string loc(const toml::source_region& r) const {
    std::ostringstream os;
    os << name_ << ":" << r.begin.line;
    return os.str();
  }
  [[noreturn]] void fail(const toml::node& n, const std::string& msg) const { throw InputError(loc(n) + ": " + msg); }

  // Unknown keys, types and ranges of every key in `t`, whose path prefix is `section`
  // ("atom" or "drive[]").
  void check_table(const toml::table& t, const std::string& section) const {
    for (const auto& [key, node] : t) {
      const std::string path = section + "." + std::string(key.str());
      const KeySpec* spec = find_key(path);
      if (!spec) {
        const auto missing = keys_missing_unit(path);
        if (!missing.empty()) {
          std::string alts;
          for (const auto& m : missing) alts += (alts.empty() ? "'" : " or '") + m + "'";
          fail(node, "'" + path + "' has no unit in its name; a bare number is not accepted, write " + alts);
        }
        std::string msg = "unknown key '" + path + "'";
        if (auto near = nearest_key(path)) msg += "; did you mean '" + *near + "'?";
        else msg += "; see `flyby config --list`";
        fail(node, msg);
      }
      check_value(*spec, node, path);
    }
  }

  void check_value(const KeySpec& spec, const toml::node& n, const std::string& path) const {
    auto bad_type = [&]() { fail(n, "'" + path + "' must be " + to_string(spec.type)); };
    auto number = [&](const toml::node& x) -> std::optional<double> {
      if (x.is_integer()) return static_cast<double>(*x.value<std::int64_t>());
      if (x.is_floating_point()) return *x.value<double>();
      return std::nullopt;
    };
    auto check_range = [&](double v) {
      if (!std::isfinite(v)) fail(n, "'" + path + "' must be finite");
      if (spec.min && (v < *spec.min || (spec.min_exclusive && v == *spec.min))) {
        fail(n, "'" + path + "' = " + fmt(v) + " is out of range: must be " + (spec.min_exclusive ? "> " : "≥ ") +
                    fmt(*spec.min) + (spec.max ? " and ≤ " + fmt(*spec.max) : ""));
      }
      if (spec.max && v > *spec.max) {
        fail(n, "'" + path + "' = " + fmt(v) + " is out of range: must be ≤ " + fmt(*spec.max));
      }
    };
    auto vec3 = [&](const toml::node& x) {
      const toml::array* a = x.as_array();
      if (!a || a->size() != 3) bad_type();
      for (const auto& e : *a) {
        auto v = number(e);
        if (!v || !std::isfinite(*v)) bad_type();
      }
    };
    switch (spec.type) {
      case KeyType::kString: {
        if (!n.is_string()) bad_type();
        const std::string s = *n.value<std::string>();
        if (!spec.choices.empty() && std::find(spec.choices.begin(), spec.choices.end(), s) == spec.choices.end()) {
          std::string alts;
          for (const auto& c : spec.choices) alts += (alts.empty() ? "" : ", ") + c;
          fail(n, "'" + path + "' = \"" + s + "\" is not allowed; choose one of: " + alts);
        }
        break;
      }
      case KeyType::kBool:
        if (!n.is_boolean()) bad_type();
        break;
      case KeyType::kNumber: {
        auto v = number(n);
        if (!v) bad_type();
        check_range(*v);
        break;
      }
      case KeyType::kInteger:
        if (!n.is_integer()) bad_type();
        check_range(static_cast<double>(*n.value<std::int64_t>()));
        break;
      case KeyType::kNumberList:
        if (auto v = number(n)) {
          check_range(*v);
        } else if (const toml::array* a = n.as_array(); a && !a->empty()) {
          for (const auto& e : *a) {
            auto x = number(e);
            if (!x) bad_type();
            check_range(*x);
          }
        } else {
          bad_type();
        }
        break;
      case KeyType::kVec3:
        vec3(n);
        break;
      case KeyType::kVec3List: {
        const toml::array* a = n.as_array();
        if (!a || a->empty()) bad_type();
        for (const auto& e : *a) vec3(e);
        break;
      }
      case KeyType::kMatrix3: {
        const toml::array* a = n.as_array();
        if (!a || a->size() != 3) bad_type();
        for (const auto& e : *a) vec3(e);
        break;
      }
      case KeyType::kJones: {
        const toml::array* a = n.as_array();
        if (!a || a->size() != 2) bad_type();
        for (const auto& e : *a) {
          const toml::array* c = e.as_array();
          if (!c || c->size() != 2 || !number((*c)[0]) || !number((*c)[1])) bad_type();
        }
        break;
      }
    }
  }

  // Typed access (types were checked by check_table).
  static std::optional<double> num(const toml::table& t, std::string_view key) {
    const toml::node* n = t.get(key);
    if (!n) return std::nullopt;
    if (n->is_integer()) return static_cast<double>(*n->value<std::int64_t>());
    return n->value<double>();
  }
  static std::optional<std::int64_t> integer(const toml::table& t, std::string_view key) {
    const toml::node* n = t.get(key);
    if (!n) return std::nullopt;
    return n->value<std::int64_t>();
  }
  static std::optional<std::string> str(const toml::table& t, std::string_view key) {
    const toml::node* n = t.get(key);
    if (!n) return std::nullopt;
    return n->value<std::string>();
  }
  static Vec3 to_vec3(const toml::node& n) {
    const toml::array& a = *n.as_array();
    Vec3 v;
    for (int i = 0; i < 3; ++i) v(i) = *num_of(a[i]);
    return v;
  }
  static std::optional<Vec3> vec3(const toml::table& t, std::string_view key) {
    const toml::node* n = t.get(key);
    if (!n) return std::nullopt;
    return to_vec3(*n);
  }
  static std::optional<double> num_of(const toml::node& n) {
    if (n.is_integer()) return static_cast<double>(*n.value<std::int64_t>());
    return n.value<double>();
  }
  static std::optional<std::array<geometry::Complex, 2>> jones(const toml::table& t, std::string_view key) {
    const toml::node* n = t.get(key);
    if (!n) return std::nullopt;
    const toml::array& a = *n->as_array();
    std::array<geometry::Complex, 2> j;
    for (int i = 0; i < 2; ++i) {
      const toml::array& c = *a[i].as_array();
      j[i] = geometry::Complex(*num_of(c[0]), *num_of(c[1]));
    }
    return j;
  }
  static std::vector<double> num_list(const toml::table& t, std::string_view key) {
    const toml::node* n = t.get(key);
    if (!n) return {};
    if (auto v = num_of(*n)) return {*v};
    std::vector<double> out;
    for (const auto& e : *n->as_array()) out.push_back(*num_of(e));
    return out;
  }

  // A required key of table t (section label for the message, e.g. "[resonator]").
  const toml::node& need(const toml::table& t, std::string_view key, const std::string& label) const {
    const toml::node* n = t.get(key);
    if (!n) throw InputError(loc(t.source()) + ": " + label + " is missing the required key '" + std::string(key) + "'");
    return *n;
  }
  double need_num(const toml::table& t, std::string_view key, const std::string& label) const {
    need(t, key, label);
    return *num(t, key);
  }
  std::string need_str(const toml::table& t, std::string_view key, const std::string& label) const {
    need(t, key, label);
    return *str(t, key);
  }
  // Key given where it does not apply (e.g. rabi_MHz on a resonator drive).
  void forbid(const toml::table& t, std::string_view key, const std::string& why) const {
    if (const toml::node* n = t.get(key)) {
      // Built with append: GCC 12 warns falsely (-Wrestrict, bug 105329) on "'" + std::string.
      std::string msg(1, '\'');
      msg.append(key).append("' ").append(why);
      fail(*n, msg);
    }
  }

  // 2F from a number that must be an integer or half-integer ≥ 0.
  int two_F(const toml::node& n, const std::string& what) const {
    const double v = *num_of(n);
    const double twice = 2.0 * v;
    if (std::abs(twice - std::round(twice)) > 1e-9) fail(n, what + " = " + fmt(v) + " is not an integer or half-integer");
    return static_cast<int>(std::lround(twice));
  }

 private:
  std::string name_;
};

geometry::PolarizationSpec read_polarization(const Reader& r, const toml::table& t, const std::string& label) {
  geometry::PolarizationSpec p;
  const std::string kind = Reader::str(t, "polarization").value_or("linear");
  p.kind = *geometry::polarization_kind_from_string(kind);
  if (auto d = Reader::vec3(t, "polarization_dir")) p.linear_dir = *d;
  p.linear_angle_deg = Reader::num(t, "polarization_angle_deg").value_or(0.0);
  if (auto e = Reader::vec3(t, "jones_e1_dir")) p.e1_dir = *e;
  if (p.kind == geometry::PolarizationKind::kJones) {
    r.need(t, "polarization_jones", label + " with polarization = \"jones\"");
    p.jones = *Reader::jones(t, "polarization_jones");
  } else {
    r.forbid(t, "polarization_jones", "is only used with polarization = \"jones\"");
  }
  if (p.kind != geometry::PolarizationKind::kLinear) {
    r.forbid(t, "polarization_dir", "is only used with polarization = \"linear\"");
    r.forbid(t, "polarization_angle_deg", "is only used with polarization = \"linear\"");
  } else if (t.get("polarization_dir") && t.get("polarization_angle_deg")) {
    r.fail(*t.get("polarization_angle_deg"), "give polarization_dir or polarization_angle_deg, not both");
  }
  return p;
}

void read_atom(const Reader& r, const toml::table& t, ScenarioConfig& sc) {
  const std::string label = "[atom]";
  const std::string species = r.need_str(t, "species", label);
  std::vector<int> g2, e2;
  r.need(t, "ground_F", label);
  r.need(t, "excited_F", label);
  auto list_2F = [&](std::string_view key) {
    std::vector<int> out;
    const toml::node& n = *t.get(key);
    if (n.is_array()) {
      for (const auto& e : *n.as_array()) out.push_back(r.two_F(e, "atom." + std::string(key)));
    } else {
      out.push_back(r.two_F(n, "atom." + std::string(key)));
    }
    return out;
  };
  g2 = list_2F("ground_F");
  e2 = list_2F("excited_F");
  AtomConfig& a = sc.atom;
  static const char* kCustomKeys[] = {"gamma_MHz", "wavelength_nm", "ground_gF", "excited_gF", "mass_u"};
  if (species == "custom") {
    a.custom = true;
    if (g2.size() != 1 || e2.size() != 1) r.fail(t, "a custom atom has exactly one ground_F and one excited_F");
    a.custom_atom.ground_2F = g2[0];
    a.custom_atom.excited_2F = e2[0];
    a.custom_atom.gamma_MHz = r.need_num(t, "gamma_MHz", "[atom] with species = \"custom\"");
    a.custom_atom.wavelength_nm = r.need_num(t, "wavelength_nm", "[atom] with species = \"custom\"");
    a.custom_atom.ground_gF = r.need_num(t, "ground_gF", "[atom] with species = \"custom\"");
    a.custom_atom.excited_gF = r.need_num(t, "excited_gF", "[atom] with species = \"custom\"");
    a.custom_mass_u = Reader::num(t, "mass_u");
    r.forbid(t, "line", "does not apply to a custom atom");
    r.forbid(t, "ground_zeeman", "does not apply to a custom atom (linear Zeeman)");
  } else {
    for (const char* k : kCustomKeys) r.forbid(t, k, "is only for species = \"custom\" (named species use handbook data)");
    a.request.species = species;
    a.request.line = Reader::str(t, "line").value_or("D2") == "D1" ? levels::Line::kD1 : levels::Line::kD2;
    a.request.ground_2F = g2;
    a.request.excited_2F = e2;
    a.request.ground_zeeman = Reader::str(t, "ground_zeeman").value_or("linear") == "breit_rabi"
                                  ? levels::GroundZeeman::kBreitRabi
                                  : levels::GroundZeeman::kLinear;
  }
  a.reference_ground_2F = g2.front();
  a.reference_excited_2F = *std::max_element(e2.begin(), e2.end());
  if (const toml::node* n = t.get("reference_ground_F")) {
    a.reference_ground_2F = r.two_F(*n, "atom.reference_ground_F");
    if (std::find(g2.begin(), g2.end(), a.reference_ground_2F) == g2.end()) {
      r.fail(*n, "atom.reference_ground_F must be one of atom.ground_F");
    }
  }
  if (const toml::node* n = t.get("reference_excited_F")) {
    a.reference_excited_2F = r.two_F(*n, "atom.reference_excited_F");
    if (std::find(e2.begin(), e2.end(), a.reference_excited_2F) == e2.end()) {
      r.fail(*n, "atom.reference_excited_F must be one of atom.excited_F");
    }
  }
}

void read_resonator(const Reader& r, const toml::table& t, ScenarioConfig& sc) {
  const std::string label = "[resonator]";
  resonator::ResonatorSpec s;
  s.length_mm = r.need_num(t, "length_mm", label);
  s.waist_um = r.need_num(t, "waist_um", label);
  s.kappa_MHz = Reader::num(t, "kappa_MHz");
  s.finesse = Reader::num(t, "finesse_ratio");
  if (s.kappa_MHz.has_value() == s.finesse.has_value()) {
    if (s.kappa_MHz) r.fail(*t.get("finesse_ratio"), "give resonator.kappa_MHz or resonator.finesse_ratio, not both");
    throw InputError(r.loc(t.source()) + ": [resonator] needs one of 'kappa_MHz' and 'finesse_ratio'");
  }
  s.g0_MHz = Reader::num(t, "g0_MHz");
  s.mode1_angle_deg = Reader::num(t, "mode1_angle_deg").value_or(0.0);
  s.splitting_MHz = Reader::num(t, "splitting_MHz").value_or(0.0);
  s.detuning_MHz = Reader::num(t, "detuning_MHz").value_or(0.0);
  s.output_mirror_fraction = Reader::num(t, "output_mirror_fraction").value_or(1.0);
  s.fock_cutoff = static_cast<int>(Reader::integer(t, "fock_cutoff_count").value_or(2));
  s.standing_wave = Reader::str(t, "mode_shape").value_or("standing") == "standing";
  s.displaced_frame = Reader::str(t, "field_frame").value_or("displaced") == "displaced";
  sc.resonator = s;
}

void read_drive(const Reader& r, const toml::table& t, ScenarioConfig& sc) {
  const std::string name = r.need_str(t, "name", "[[drive]]");
  const std::string label = "[[drive]] '" + name + "'";
  const std::string kind = r.need_str(t, "kind", label);
  sc.where["drive:" + name] = r.loc(t.source());
  if (kind == "side") {
    for (const char* k : {"mode_index", "amplitude_MHz", "empty_mean_photons_count"}) {
      r.forbid(t, k, "is only for kind = \"resonator\"");
    }
    drives::SideDrive d;
    d.name = name;
    r.need(t, "direction_dir", label);
    d.direction = *Reader::vec3(t, "direction_dir");
    d.focus_um = Reader::vec3(t, "focus_um").value_or(Vec3::Zero());
    d.polarization = read_polarization(r, t, label);
    d.waist_um = r.need_num(t, "waist_um", label);
    d.rabi_MHz = Reader::num(t, "rabi_MHz");
    d.intensity_mW_per_cm2 = Reader::num(t, "intensity_mW_per_cm2");
    if (d.rabi_MHz.has_value() == d.intensity_mW_per_cm2.has_value()) {
      throw InputError(r.loc(t.source()) + ": " + label + " needs exactly one of 'rabi_MHz' and 'intensity_mW_per_cm2'");
    }
    d.detuning_MHz = Reader::num(t, "detuning_MHz").value_or(0.0);
    sc.side_drives.push_back(std::move(d));
  } else {
    for (const char* k : {"direction_dir", "focus_um", "polarization", "polarization_dir", "polarization_angle_deg",
                          "polarization_jones", "jones_e1_dir", "waist_um", "rabi_MHz", "intensity_mW_per_cm2"}) {
      r.forbid(t, k, "is only for kind = \"side\" (a resonator drive has the mode's shape and polarization)");
    }
    drives::ResonatorDrive d;
    d.name = name;
    d.mode = static_cast<int>(Reader::integer(t, "mode_index").value_or(1)) - 1;
    d.amplitude_MHz = Reader::num(t, "amplitude_MHz");
    d.empty_mean_photons = Reader::num(t, "empty_mean_photons_count");
    if (d.amplitude_MHz.has_value() == d.empty_mean_photons.has_value()) {
      throw InputError(r.loc(t.source()) + ": " + label +
                       " needs exactly one of 'amplitude_MHz' and 'empty_mean_photons_count'");
    }
    d.detuning_MHz = Reader::num(t, "detuning_MHz").value_or(0.0);
    sc.resonator_drives.push_back(std::move(d));
  }
}

void read_channel(const Reader& r, const toml::table& t, ScenarioConfig& sc, std::vector<resonator::OutputPort>& ports) {
  const std::string name = r.need_str(t, "name", "[[channel]]");
  const std::string label = "[[channel]] '" + name + "'";
  // Record channel names (records/record_format.h): 1–64 characters of [A-Za-z0-9_.+-].
  const bool name_ok = !name.empty() && name.size() <= 64 &&
                       std::all_of(name.begin(), name.end(), [](char ch) {
                         return std::isalnum(static_cast<unsigned char>(ch)) || ch == '_' || ch == '.' || ch == '+' ||
                                ch == '-';
                       });
  if (!name_ok) r.fail(*t.get("name"), "channel name '" + name + "' must be 1-64 characters of A-Z a-z 0-9 _ . + -");
  const std::string src = r.need_str(t, "source", label);
  sc.where["channel:" + name] = r.loc(t.source());
  const double eff = Reader::num(t, "efficiency_fraction").value_or(1.0);
  if (src == "resonator") {
    for (const char* k : {"direction_dir", "solid_angle_sr", "jones_e1_dir", "polarization_dir"}) {
      r.forbid(t, k, "is only for source = \"free_space\" (the resonator output travels along +z, Jones basis x, y)");
    }
    if (Reader::str(t, "polarization").value_or("linear") == "unpolarized") {
      r.fail(*t.get("polarization"), "a resonator channel is a port of a polarization analyzer; "
                                     "'unpolarized' is only for free-space detectors");
    }
    resonator::OutputPort p;
    p.channel = name;
    p.analyzer = Reader::str(t, "analyzer").value_or("analyzer");
    p.polarization = read_polarization(r, t, label);
    p.efficiency = eff;
    ports.push_back(std::move(p));
  } else {
    r.forbid(t, "analyzer", "is only for source = \"resonator\"");
    FreeSpaceDetector d;
    d.channel = name;
    r.need(t, "direction_dir", label);
    d.direction = *Reader::vec3(t, "direction_dir");
    d.solid_angle_sr = r.need_num(t, "solid_angle_sr", label);
    d.efficiency = eff;
    if (Reader::str(t, "polarization").value_or("linear") != "unpolarized") {
      d.polarization = read_polarization(r, t, label);
    } else {
      for (const char* k : {"polarization_dir", "polarization_angle_deg", "polarization_jones"}) {
        r.forbid(t, k, "does not apply to an unpolarized detector");
      }
    }
    sc.free_space_detectors.push_back(std::move(d));
  }
  DetectorParams dp;
  dp.channel = name;
  dp.dead_time_ns = Reader::num(t, "dead_time_ns").value_or(0.0);
  dp.paralyzable = Reader::str(t, "dead_time_model").value_or("non-paralyzable") == "paralyzable";
  dp.jitter_fwhm_ps = Reader::num(t, "jitter_fwhm_ps").value_or(0.0);
  dp.dark_rate_per_s = Reader::num(t, "dark_rate_per_s").value_or(0.0);
  dp.afterpulse_probability = Reader::num(t, "afterpulse_fraction").value_or(0.0);
  dp.afterpulse_delay_ns = Reader::num(t, "afterpulse_delay_ns").value_or(0.0);
  dp.afterpulse_time_constant_ns = Reader::num(t, "afterpulse_time_constant_ns").value_or(0.0);
  dp.cable_delay_ns = Reader::num(t, "cable_delay_ns").value_or(0.0);
  for (const auto& other : sc.detectors) {
    if (other.channel == name) r.fail(*t.get("name"), "channel name '" + name + "' is used twice");
  }
  sc.detectors.push_back(dp);
}

void read_source(const Reader& r, const toml::table& t, ScenarioConfig& sc) {
  const std::string kind = r.need_str(t, "kind", "[source]");
  static const char* kBeamKeys[] = {"speed_distribution", "oven_temperature_K", "speed_m_per_s", "speed_spread_m_per_s",
                                    "direction_dir", "tilt_deg", "transverse_profile", "slit_width_um",
                                    "transverse_sigma_um", "offset_um", "axial_extent_um", "divergence_mrad",
                                    "flux_per_s", "mean_atoms_in_mode_count"};
  if (kind == "stationary") {
    sc.source.kind = SourceKind::kStationary;
    for (const char* k : kBeamKeys) r.forbid(t, k, "is only for kind = \"beam\"");
    const toml::node& n = r.need(t, "positions_um", "[source] with kind = \"stationary\"");
    for (const auto& e : *n.as_array()) sc.source.positions_um.push_back(Reader::to_vec3(e));
    return;
  }
  r.forbid(t, "positions_um", "is only for kind = \"stationary\"");
  sc.source.kind = SourceKind::kBeam;
  source::BeamSpec& b = sc.source.beam;
  const std::string dist = Reader::str(t, "speed_distribution").value_or("effusive");
  b.speed.kind = *source::speed_kind_from_string(dist);
  const std::string label = "[source] with speed_distribution = \"" + dist + "\"";
  if (b.speed.kind == source::SpeedKind::kEffusive) {
    b.speed.oven_temperature_K = r.need_num(t, "oven_temperature_K", label);
    r.forbid(t, "speed_m_per_s", "is not used by an effusive beam (the oven temperature sets the speeds)");
    r.forbid(t, "speed_spread_m_per_s", "is not used by an effusive beam");
  } else {
    b.speed.speed_m_per_s = r.need_num(t, "speed_m_per_s", label);
    b.speed.spread_m_per_s = Reader::num(t, "speed_spread_m_per_s").value_or(0.0);
    r.forbid(t, "oven_temperature_K", "is only used by an effusive beam");
    if (b.speed.kind == source::SpeedKind::kMonochromatic) {
      r.forbid(t, "speed_spread_m_per_s", "is only used by a gaussian speed distribution");
    }
  }
  b.direction = Reader::vec3(t, "direction_dir").value_or(Vec3::UnitX());
  b.tilt_deg = Reader::num(t, "tilt_deg").value_or(0.0);
  const std::string prof = Reader::str(t, "transverse_profile").value_or("slit");
  b.profile = *source::transverse_profile_from_string(prof);
  if (b.profile == source::TransverseProfile::kSlit) {
    b.slit_width_um = r.need_num(t, "slit_width_um", "[source] with transverse_profile = \"slit\"");
    r.forbid(t, "transverse_sigma_um", "is only for transverse_profile = \"gaussian\"");
  } else {
    b.sigma_um = r.need_num(t, "transverse_sigma_um", "[source] with transverse_profile = \"gaussian\"");
    r.forbid(t, "slit_width_um", "is only for transverse_profile = \"slit\"");
  }
  b.offset_um = Reader::num(t, "offset_um").value_or(0.0);
  b.axial_extent_um = Reader::num(t, "axial_extent_um").value_or(100.0);
  b.divergence_mrad = Reader::num(t, "divergence_mrad").value_or(0.0);
  b.flux_per_s = Reader::num(t, "flux_per_s");
  b.mean_atoms_in_mode = Reader::num(t, "mean_atoms_in_mode_count");
  if (b.flux_per_s.has_value() == b.mean_atoms_in_mode.has_value()) {
    throw InputError(r.loc(t.source()) + ": [source] needs exactly one of 'flux_per_s' and 'mean_atoms_in_mode_count'");
  }
}

void read_population(const Reader& r, const toml::table& t, ScenarioConfig& sc) {
  source::SublevelPopulation p;
  p.two_F = r.two_F(r.need(t, "ground_F", "[[population]]"), "population.ground_F");
  p.two_m = r.two_F(r.need(t, "m_F", "[[population]]"), "population.m_F");
  p.probability = r.need_num(t, "probability_fraction", "[[population]]");
  sc.source.populations.sublevels.push_back(p);
}

void read_feedback(const Reader& r, const toml::table& t, ScenarioConfig& sc) {
  feedback::FeedbackRule f;
  f.name = Reader::str(t, "name").value_or("rule" + std::to_string(sc.feedback.size() + 1));
  const std::string label = "[[feedback]] '" + f.name + "'";
  sc.where["feedback:" + f.name] = r.loc(t.source());
  f.trigger_channel = r.need_str(t, "trigger_channel", label);
  f.drive = r.need_str(t, "drive", label);
  f.latency_ns = Reader::num(t, "latency_ns").value_or(0.0);
  f.level = r.need_num(t, "level_ratio", label);
  f.duration_ns = r.need_num(t, "duration_ns", label);
  f.holdoff_ns = Reader::num(t, "holdoff_ns").value_or(f.latency_ns + f.duration_ns);
  sc.feedback.push_back(std::move(f));
}

void read_run(const Reader& r, const toml::table& t, ScenarioConfig& sc) {
  RunConfig& run = sc.run;
  run.duration_s = r.need_num(t, "duration_s", "[run]");
  run.seed = static_cast<std::uint64_t>(Reader::integer(t, "seed_id").value_or(1));
  run.interaction_cutoff = Reader::num(t, "interaction_cutoff_fraction").value_or(1e-3);
  run.max_cluster_dimension = Reader::integer(t, "max_cluster_dimension_count").value_or(20000);
  if (auto k = Reader::integer(t, "max_excitation_count")) run.max_excitation = int(*k);
  if (auto m = Reader::str(t, "cluster_method")) run.cluster_method = cluster_method_from_string(*m);
  run.relative_tolerance = Reader::num(t, "relative_tolerance_fraction").value_or(1e-6);
  run.arrival_block_us = Reader::num(t, "arrival_block_us").value_or(100.0);
  run.tagger_resolution_ps = Reader::num(t, "tagger_resolution_ps").value_or(1.0);
  run.tagger_max_rate_per_s = Reader::num(t, "tagger_max_rate_per_s");
}

}  // namespace

const char* to_string(ClusterMethodChoice c) {
  switch (c) {
    case ClusterMethodChoice::kAuto: return "auto";
    case ClusterMethodChoice::kExact: return "exact";
    case ClusterMethodChoice::kTruncated: return "truncated";
    case ClusterMethodChoice::kEliminated: return "eliminated";
    case ClusterMethodChoice::kIndependent: return "independent";
  }
  return "auto";
}

ClusterMethodChoice cluster_method_from_string(const std::string& name) {
  for (auto c : {ClusterMethodChoice::kAuto, ClusterMethodChoice::kExact, ClusterMethodChoice::kTruncated,
                 ClusterMethodChoice::kEliminated, ClusterMethodChoice::kIndependent})
    if (name == to_string(c)) return c;
  throw InputError("run.cluster_method: unknown method '" + name +
                   "' (choose auto, exact, truncated, eliminated or independent)");
}

ScenarioConfig parse_config(std::string_view text, std::string_view source_name) {
  const std::string name(source_name);
  Reader r(name);
  toml::table root;
  try {
    root = toml::parse(text, name);
  } catch (const toml::parse_error& e) {
    std::ostringstream os;
    os << name << ":" << e.source().begin.line << ": TOML syntax error: " << e.description();
    throw InputError(os.str());
  }
  ScenarioConfig sc;
  sc.source_name = name;
  sc.text = std::string(text);

  // Sections: known names, right shape (table vs array of tables), known keys.
  for (const auto& [key, node] : root) {
    const std::string k(key.str());
    const SectionSpec* s = find_section(k);
    if (!s) {
      std::string msg = "unknown section '" + k + "'";
      if (auto near = nearest_key(k)) msg += "; did you mean '" + *near + "'?";
      r.fail(node, msg);
    }
    if (s->array) {
      const toml::array* a = node.as_array();
      if (!a || !a->is_array_of_tables()) r.fail(node, "'" + k + "' must be an array of tables: write [[" + k + "]]");
      for (const auto& e : *a) r.check_table(*e.as_table(), k + "[]");
    } else {
      const toml::table* t = node.as_table();
      if (!t) r.fail(node, "'" + k + "' must be a table: write [" + k + "]");
      r.check_table(*t, k);
    }
  }
  auto table = [&](const char* k) { return root.get_as<toml::table>(k); };
  auto array = [&](const char* k) { return root.get_as<toml::array>(k); };
  for (const char* required : {"atom", "source", "run"}) {
    if (!table(required)) throw InputError(name + ": missing required section [" + std::string(required) + "]");
  }
  sc.where["atom"] = r.loc(table("atom")->source());
  read_atom(r, *table("atom"), sc);
  if (const toml::table* f = table("field")) {
    sc.where["field"] = r.loc(f->source());
    sc.field.field_G = Reader::vec3(*f, "B_G").value_or(Vec3::Zero());
    sc.field.axis_when_zero = Reader::vec3(*f, "axis_when_zero_dir").value_or(Vec3::UnitZ());
    if (const toml::node* g = f->get("gradient_G_per_mm")) {
      Eigen::Matrix3d m;
      for (int i = 0; i < 3; ++i) m.row(i) = Reader::to_vec3((*g->as_array())[i]).transpose();
      const double scale = std::max(m.cwiseAbs().maxCoeff(), 1e-300);
      if ((m - m.transpose()).cwiseAbs().maxCoeff() > 1e-9 * scale) {
        r.fail(*g, "field.gradient_G_per_mm is not symmetric: a static field in vacuum has curl B = 0");
      }
      if (std::abs(m.trace()) > 1e-9 * scale) {
        r.fail(*g, "field.gradient_G_per_mm has nonzero trace: div B = 0 requires ∂Bx/∂x + ∂By/∂y + ∂Bz/∂z = 0");
      }
      if (sc.field.field_G.norm() == 0.0) {
        r.fail(*g, "field.gradient_G_per_mm needs a nonzero field.B_G (the gradient is taken along B)");
      }
      sc.field.gradient_G_per_mm = m;
    }
  }
  if (const toml::table* t = table("resonator")) {
    sc.where["resonator"] = r.loc(t->source());
    read_resonator(r, *t, sc);
  }
  if (const toml::array* a = array("drive")) {
    for (const auto& e : *a) read_drive(r, *e.as_table(), sc);
  }
  std::vector<resonator::OutputPort> ports;
  if (const toml::array* a = array("channel")) {
    for (const auto& e : *a) read_channel(r, *e.as_table(), sc, ports);
  }
  if (!ports.empty()) {
    if (!sc.resonator) {
      throw InputError(sc.where["channel:" + ports.front().channel] + ": [[channel]] '" +
                       ports.front().channel + "' has source = \"resonator\" but there is no [resonator]");
    }
    sc.resonator->outputs = ports;
  }
  sc.where["source"] = r.loc(table("source")->source());
  read_source(r, *table("source"), sc);
  if (const toml::array* a = array("population")) {
    if (!a->empty()) sc.where["population"] = r.loc((*a)[0].source());
    for (const auto& e : *a) read_population(r, *e.as_table(), sc);
  }
  if (const toml::array* a = array("feedback")) {
    for (const auto& e : *a) read_feedback(r, *e.as_table(), sc);
  }
  sc.where["run"] = r.loc(table("run")->source());
  read_run(r, *table("run"), sc);

  // Names must be unique across drives (feedback refers to them).
  std::set<std::string> seen;
  for (const auto& d : sc.drive_names()) {
    if (!seen.insert(d).second) throw InputError(sc.where["drive:" + d] + ": drive name '" + d + "' is used twice");
  }
  return sc;
}

ScenarioConfig load_config_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError(path + ": cannot open the config file");
  std::ostringstream ss;
  ss << in.rdbuf();
  return parse_config(ss.str(), path);
}

}  // namespace flyby::config
