// Composable models of g2(τ) for fits: a sum of components, each with named parameters in
// flyby's units (τ in µs, frequencies as ω/2π in MHz). The terms:
//   level          c                                      flat background (1 for uncorrelated light;
//                                                         1 + 1/N̄ type offsets from atom number)
//   beat           A e^{−|τ|/τ_d} cos(2π f |τ| + φ)       damped quantum beat
//   transit_gauss  a e^{−τ²/τ_t²}                          transit envelope, Gaussian mode profile
//   transit_exp    a e^{−|τ|/τ_t}                          transit envelope, exponential
//   dip            −d e^{−|τ|/τ_a}                         antibunching dip
// All terms depend on |τ|, so they describe the symmetric autocorrelation and either side of a
// cross-correlation (restrict the fit range to τ >= 0 for heralded beats after the herald).
// Presets: "beats" = level+beat, "beats2" = level+beat+beat, "transit" = level+transit_gauss,
// "antibunching" = level+dip. A spec is a preset or component names joined by '+'.
#pragma once

#include <string>
#include <vector>

#include "engine/analysis/fit.h"

namespace flyby::analysis {

enum class G2Term { kLevel, kBeat, kTransitGauss, kTransitExp, kDip };
const char* to_string(G2Term t);
G2Term g2_term_from_string(const std::string& name);  // InputError naming the valid names

struct G2Model {
  std::vector<G2Term> terms;
  std::string spec;  // the text it was parsed from

  // Parses "beats", "level+beat+transit_gauss", ...; InputError on an unknown name.
  static G2Model parse(const std::string& spec);
  int parameter_count() const;
  // Names like "level", "beat.freq_MHz" (one beat) or "beat2.freq_MHz" (several).
  std::vector<std::string> parameter_names() const;
  // First parameter index of term i.
  int offset(std::size_t i) const;
  // Value at τ (µs), gradient into grad.
  double evaluate(std::span<const double> p, double tau_us, std::span<double> grad) const;
  CurveModel curve_model() const;
};

// Parameter count of one term.
int g2_term_parameter_count(G2Term t);

}  // namespace flyby::analysis
