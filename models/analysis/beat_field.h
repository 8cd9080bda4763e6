// Physics read from a heralded ground-state beat: the magnetic field from the beat frequency via
// the ground-level Landé factor g_F of the atom, f = |Δm| |g_F| (μB/h) B (linear Zeeman effect;
// REFERENCES.md "facts of the trade" gives the Δm = 2 case, 2 g_F μB B/h), and which Δm the
// heralded coherence has, judged from the polarizations the herald channel sees.
//
// Why Δm: a herald photon of polarization component q (emitted on A_q, m_g = m_e + q) projects
// the atom onto Σ_q c_q A_q|e⟩, a superposition of ground sublevels m_e + q over the components
// q the herald channel is sensitive to. The coherence between two of them precesses at
// (q − q′) g_F μB B/h: a channel seeing σ+ and σ− (circular analyzer pair, or a linear analyzer
// looking along B) gives Δm = 2; one seeing π together with σ gives Δm = 1 (and 2); a channel
// seeing one component only heralds no coherence — beats then come from the drive and Δm must be
// given by the user.
#pragma once

#include <optional>
#include <string>

#include "models/config/scenario_config.h"

namespace flyby::analysis {

// Ground level the beat belongs to, with its g_F.
struct GroundLevel {
  std::string species;       // "Rb87", …, "custom"
  std::string line;          // "D1"/"D2" (empty for a custom atom)
  int ground_2F = 0;         // 2F
  double gF = 0;             // Landé g_F incl. the nuclear term (models/levels)
  std::string source;        // "config" or "options"
};

// g_F of ground level F of a named species and line (InputError for an impossible choice).
GroundLevel ground_level_from_species(const std::string& species, const std::string& line, int ground_2F);

// The ground level of a checked scenario: the reference ground F (the only one if one is included).
GroundLevel ground_level_from_scenario(const config::CheckedScenario& s);

struct DeltaM {
  int value = 2;
  bool assumed = false;      // not derived from the channel polarizations
  std::string reason;        // one sentence for the report
};

// Δm of the coherence heralded by channel `herald` of the scenario (see the file comment).
// `user` overrides. Without a decision from the channels the default 2 is returned as assumed.
DeltaM heralded_delta_m(const config::CheckedScenario* s, const std::string& herald, std::optional<int> user);

struct FieldFromBeat {
  double field_G = 0;
  double field_err_G = 0;
  double MHz_per_G = 0;      // |Δm| |g_F| μB/h
};

// B = f / (|Δm| |g_F| μB/h), σ_B = σ_f / (same). μB/h from CODATA 2018 (engine/common/constants.h).
FieldFromBeat field_from_beat(double freq_MHz, double freq_err_MHz, double gF, int delta_m);

}  // namespace flyby::analysis
