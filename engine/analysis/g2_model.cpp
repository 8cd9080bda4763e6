// Composable g2(τ) models (see g2_model.h for the terms).
#include "engine/analysis/g2_model.h"

#include <cmath>
#include <numbers>

#include "engine/common/errors.h"

namespace flyby::analysis {
namespace {

constexpr double kTwoPi = 2.0 * std::numbers::pi;

const std::vector<std::string>& term_parameters(G2Term t) {
  static const std::vector<std::string> level{"level"};
  static const std::vector<std::string> beat{"amplitude", "freq_MHz", "decay_us", "phase_rad"};
  static const std::vector<std::string> transit{"amplitude", "transit_us"};
  static const std::vector<std::string> dip{"depth", "width_us"};
  switch (t) {
    case G2Term::kLevel: return level;
    case G2Term::kBeat: return beat;
    case G2Term::kTransitGauss:
    case G2Term::kTransitExp: return transit;
    case G2Term::kDip: return dip;
  }
  return level;
}

}  // namespace

const char* to_string(G2Term t) {
  switch (t) {
    case G2Term::kLevel: return "level";
    case G2Term::kBeat: return "beat";
    case G2Term::kTransitGauss: return "transit_gauss";
    case G2Term::kTransitExp: return "transit_exp";
    case G2Term::kDip: return "dip";
  }
  return "unknown";
}

G2Term g2_term_from_string(const std::string& name) {
  for (auto t : {G2Term::kLevel, G2Term::kBeat, G2Term::kTransitGauss, G2Term::kTransitExp, G2Term::kDip})
    if (name == to_string(t)) return t;
  throw InputError("unknown g2 model term '" + name +
                   "' (valid: level, beat, transit_gauss, transit_exp, dip, or the presets beats, beats2, "
                   "transit, antibunching)");
}

int g2_term_parameter_count(G2Term t) { return static_cast<int>(term_parameters(t).size()); }

G2Model G2Model::parse(const std::string& spec) {
  G2Model m;
  m.spec = spec;
  std::string s = spec;
  if (s == "beats") s = "level+beat";
  else if (s == "beats2") s = "level+beat+beat";
  else if (s == "transit") s = "level+transit_gauss";
  else if (s == "antibunching") s = "level+dip";
  std::size_t pos = 0;
  while (true) {
    const std::size_t plus = s.find('+', pos);
    const std::string name = s.substr(pos, plus == std::string::npos ? std::string::npos : plus - pos);
    if (name.empty()) throw InputError("g2 model '" + spec + "': empty term");
    m.terms.push_back(g2_term_from_string(name));
    if (plus == std::string::npos) break;
    pos = plus + 1;
  }
  return m;
}

int G2Model::parameter_count() const {
  int n = 0;
  for (auto t : terms) n += g2_term_parameter_count(t);
  return n;
}

int G2Model::offset(std::size_t i) const {
  int n = 0;
  for (std::size_t j = 0; j < i; ++j) n += g2_term_parameter_count(terms[j]);
  return n;
}

std::vector<std::string> G2Model::parameter_names() const {
  std::vector<std::string> names;
  for (std::size_t i = 0; i < terms.size(); ++i) {
    int same = 0, index = 0;
    for (std::size_t j = 0; j < terms.size(); ++j)
      if (terms[j] == terms[i]) {
        ++same;
        if (j <= i) ++index;
      }
    std::string prefix = to_string(terms[i]);
    if (same > 1) prefix += std::to_string(index);
    for (const auto& p : term_parameters(terms[i]))
      names.push_back(terms[i] == G2Term::kLevel && same == 1 ? prefix : prefix + "." + p);
  }
  return names;
}

double G2Model::evaluate(std::span<const double> p, double tau_us, std::span<double> grad) const {
  const double a = std::abs(tau_us);
  double v = 0;
  std::size_t k = 0;
  for (auto t : terms) {
    switch (t) {
      case G2Term::kLevel:
        v += p[k];
        grad[k] = 1;
        k += 1;
        break;
      case G2Term::kBeat: {
        const double A = p[k], f = p[k + 1], td = p[k + 2], ph = p[k + 3];
        const double e = std::exp(-a / td);
        const double arg = kTwoPi * f * a + ph;
        const double c = std::cos(arg), s = std::sin(arg);
        v += A * e * c;
        grad[k] = e * c;
        grad[k + 1] = -A * e * s * kTwoPi * a;
        grad[k + 2] = A * e * c * a / (td * td);
        grad[k + 3] = -A * e * s;
        k += 4;
        break;
      }
      case G2Term::kTransitGauss: {
        const double amp = p[k], tt = p[k + 1];
        const double e = std::exp(-a * a / (tt * tt));
        v += amp * e;
        grad[k] = e;
        grad[k + 1] = amp * e * 2 * a * a / (tt * tt * tt);
        k += 2;
        break;
      }
      case G2Term::kTransitExp: {
        const double amp = p[k], tt = p[k + 1];
        const double e = std::exp(-a / tt);
        v += amp * e;
        grad[k] = e;
        grad[k + 1] = amp * e * a / (tt * tt);
        k += 2;
        break;
      }
      case G2Term::kDip: {
        const double d = p[k], w = p[k + 1];
        const double e = std::exp(-a / w);
        v -= d * e;
        grad[k] = -e;
        grad[k + 1] = -d * e * a / (w * w);
        k += 2;
        break;
      }
    }
  }
  return v;
}

CurveModel G2Model::curve_model() const {
  G2Model self = *this;
  return {parameter_names(), [self](std::span<const double> p, double x, std::span<double> g) {
            return self.evaluate(p, x, g);
          }};
}

}  // namespace flyby::analysis
