// B from a heralded beat frequency (see beat_field.h).
#include "models/analysis/beat_field.h"

#include <cmath>
#include <set>

#include "engine/common/constants.h"
#include "engine/common/errors.h"
#include "models/species/species.h"

namespace flyby::analysis {

GroundLevel ground_level_from_species(const std::string& species, const std::string& line, int ground_2F) {
  levels::LevelRequest req;
  req.species = species;
  req.line = species::line_from_string(line) == species::LineId::kD1 ? levels::Line::kD1 : levels::Line::kD2;
  req.ground_2F = {ground_2F};
  // F′ = F exists on both lines for both ground levels F = I ± 1/2; it only completes the request.
  req.excited_2F = {ground_2F};
  const auto ls = levels::LevelStructure::from_species(req);
  for (const auto& h : ls.hyperfine_levels())
    if (!h.excited && h.two_F == ground_2F) return {species, line, ground_2F, h.gF, "options"};
  throw InputError("ground level F = " + std::to_string(ground_2F / 2.0) + " not found for " + species);
}

GroundLevel ground_level_from_scenario(const config::CheckedScenario& s) {
  const auto& a = s.config.atom;
  const int two_F = a.reference_ground_2F;
  for (const auto& h : s.levels.hyperfine_levels())
    if (!h.excited && (h.two_F == two_F || two_F == 0)) {
      GroundLevel g;
      g.species = a.custom ? "custom" : a.request.species;
      g.line = a.custom ? "" : (a.request.line == levels::Line::kD1 ? "D1" : "D2");
      g.ground_2F = h.two_F;
      g.gF = h.gF;
      g.source = "config";
      return g;
    }
  throw InputError("the scenario has no ground level F = " + std::to_string(two_F / 2.0));
}

namespace {

// Polarization components q (index q + 1) the atom emits into channel `name`, or nullopt if the
// channel is not found in the scenario.
std::optional<std::array<double, 3>> channel_components(const config::CheckedScenario& s, const std::string& name) {
  for (const auto& ch : s.free_space_channels)
    if (ch.detected && ch.channel == name) {
      std::array<double, 3> w{};
      for (int q = 0; q < 3 && q < ch.coefficients.size(); ++q) w[static_cast<std::size_t>(q)] = std::abs(ch.coefficients(q));
      return w;
    }
  if (s.resonator) {
    const auto mw = s.resonator->mode_weights(s.frame);
    for (const auto& ch : s.resonator->channels)
      if (ch.detected && ch.channel == name) {
        std::array<double, 3> w{};
        for (int q = 0; q < 3; ++q) {
          std::complex<double> c = 0;
          for (int i = 0; i < 2 && i < ch.coefficients.size(); ++i)
            c += ch.coefficients(i) * mw[static_cast<std::size_t>(i)][static_cast<std::size_t>(q)];
          w[static_cast<std::size_t>(q)] = std::abs(c);
        }
        return w;
      }
  }
  return std::nullopt;
}

}  // namespace

DeltaM heralded_delta_m(const config::CheckedScenario* s, const std::string& herald, std::optional<int> user) {
  if (user) {
    if (*user < 1 || *user > 2 * 8) throw InputError("--delta-m " + std::to_string(*user) + ": expected 1, 2, …");
    return {*user, false, "Δm = " + std::to_string(*user) + " given by the user (--delta-m)."};
  }
  if (s) {
    if (const auto w = channel_components(*s, herald)) {
      const double top = std::max({(*w)[0], (*w)[1], (*w)[2]});
      std::set<int> qs;
      for (int q = -1; q <= 1; ++q)
        if ((*w)[static_cast<std::size_t>(q + 1)] > 1e-6 * top) qs.insert(q);
      if (qs.size() >= 2) {
        const bool pi = qs.count(0) > 0;
        if (!pi)
          return {2, false,
                  "Δm = 2: the herald channel '" + herald +
                      "' sees σ+ and σ− light but no π light (config), so its click leaves a superposition of "
                      "ground sublevels m and m ± 2 whose coherence precesses at 2 g_F μB B/h."};
        return {1, false,
                "Δm = 1: the herald channel '" + herald +
                    "' sees π together with σ light (config), so its click leaves a superposition of sublevels "
                    "differing by 1 (a Δm = 2 component may add a beat at twice the frequency)."};
      }
      return {2, true,
              "Δm = 2 assumed: the herald channel '" + herald +
                  "' sees a single polarization component, so the herald alone prepares no coherence; the beat then "
                  "comes from the drive, and Δm = 2 (σ+/σ− pair) is the assumption. Override with --delta-m."};
    }
  }
  return {2, true,
          "Δm = 2 assumed (the common case of a σ+ herald and σ− detection, or a linear analyzer along B: "
          "a superposition of m and m ± 2); the record does not say which polarizations its channels see. "
          "Override with --delta-m."};
}

FieldFromBeat field_from_beat(double freq_MHz, double freq_err_MHz, double gF, int delta_m) {
  FieldFromBeat r;
  r.MHz_per_G = std::abs(delta_m) * std::abs(gF) * constants::muB_over_h_MHz_per_G;
  FLYBY_CHECK(r.MHz_per_G > 0, "field_from_beat: g_F or Δm is zero");
  r.field_G = freq_MHz / r.MHz_per_G;
  r.field_err_G = freq_err_MHz / r.MHz_per_G;
  return r;
}

}  // namespace flyby::analysis
