// `flyby levels`: prints the level structure flyby builds for an atom — each hyperfine level's
// F, g_F and sublevel shifts in a magnetic field, the relative strengths S_FF′ and the
// branching ratios of each excited F′ (including decay to ground levels outside the model,
// shown as loss) — as a readable table or as JSON (--json).
#include <cmath>
#include <numbers>
#include <cstdio>
#include <iomanip>
#include <iostream>
#include <memory>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "engine/common/errors.h"
#include "engine/common/provenance.h"
#include "models/levels/level_structure.h"
#include "models/species/species.h"
#include "tools/flyby/commands.h"

namespace {

using flyby::InputError;
using flyby::levels::LevelStructure;

struct LevelsArgs {
  std::string species;                      // species name; empty → custom atom
  std::string line = "D2";                  // D1 or D2
  std::vector<std::string> ground;          // ground F values ("2", "3/2", "1.5")
  std::vector<std::string> excited;         // excited F′ values
  double field_G = 0.0;                     // magnetic field, gauss
  bool breit_rabi = false;                  // Breit–Rabi energies for the ground levels
  bool json = false;                        // print JSON instead of tables
  std::optional<std::string> custom_ground_F, custom_excited_F;
  std::optional<double> custom_ground_gF, custom_excited_gF, custom_gamma_MHz, custom_wavelength_nm;
};

// "2" / "3/2" / "1.5" → 2F; throws InputError naming the flag.
int parse_two_F(const std::string& text, const std::string& flag) {
  const auto bad = [&] {
    return InputError(flag + ": '" + text + "' is not an angular momentum (use e.g. 2, 3/2 or 1.5)");
  };
  try {
    std::size_t pos = 0;
    if (const auto slash = text.find('/'); slash != std::string::npos) {
      const int num = std::stoi(text.substr(0, slash), &pos);
      if (pos != slash || text.substr(slash + 1) != "2" || num < 0 || num % 2 == 0) throw bad();
      return num;
    }
    const double v = std::stod(text, &pos);
    if (pos != text.size() || !(v >= 0) || std::abs(2 * v - std::round(2 * v)) > 1e-9 || v > 1000) throw bad();
    return static_cast<int>(std::lround(2 * v));
  } catch (const InputError&) {
    throw;
  } catch (const std::exception&) {
    throw bad();
  }
}

std::vector<int> parse_list(const std::vector<std::string>& items, const std::string& flag) {
  std::vector<int> v;
  for (const auto& s : items) v.push_back(parse_two_F(s, flag));
  return v;
}

std::string half(int two_x) {
  return two_x % 2 == 0 ? std::to_string(two_x / 2) : std::to_string(two_x) + "/2";
}

// Value for JSON: an integer when 2x is even, else x as a double.
nlohmann::json half_json(int two_x) {
  if (two_x % 2 == 0) return two_x / 2;
  return two_x / 2.0;
}

// A small fraction p/q (q ≤ 1000) equal to x within 1e-12, for display of exact strengths.
std::string as_fraction(double x) {
  if (x == 0.0) return "0";
  for (int q = 1; q <= 1000; ++q) {
    const double p = std::round(x * q);
    if (std::abs(p / q - x) < 1e-12) {
      return q == 1 ? std::to_string(static_cast<long>(p)) : std::to_string(static_cast<long>(p)) + "/" + std::to_string(q);
    }
  }
  return "";
}

LevelStructure build(const LevelsArgs& a) {
  if (!std::isfinite(a.field_G) || a.field_G < 0) {
    std::ostringstream os;
    os << "--field-G must be a finite number >= 0 (gauss), got " << a.field_G;
    throw InputError(os.str());
  }
  const bool custom = a.custom_ground_F || a.custom_excited_F || a.custom_ground_gF || a.custom_excited_gF ||
                      a.custom_gamma_MHz || a.custom_wavelength_nm;
  if (custom) {
    if (!a.species.empty()) throw InputError("give either --species or the --custom-* options, not both");
    if (!a.ground.empty() || !a.excited.empty()) {
      throw InputError("--ground/--excited are for --species; a custom atom uses --custom-ground-F/--custom-excited-F");
    }
    if (a.breit_rabi) throw InputError("--breit-rabi needs --species (a custom atom has no hyperfine constants)");
    if (!a.custom_ground_F || !a.custom_excited_F || !a.custom_ground_gF || !a.custom_excited_gF ||
        !a.custom_gamma_MHz || !a.custom_wavelength_nm) {
      throw InputError(
          "a custom atom needs all of --custom-ground-F, --custom-excited-F, --custom-ground-gF, "
          "--custom-excited-gF, --custom-gamma-MHz, --custom-wavelength-nm");
    }
    flyby::levels::CustomAtom atom;
    atom.ground_2F = parse_two_F(*a.custom_ground_F, "--custom-ground-F");
    atom.excited_2F = parse_two_F(*a.custom_excited_F, "--custom-excited-F");
    atom.ground_gF = *a.custom_ground_gF;
    atom.excited_gF = *a.custom_excited_gF;
    atom.gamma_MHz = *a.custom_gamma_MHz;
    atom.wavelength_nm = *a.custom_wavelength_nm;
    atom.field_G = a.field_G;
    return LevelStructure::from_custom(atom);
  }
  if (a.species.empty()) {
    std::string names;
    for (const auto& n : flyby::species::names()) names += (names.empty() ? "" : ", ") + n;
    throw InputError("give --species (one of " + names + ") or a custom atom (--custom-*)");
  }
  const auto& sp = flyby::species::lookup(a.species);
  const auto line = flyby::species::line_from_string(a.line);
  flyby::levels::LevelRequest req;
  req.species = sp.name;
  req.line = line == flyby::species::LineId::kD1 ? flyby::levels::Line::kD1 : flyby::levels::Line::kD2;
  // Omitted lists mean "all levels of the line".
  req.ground_2F = a.ground.empty() ? LevelStructure::allowed_2F(sp.two_I, 1) : parse_list(a.ground, "--ground");
  req.excited_2F = a.excited.empty() ? LevelStructure::allowed_2F(sp.two_I, sp.line(line).two_Jp)
                                     : parse_list(a.excited, "--excited");
  req.field_G = a.field_G;
  req.ground_zeeman = a.breit_rabi ? flyby::levels::GroundZeeman::kBreitRabi : flyby::levels::GroundZeeman::kLinear;
  return LevelStructure::from_species(req);
}

double shift_MHz(const flyby::levels::Sublevel& s) { return s.energy_rad_per_us / (2.0 * std::numbers::pi); }

nlohmann::json to_json(const LevelStructure& ls, const LevelsArgs& a) {
  using nlohmann::json;
  json j;
  const auto prov = flyby::current_provenance();
  j["flyby_version"] = prov.version;
  j["command_line"] = prov.command_line;
  j["atom"] = ls.label();
  j["species"] = a.species.empty() ? json(nullptr) : json(a.species);
  j["I"] = half_json(ls.two_I());
  j["J"] = half_json(ls.two_J());
  j["Jp"] = half_json(ls.two_Jp());
  j["field_G"] = ls.field_G();
  j["ground_zeeman"] = ls.ground_zeeman() == flyby::levels::GroundZeeman::kBreitRabi ? "breit-rabi" : "linear";
  j["wavelength_nm"] = ls.wavelength_nm();
  j["gamma_MHz"] = ls.gamma_rad_per_us() / (2.0 * std::numbers::pi);
  j["reduced_dipole_C_m"] = ls.reduced_dipole_C_m();
  j["notes"] = ls.notes();
  j["shift_reference"] = "J centroid (hyperfine-free energy) of each level's own J manifold";
  j["ground"] = json::array();
  j["excited"] = json::array();
  for (const auto& h : ls.hyperfine_levels()) {
    json lv;
    lv["F"] = half_json(h.two_F);
    lv["gF"] = h.gF;
    lv["hyperfine_shift_MHz"] = h.hyperfine_shift_MHz;
    json ms = json::array(), shifts = json::array(), loss = json::array();
    for (int i = 0; i < ls.dimension(); ++i) {
      const auto& s = ls.sublevels()[i];
      if (s.excited != h.excited || s.two_F != h.two_F) continue;
      ms.push_back(half_json(s.two_m));
      shifts.push_back(shift_MHz(s));
      loss.push_back(ls.loss_fraction(i));
    }
    lv["m"] = ms;
    lv["shift_MHz"] = shifts;
    if (h.excited) lv["loss_fraction"] = loss;
    (h.excited ? j["excited"] : j["ground"]).push_back(lv);
  }
  j["strengths"] = json::array();
  for (const auto& s : ls.strengths()) {
    j["strengths"].push_back({{"F", half_json(s.ground_2F)}, {"Fp", half_json(s.excited_2F)}, {"S", s.S}});
  }
  j["branching"] = json::array();
  for (const auto& b : ls.branching()) {
    j["branching"].push_back({{"Fp", half_json(b.excited_2F)},
                              {"F", half_json(b.ground_2F)},
                              {"fraction", b.fraction},
                              {"in_model", b.in_model}});
  }
  return j;
}

void print_table(const LevelStructure& ls, std::ostream& os) {
  os << std::fixed;
  os << ls.label();
  if (ls.two_I() > 0) os << "   I = " << half(ls.two_I()) << ", J = " << half(ls.two_J()) << " -> J' = " << half(ls.two_Jp());
  os << "\n";
  os << "  vacuum wavelength " << std::setprecision(6) << ls.wavelength_nm() << " nm, Gamma/2pi = "
     << std::setprecision(4) << ls.gamma_rad_per_us() / (2.0 * std::numbers::pi) << " MHz, field " << ls.field_G() << " G, "
     << (ls.ground_zeeman() == flyby::levels::GroundZeeman::kBreitRabi ? "Breit-Rabi ground levels" : "linear Zeeman")
     << "\n";
  os << "  shift: energy/h from the centroid of the level's J manifold; Zeeman: shift minus the\n"
     << "  zero-field hyperfine shift (g_F muB m B when linear)\n\n";

  for (const auto& h : ls.hyperfine_levels()) {
    os << (h.excited ? "excited F'=" : "ground  F=") << half(h.two_F) << "   g_F = " << std::showpos << std::setprecision(7)
       << h.gF << "   hyperfine shift " << std::setprecision(4) << h.hyperfine_shift_MHz << " MHz" << std::noshowpos
       << "\n";
    os << "      m      shift/MHz     Zeeman/MHz" << (h.excited ? "   loss" : "") << "\n";
    for (int i = 0; i < ls.dimension(); ++i) {
      const auto& s = ls.sublevels()[i];
      if (s.excited != h.excited || s.two_F != h.two_F) continue;
      os << std::setw(7) << half(s.two_m) << std::showpos << std::setw(15) << std::setprecision(6) << shift_MHz(s)
         << std::setw(15) << std::setprecision(6) << shift_MHz(s) - h.hyperfine_shift_MHz << std::noshowpos;
      if (h.excited) os << std::setw(10) << std::setprecision(6) << ls.loss_fraction(i);
      os << "\n";
    }
    os << "\n";
  }

  os << "relative strengths S_FF' (sum over all F' of the line = 1 for each F)\n";
  os << "     F  ->  F'          S\n";
  for (const auto& s : ls.strengths()) {
    os << std::setw(6) << half(s.ground_2F) << "  ->" << std::setw(4) << half(s.excited_2F) << std::setw(12)
       << std::setprecision(6) << s.S << "  " << as_fraction(s.S) << "\n";
  }
  os << "\nbranching ratios (zero field): fraction of the decay of each excited F' into each ground F\n";
  os << "    F'  ->  F    fraction\n";
  int last = -1;
  double loss = 0.0;
  auto flush_loss = [&] {
    if (last >= 0) {
      os << "    F'=" << half(last) << " loss (ground levels not in the model): " << std::setprecision(6) << loss << "\n";
    }
  };
  for (const auto& b : ls.branching()) {
    if (b.excited_2F != last) {
      flush_loss();
      last = b.excited_2F;
      loss = 0.0;
    }
    if (!b.in_model) loss += b.fraction;
    os << std::setw(6) << half(b.excited_2F) << "  ->" << std::setw(3) << half(b.ground_2F) << std::setw(12)
       << std::setprecision(6) << b.fraction << "  " << as_fraction(b.fraction)
       << (b.in_model ? "" : "   (not in model: loss)") << "\n";
  }
  flush_loss();
  if (!ls.notes().empty()) {
    os << "\nnotes:\n";
    for (const auto& n : ls.notes()) os << "  * " << n << "\n";
  }
}

void register_levels(CLI::App& app) {
  auto args = std::make_shared<LevelsArgs>();
  std::string names;
  for (const auto& n : flyby::species::names()) names += (names.empty() ? "" : ", ") + n;
  auto* cmd = app.add_subcommand(
      "levels",
      "Show the atomic level structure flyby builds: hyperfine levels, g_F, Zeeman sublevel shifts, "
      "relative strengths S_FF' and branching ratios (with decay out of the model shown as loss).");
  cmd->footer(
      "Examples:\n"
      "  flyby levels --species Rb87 --line D2 --ground 2 --excited 1,2,3 --field-G 1.5\n"
      "  flyby levels --species Rb85 --ground 3 --field-G 1 --breit-rabi --json\n"
      "  flyby levels --custom-ground-F 1/2 --custom-excited-F 3/2 --custom-ground-gF 2 \\\n"
      "               --custom-excited-gF 1.3333 --custom-gamma-MHz 6 --custom-wavelength-nm 780 --field-G 2\n"
      "Shifts are in MHz from the centroid of each J level (hyperfine A/B plus Zeeman). S_FF' =\n"
      "(2F'+1)(2J+1){J J' 1; F' F I}^2. Branching b(F'->F) = (2F+1)(2J'+1){J J' 1; F' F I}^2 is the\n"
      "fraction of F' decay ending in F (any m, any polarization); decay into ground levels not\n"
      "listed with --ground is a loss channel of the model. JSON keys: ground, excited (lists of\n"
      "{F, gF, hyperfine_shift_MHz, m, shift_MHz[, loss_fraction]}), strengths ({F, Fp, S}),\n"
      "branching ({Fp, F, fraction, in_model}), plus atom, I, J, Jp, field_G, wavelength_nm, gamma_MHz.");
  cmd->add_option("--species", args->species, "Atom from the species table: " + names);
  cmd->add_option("--line", args->line, "Optical line: D1 (nS1/2 -> nP1/2) or D2 (nS1/2 -> nP3/2)")
      ->default_val("D2");
  cmd->add_option("--ground", args->ground, "Ground F values to include, comma-separated (default: all)")
      ->delimiter(',');
  cmd->add_option("--excited", args->excited, "Excited F' values to include, comma-separated (default: all)")
      ->delimiter(',');
  cmd->add_option("--field-G", args->field_G, "Magnetic field magnitude in gauss (>= 0); defines the quantization axis")
      ->default_val(0.0);
  cmd->add_flag("--breit-rabi", args->breit_rabi,
                "Exact Breit-Rabi energies for the ground (J=1/2) levels instead of linear Zeeman shifts");
  cmd->add_flag("--json", args->json, "Print JSON instead of tables");
  auto* g = cmd->add_option_group("custom atom", "A model atom given directly (instead of --species)");
  g->add_option("--custom-ground-F", args->custom_ground_F, "Ground F (e.g. 1, 3/2)");
  g->add_option("--custom-excited-F", args->custom_excited_F, "Excited F' (|F - F'| <= 1, not both 0)");
  g->add_option("--custom-ground-gF", args->custom_ground_gF, "Landé g_F of the ground level");
  g->add_option("--custom-excited-gF", args->custom_excited_gF, "Landé g_F of the excited level");
  g->add_option("--custom-gamma-MHz", args->custom_gamma_MHz, "Gamma/2pi of the excited level in MHz (> 0)");
  g->add_option("--custom-wavelength-nm", args->custom_wavelength_nm, "Vacuum wavelength in nm (> 0)");

  cmd->callback([args] {
    const LevelStructure ls = build(*args);
    if (args->json) {
      std::cout << to_json(ls, *args).dump(2) << "\n";
    } else {
      print_table(ls, std::cout);
    }
  });
}

}  // namespace

const flyby::cli::CommandRegistrar kRegisterLevels{10, &register_levels};
