// check_scenario: build every model the config implies and cross-check them (see scenario_config.h).
#include <cmath>
#include <map>
#include <sstream>

#include "engine/common/errors.h"
#include "engine/common/units.h"
#include "models/config/scenario_config.h"
#include "models/geometry/dipole_emission.h"
#include "models/species/species.h"

namespace flyby::config {

namespace {

// Runs f; an InputError from a model is re-thrown with the config location in front.
template <class F>
auto at(const std::string& where, const std::string& what, F&& f) -> decltype(f()) {
  try {
    return f();
  } catch (const InputError& e) {
    throw InputError(where + ": " + what + (what.empty() ? "" : ": ") + e.what());
  }
}

double species_mass_u(const ScenarioConfig& c) {
  if (!c.atom.custom) return species::lookup(c.atom.request.species).mass_u;
  if (!c.atom.custom_mass_u) {
    throw InputError(c.where.at("atom") + ": [atom] a custom atom in an effusive beam needs 'mass_u'");
  }
  return *c.atom.custom_mass_u;
}

std::string where_of(const ScenarioConfig& c, const std::string& key) {
  auto it = c.where.find(key);
  return it == c.where.end() ? c.source_name : it->second;
}

}  // namespace

std::vector<double> reference_frame_energies(const levels::LevelStructure& L, int ref_g, int ref_e) {
  double shift_g = 0.0, shift_e = 0.0;
  for (const auto& h : L.hyperfine_levels()) {
    if (!h.excited && h.two_F == ref_g) shift_g = h.hyperfine_shift_MHz;
    if (h.excited && h.two_F == ref_e) shift_e = h.hyperfine_shift_MHz;
  }
  std::vector<double> e;
  for (const auto& sl : L.sublevels()) {
    e.push_back(sl.energy_rad_per_us - units::angular_from_MHz(sl.excited ? shift_e : shift_g));
  }
  return e;
}

CheckedScenario check_scenario(const ScenarioConfig& config) {
  const Vec3 B = config.field.field_G;
  auto frame = at(where_of(config, "field"), "[field]",
                  [&] { return geometry::QuantizationFrame(B, config.field.axis_when_zero); });
  auto levels = at(where_of(config, "atom"), "[atom]", [&] {
    if (config.atom.custom) {
      levels::CustomAtom a = config.atom.custom_atom;
      a.field_G = frame.field_magnitude_G();
      return levels::LevelStructure::from_custom(a);
    }
    levels::LevelRequest req = config.atom.request;
    req.field_G = frame.field_magnitude_G();
    return levels::LevelStructure::from_species(req);
  });
  CheckedScenario s(config, std::move(levels), frame);
  const levels::LevelStructure& L = s.levels;
  if (config.field.gradient_G_per_mm) {
    // Zero-field energies for the local-field interpolation of scenario::AtomView.
    levels::LevelStructure zero = config.atom.custom ? [&] {
      levels::CustomAtom a = config.atom.custom_atom;
      a.field_G = 0.0;
      return levels::LevelStructure::from_custom(a);
    }() : [&] {
      levels::LevelRequest req = config.atom.request;
      req.field_G = 0.0;
      return levels::LevelStructure::from_species(req);
    }();
    s.energies_zero_field_rad_per_us =
        reference_frame_energies(zero, config.atom.reference_ground_2F, config.atom.reference_excited_2F);
  }

  // Unit-weight dipole (A_q normalization): ⟨J‖er‖J′⟩ √((2J+1)/(2J′+1)).
  s.unit_dipole_C_m = L.reduced_dipole_C_m() * std::sqrt((L.two_J() + 1.0) / (L.two_Jp() + 1.0));
  double shift_g = 0.0, shift_e = 0.0;
  for (const auto& h : L.hyperfine_levels()) {
    if (!h.excited && h.two_F == config.atom.reference_ground_2F) shift_g = h.hyperfine_shift_MHz;
    if (h.excited && h.two_F == config.atom.reference_excited_2F) shift_e = h.hyperfine_shift_MHz;
  }
  s.reference_frequency_MHz = L.line_frequency_MHz() + shift_e - shift_g;

  // Resonator and its analyzer ports (orthogonality checked here to name the channel's line).
  if (config.resonator) {
    std::map<std::string, std::vector<std::pair<std::string, geometry::CVec3>>> analyzers;
    for (const auto& port : config.resonator->outputs) {
      const std::string w = where_of(config, "channel:" + port.channel);
      const geometry::CVec3 j = at(w, "[[channel]] '" + port.channel + "'", [&] {
        return geometry::polarization_vector(port.polarization, Vec3::UnitZ());
      });
      for (const auto& [other, jo] : analyzers[port.analyzer]) {
        const double ov = geometry::polarization_overlap(j, jo);
        if (ov > 1e-9) {
          std::ostringstream os;
          os << w << ": [[channel]] '" << port.channel << "': analyzer '" << port.analyzer
             << "' has a non-orthogonal basis: this port and '" << other << "' overlap (|<a|b>|^2 = " << ov
             << "); the two ports of a polarizing analyzer must be orthogonal";
          throw InputError(os.str());
        }
      }
      if (analyzers[port.analyzer].size() >= 2) {
        throw InputError(w + ": [[channel]] '" + port.channel + "': analyzer '" + port.analyzer +
                         "' already has two ports");
      }
      analyzers[port.analyzer].emplace_back(port.channel, j);
    }
    s.resonator = at(where_of(config, "resonator"), "[resonator]", [&] {
      return resonator::build_resonator(*config.resonator, L.wavelength_nm(), s.unit_dipole_C_m);
    });
    s.interaction_elements.push_back({Vec3::Zero(), Vec3::UnitZ(), s.resonator->waist_um});
  }

  // Free-space detectors on (A₋₁, A₀, A₊₁), plus the undetected remainder of Γ Σ A_q†A_q.
  if (!config.free_space_detectors.empty()) {
    for (const auto& d : config.free_space_detectors) {
      const std::string w = where_of(config, "channel:" + d.channel);
      at(w, "[[channel]] '" + d.channel + "'", [&] {
        if (d.polarization) {
          const geometry::CVec3 eps = geometry::polarization_vector(*d.polarization, d.direction);
          s.free_space_channels.push_back(geometry::free_space_channel(
              d.channel, L.gamma_rad_per_us(), d.solid_angle_sr, d.efficiency, frame.to_frame(eps)));
        } else {
          const auto b = geometry::transverse_basis(d.direction);
          for (const Vec3& e : {b.e1, b.e2}) {
            s.free_space_channels.push_back(geometry::free_space_channel(
                d.channel, L.gamma_rad_per_us(), d.solid_angle_sr, d.efficiency,
                frame.to_frame(geometry::CVec3(e.cast<geometry::Complex>()))));
          }
        }
        return 0;
      });
    }
    auto rest = at(where_of(config, "channel:" + config.free_space_detectors.front().channel), "[[channel]]", [&] {
      return geometry::undetected_remainder(s.free_space_channels, 3, L.gamma_rad_per_us(), "free_space_undetected",
                                            "free-space detectors");
    });
    s.free_space_channels.insert(s.free_space_channels.end(), rest.begin(), rest.end());
  }

  // Drives.
  for (const auto& d : config.side_drives) {
    const std::string w = where_of(config, "drive:" + d.name);
    at(w, "", [&] {
      drives::validate(d);
      return 0;
    });
    s.side_drive_rabi_rad_per_us.push_back(at(w, "", [&] { return drives::peak_rabi_rad_per_us(d, s.unit_dipole_C_m); }));
    s.interaction_elements.push_back({d.focus_um, d.direction, d.waist_um});
  }
  for (const auto& d : config.resonator_drives) {
    const std::string w = where_of(config, "drive:" + d.name);
    if (!s.resonator) throw InputError(w + ": [[drive]] '" + d.name + "' drives the resonator but there is no [resonator]");
    s.resonator_drive_amplitude_rad_per_us.push_back(
        at(w, "", [&] { return drives::amplitude_rad_per_us(d, s.resonator->kappa_rad_per_us); }));
  }
  if (config.detectors.empty()) {
    throw InputError(config.source_name + ": no [[channel]]: a scenario needs at least one detection channel");
  }

  // Initial populations.
  std::vector<int> ground_2F;
  for (const auto& h : L.hyperfine_levels()) {
    if (!h.excited) ground_2F.push_back(h.two_F);
  }
  s.ground_populations = at(where_of(config, "population"), "[[population]]",
                            [&] { return source::resolve_populations(config.source.populations, ground_2F); });

  // Feedback rules.
  std::vector<std::string> detected = config.channel_names();
  for (const auto& f : config.feedback) {
    at(where_of(config, "feedback:" + f.name), "", [&] {
      feedback::validate(f, detected, config.drive_names());
      return 0;
    });
  }

  // Source.
  const std::string ws = where_of(config, "source");
  if (config.source.kind == SourceKind::kBeam) {
    source::BeamSpec beam = config.source.beam;
    if (beam.speed.kind == source::SpeedKind::kEffusive) beam.speed.mass_u = species_mass_u(config);
    at(ws, "[source]", [&] {
      source::validate(beam);
      std::optional<double> w0;
      if (s.resonator) w0 = s.resonator->waist_um;
      s.arrival_rate_per_us = source::arrival_rate_per_us(beam, w0);
      if (w0) s.mean_atoms_in_mode = source::mean_atoms_in_mode(beam, *s.arrival_rate_per_us * 1e6, *w0);
      // Each arrival block holds at most 2^24 atoms (atom ids); keep the expected count far below.
      if (*s.arrival_rate_per_us * config.run.arrival_block_us > 1e6) {
        throw InputError("more than 10^6 atoms expected per arrival block; lower run.arrival_block_us");
      }
      return 0;
    });
    s.config.source.beam.speed.mass_u = beam.speed.mass_u;
  }
  if (s.interaction_elements.empty() && config.source.kind == SourceKind::kBeam) {
    throw InputError(ws + ": [source] a beam needs something to interact with: a [resonator] or a side [[drive]]");
  }
  return s;
}

std::string CheckedScenario::summary() const {
  std::ostringstream os;
  os.precision(6);
  const auto& L = levels;
  os << "atom:       " << L.label() << ", " << L.dimension() << " sublevels, Γ/2π = "
     << units::MHz_from_angular(L.gamma_rad_per_us()) << " MHz, λ = " << L.wavelength_nm() << " nm\n";
  os << "field:      |B| = " << frame.field_magnitude_G() << " G, quantization axis (lab) = ["
     << frame.axis_lab().transpose() << "]" << (frame.uses_fallback_axis() ? " (B = 0: fallback axis)" : "") << "\n";
  if (resonator) {
    const auto& r = *resonator;
    os << "resonator:  κ/2π = " << units::MHz_from_angular(r.kappa_rad_per_us) << " MHz, g0/2π = "
       << units::MHz_from_angular(r.g0_rad_per_us) << " MHz, C1 = g0²/(κΓ) = " << r.cooperativity(L.gamma_rad_per_us())
       << ", V = " << r.mode_volume_um3 << " µm³\n";
    for (const auto& ch : r.channels) {
      os << "  channel " << ch.channel << (ch.detected ? "" : " (undetected)") << ": |c|² on (a1, a2) = ("
         << std::norm(ch.coefficients(0)) << ", " << std::norm(ch.coefficients(1)) << ") rad/µs\n";
    }
  }
  for (const auto& ch : free_space_channels) {
    double rate = ch.coefficients.squaredNorm();
    os << "  free-space channel " << ch.channel << (ch.detected ? "" : " (undetected)") << ": Σ|c_q|² = " << rate
       << " rad/µs\n";
  }
  for (std::size_t i = 0; i < config.side_drives.size(); ++i) {
    os << "drive " << config.side_drives[i].name << ": Ω/2π = " << units::MHz_from_angular(side_drive_rabi_rad_per_us[i])
       << " MHz (unit weight, centre)\n";
  }
  for (std::size_t i = 0; i < config.resonator_drives.size(); ++i) {
    os << "drive " << config.resonator_drives[i].name
       << ": E/2π = " << units::MHz_from_angular(resonator_drive_amplitude_rad_per_us[i]) << " MHz\n";
  }
  if (arrival_rate_per_us) {
    os << "source:     beam, " << *arrival_rate_per_us * 1e6 << " atoms/s";
    if (mean_atoms_in_mode) os << ", mean atoms in the mode (ρ < w0) = " << *mean_atoms_in_mode;
    os << ", mean speed " << source::mean_speed_m_per_s(config.source.beam.speed) << " m/s\n";
  } else {
    os << "source:     " << config.source.positions_um.size() << " stationary atom(s)\n";
  }
  os << "feedback:   " << config.feedback.size() << " rule(s); run: " << config.run.duration_s << " s, seed "
     << config.run.seed << "\n";
  return os.str();
}

}  // namespace flyby::config
