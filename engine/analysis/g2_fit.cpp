// Starting values and fits of g2(τ) models (see g2_fit.h).
#include "engine/analysis/g2_fit.h"

#include <gsl/gsl_fft_complex.h>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <numeric>
#include <sstream>

#include "engine/common/errors.h"

namespace flyby::analysis {
namespace {

constexpr double kPi = std::numbers::pi;

double weighted_mean(std::span<const double> y, std::span<const double> s, auto&& pick) {
  double sw = 0, swy = 0;
  for (std::size_t k = 0; k < y.size(); ++k)
    if (pick(k)) {
      const double w = 1 / (s[k] * s[k]);
      sw += w;
      swy += w * y[k];
    }
  return sw > 0 ? swy / sw : 0.0;
}

// Frequencies (MHz) of the strongest peaks of the periodogram of r(|τ|), strongest first.
// r is averaged onto a uniform |τ| grid of the median spacing, zero-padded 8-fold and
// transformed with GSL's radix-2 FFT; peaks are refined by parabolic interpolation.
std::vector<double> spectral_peaks(std::span<const double> tau_us, std::span<const double> r, int how_many) {
  std::vector<double> a(tau_us.size());
  for (std::size_t k = 0; k < a.size(); ++k) a[k] = std::abs(tau_us[k]);
  std::vector<double> sorted = a;
  std::sort(sorted.begin(), sorted.end());
  std::vector<double> gaps;
  for (std::size_t k = 1; k < sorted.size(); ++k)
    if (sorted[k] - sorted[k - 1] > 1e-12 * (1 + sorted.back())) gaps.push_back(sorted[k] - sorted[k - 1]);
  if (gaps.size() < 4) return {};
  std::nth_element(gaps.begin(), gaps.begin() + static_cast<std::ptrdiff_t>(gaps.size() / 2), gaps.end());
  const double dt = gaps[gaps.size() / 2];
  const double t0 = sorted.front();
  const std::size_t ngrid = static_cast<std::size_t>(std::llround((sorted.back() - t0) / dt)) + 1;
  if (ngrid > (1u << 22)) return {};
  std::vector<double> sum(ngrid, 0.0), cnt(ngrid, 0.0);
  for (std::size_t k = 0; k < a.size(); ++k) {
    const auto i = static_cast<std::size_t>(std::llround((a[k] - t0) / dt));
    if (i < ngrid) sum[i] += r[k], cnt[i] += 1;
  }
  std::size_t n2 = 1;
  while (n2 < 8 * ngrid) n2 <<= 1;
  std::vector<double> z(2 * n2, 0.0);  // interleaved complex
  for (std::size_t i = 0; i < ngrid; ++i) z[2 * i] = cnt[i] > 0 ? sum[i] / cnt[i] : 0.0;
  gsl_fft_complex_radix2_forward(z.data(), 1, n2);
  std::vector<double> pw(n2 / 2);
  for (std::size_t k = 0; k < n2 / 2; ++k) pw[k] = z[2 * k] * z[2 * k] + z[2 * k + 1] * z[2 * k + 1];
  const double span = static_cast<double>(ngrid) * dt;
  // Ignore frequencies with fewer than 1.5 cycles in the data: those belong to the envelope.
  const auto kmin = static_cast<std::size_t>(std::ceil(1.5 / span * dt * static_cast<double>(n2)));
  std::vector<double> out;
  std::vector<char> taken(pw.size(), 0);
  for (int m = 0; m < how_many; ++m) {
    std::size_t best = 0;
    double bp = -1;
    for (std::size_t k = std::max<std::size_t>(kmin, 1); k + 1 < pw.size(); ++k)
      if (!taken[k] && pw[k] > bp && pw[k] >= pw[k - 1] && pw[k] >= pw[k + 1]) bp = pw[k], best = k;
    if (bp <= 0) break;
    // Exclude this peak's main lobe (± 8 padded bins = ± one natural resolution bin) next time.
    for (std::size_t k = best > 8 ? best - 8 : 0; k < std::min(pw.size(), best + 9); ++k) taken[k] = 1;
    double kk = static_cast<double>(best);
    const double l = std::log(pw[best - 1] + 1e-300), c = std::log(pw[best]), rr = std::log(pw[best + 1] + 1e-300);
    const double den = l - 2 * c + rr;
    if (den < 0) kk += 0.5 * (l - rr) / den;
    out.push_back(kk / (static_cast<double>(n2) * dt));
  }
  return out;
}

// Best decay (scan) and linear amplitude/phase of A e^{−|τ|/τd} cos(2πf|τ| + φ) for residual r.
void beat_amplitude_phase(std::span<const double> tau_us, std::span<const double> r, std::span<const double> s,
                          double f, double* amp, double* decay, double* phase) {
  double span = 0;
  for (double t : tau_us) span = std::max(span, std::abs(t));
  double best_chi2 = INFINITY;
  for (double fac : {0.03, 0.1, 0.2, 0.4, 0.7, 1.0, 2.0, 4.0, 10.0, 100.0}) {
    const double td = fac * span;
    double ccs = 0, css = 0, csn = 0, cyc = 0, cys = 0, yy = 0;
    for (std::size_t k = 0; k < r.size(); ++k) {
      const double a = std::abs(tau_us[k]);
      const double e = std::exp(-a / td), w = 1 / (s[k] * s[k]);
      const double c = e * std::cos(2 * kPi * f * a), sn = e * std::sin(2 * kPi * f * a);
      ccs += w * c * c, css += w * sn * sn, csn += w * c * sn, cyc += w * c * r[k], cys += w * sn * r[k];
      yy += w * r[k] * r[k];
    }
    const double det = ccs * css - csn * csn;
    if (!(det > 0)) continue;
    const double a = (css * cyc - csn * cys) / det, b = (ccs * cys - csn * cyc) / det;
    const double chi2 = yy - (a * cyc + b * cys);
    if (chi2 < best_chi2) {
      best_chi2 = chi2;
      *amp = std::hypot(a, b);
      *phase = std::atan2(-b, a);
      *decay = td;
    }
  }
}

// Canonical beat parameters: amplitude >= 0, frequency >= 0, phase in (−π, π]. The covariance
// follows the sign flips (a linear change of variables).
void canonicalize(const G2Model& m, FitResult& r) {
  for (std::size_t i = 0; i < m.terms.size(); ++i) {
    if (m.terms[i] != G2Term::kBeat) continue;
    const auto k = static_cast<Eigen::Index>(m.offset(i));
    auto flip = [&](Eigen::Index j) {
      r.parameters[static_cast<std::size_t>(j)] = -r.parameters[static_cast<std::size_t>(j)];
      r.covariance.row(j) *= -1;
      r.covariance.col(j) *= -1;
    };
    if (r.parameters[static_cast<std::size_t>(k + 1)] < 0) {  // cos(−x + φ) = cos(x − φ)
      flip(k + 1);
      flip(k + 3);
    }
    if (r.parameters[static_cast<std::size_t>(k)] < 0) {  // −A cos(x) = A cos(x + π)
      flip(k);
      r.parameters[static_cast<std::size_t>(k + 3)] += kPi;
    }
    double& ph = r.parameters[static_cast<std::size_t>(k + 3)];
    ph = std::remainder(ph, 2 * kPi);
    if (ph <= -kPi) ph += 2 * kPi;
  }
}

}  // namespace

std::vector<double> g2_starting_values(const G2Model& model, std::span<const double> tau_us,
                                       std::span<const double> y, std::span<const double> sigma,
                                       int beat_candidate) {
  const std::size_t n = y.size();
  double amax = 0;
  for (double t : tau_us) amax = std::max(amax, std::abs(t));
  double amin = amax;
  for (double t : tau_us) amin = std::min(amin, std::abs(t));
  std::vector<double> p(static_cast<std::size_t>(model.parameter_count()), 0.0);

  // Level: weighted mean of the outer quarter in |τ|; value near τ = 0: the innermost 5 % (>= 3 bins).
  const double level = weighted_mean(y, sigma, [&](std::size_t k) { return std::abs(tau_us[k]) >= amin + 0.75 * (amax - amin); });
  std::vector<double> order(n);
  std::vector<std::size_t> idx(n);
  std::iota(idx.begin(), idx.end(), 0);
  std::sort(idx.begin(), idx.end(), [&](auto i, auto j) { return std::abs(tau_us[i]) < std::abs(tau_us[j]); });
  const std::size_t ninner = std::max<std::size_t>(3, n / 20);
  double y0 = 0;
  for (std::size_t m = 0; m < std::min(ninner, n); ++m) y0 += y[idx[m]];
  y0 /= static_cast<double>(std::min(ninner, n));

  bool has_beat = false, has_smooth = false;
  for (std::size_t i = 0; i < model.terms.size(); ++i) {
    const auto k = static_cast<std::size_t>(model.offset(i));
    switch (model.terms[i]) {
      case G2Term::kLevel: p[k] = level; break;
      case G2Term::kTransitGauss:
      case G2Term::kTransitExp:
        p[k] = std::max(y0 - level, 1e-3 * std::abs(level) + 1e-12);
        p[k + 1] = 0.2 * (amax - amin) + amin + 1e-12;
        has_smooth = true;
        break;
      case G2Term::kDip:
        p[k] = std::max(level - y0, 1e-3 * std::abs(level) + 1e-12);
        p[k + 1] = 0.05 * (amax - amin) + amin + 1e-12;
        has_smooth = true;
        break;
      case G2Term::kBeat: has_beat = true; break;
    }
  }
  if (!has_beat) return p;

  // Smooth part first (level + envelopes, beats switched off), then one beat at a time on the
  // residual of everything found so far.
  auto residual_of = [&](const std::vector<double>& q) {
    std::vector<double> r(n), g(q.size());
    for (std::size_t k = 0; k < n; ++k) r[k] = y[k] - model.evaluate(q, tau_us[k], g);
    return r;
  };
  if (has_smooth) {
    G2Model smooth;
    std::vector<double> sp;
    for (std::size_t i = 0; i < model.terms.size(); ++i)
      if (model.terms[i] != G2Term::kBeat) {
        smooth.terms.push_back(model.terms[i]);
        const auto k = static_cast<std::size_t>(model.offset(i));
        for (int j = 0; j < g2_term_parameter_count(model.terms[i]); ++j) sp.push_back(p[k + static_cast<std::size_t>(j)]);
      }
    const auto sf = fit_curve(smooth.curve_model(), tau_us, y, sigma, sp);
    if (sf.status == FitStatus::kConverged) {
      std::size_t m = 0;
      for (std::size_t i = 0; i < model.terms.size(); ++i)
        if (model.terms[i] != G2Term::kBeat) {
          const auto k = static_cast<std::size_t>(model.offset(i));
          for (int j = 0; j < g2_term_parameter_count(model.terms[i]); ++j) p[k + static_cast<std::size_t>(j)] = sf.parameters[m++];
        }
    }
  }
  // Beats not yet found stay off: amplitude 0 with a finite placeholder decay.
  for (std::size_t i = 0; i < model.terms.size(); ++i)
    if (model.terms[i] == G2Term::kBeat) p[static_cast<std::size_t>(model.offset(i)) + 2] = 1.0;
  bool first = true;
  for (std::size_t i = 0; i < model.terms.size(); ++i) {
    if (model.terms[i] != G2Term::kBeat) continue;
    const auto k = static_cast<std::size_t>(model.offset(i));
    const auto r = residual_of(p);
    const auto peaks = spectral_peaks(tau_us, r, first ? beat_candidate + 1 : 1);
    double f = peaks.empty() ? 1.0 / (amax + 1e-12) : peaks[std::min<std::size_t>(peaks.size() - 1, first ? static_cast<std::size_t>(beat_candidate) : 0)];
    double amp = 0, decay = amax, phase = 0;
    beat_amplitude_phase(tau_us, r, sigma, f, &amp, &decay, &phase);
    p[k] = amp;
    p[k + 1] = f;
    p[k + 2] = decay;
    p[k + 3] = phase;
    first = false;
  }
  return p;
}

G2FitResult fit_g2(const G2Data& data, const G2FitOptions& options) {
  G2FitResult out;
  out.model = G2Model::parse(options.model);
  const std::size_t n = data.tau_us.size();
  if (data.g2.size() != n || data.g2_err.size() != n)
    throw InputError("g2 fit: columns tau, g2 and g2_err have different lengths");
  // Expected counts per bin E = g2/err² from any non-empty bin: an empty bin's error becomes 1/E.
  double E = 0;
  for (std::size_t k = 0; k < n; ++k) {
    if (!std::isfinite(data.g2[k]) || !std::isfinite(data.g2_err[k]) || !std::isfinite(data.tau_us[k]))
      throw InputError("g2 fit: bin " + std::to_string(k) + " has a non-finite value");
    if (data.g2_err[k] < 0) throw InputError("g2 fit: bin " + std::to_string(k) + " has a negative error");
    if (data.g2_err[k] > 0 && E == 0) E = data.g2[k] / (data.g2_err[k] * data.g2_err[k]);
  }
  if (!(E > 0)) throw InputError("g2 fit: every bin is empty (all errors zero); nothing to fit");
  for (std::size_t k = 0; k < n; ++k) {
    const double t = data.tau_us[k];
    if (options.tau_min_us && t < *options.tau_min_us) continue;
    if (options.tau_max_us && t > *options.tau_max_us) continue;
    out.tau_us.push_back(t);
    out.g2.push_back(data.g2[k]);
    if (data.g2_err[k] > 0) out.g2_err.push_back(data.g2_err[k]);
    else {
      out.g2_err.push_back(1.0 / E);
      ++out.empty_bins_replaced;
    }
  }
  const auto np = static_cast<std::size_t>(out.model.parameter_count());
  if (out.tau_us.size() <= np)
    throw InputError("g2 fit: " + std::to_string(out.tau_us.size()) + " bins in the fit range for " +
                     std::to_string(np) + " parameters of model '" + options.model + "'");
  if (!options.start.empty() && options.start.size() != np)
    throw InputError("g2 fit: " + std::to_string(options.start.size()) + " starting values given, model '" +
                     options.model + "' has " + std::to_string(np) + " parameters");
  if (options.alternative_starts < 1) throw InputError("g2 fit: alternative_starts must be >= 1");

  const CurveModel cm = out.model.curve_model();
  bool have = false;
  const bool has_beat = std::find(out.model.terms.begin(), out.model.terms.end(), G2Term::kBeat) != out.model.terms.end();
  const int tries = options.start.empty() && has_beat ? options.alternative_starts : 1;
  for (int c = 0; c < tries; ++c) {
    const std::vector<double> start =
        options.start.empty() ? g2_starting_values(out.model, out.tau_us, out.g2, out.g2_err, c) : options.start;
    FitResult r = fit_curve(cm, out.tau_us, out.g2, out.g2_err, start, options.solver);
    // Keep the converged fit of lowest χ²; a non-converged one only if nothing converged.
    const bool better = !have || (r.ok() && !out.fit.ok()) || (r.ok() == out.fit.ok() && r.chi2 < out.fit.chi2);
    if (better) {
      out.fit = std::move(r);
      out.start = start;
      have = true;
    }
    // A converged fit with an acceptable χ² ends the search; other spectral peaks are tried only
    // when the strongest one led somewhere poor.
    if (out.fit.ok() && out.fit.p_value > options.accept_p_value) break;
  }
  out.expected_counts_per_bin = E;
  if (options.poisson_model_weights && out.fit.ok()) {
    if (options.max_reweightings < 1) throw InputError("g2 fit: max_reweightings must be >= 1");
    // Iteratively reweighted least squares: σ_k² = model_k / E (Poisson variance of counts
    // E·model_k, in g2 units). At the fixed point Σ (y − m) ∂m / m = 0: the Poisson score.
    std::vector<double> g(np);
    for (int pass = 0; pass < options.max_reweightings; ++pass) {
      std::vector<double> sig(out.tau_us.size());
      bool positive = true;
      for (std::size_t k = 0; k < sig.size(); ++k) {
        const double m = out.model.evaluate(out.fit.parameters, out.tau_us[k], g);
        positive = positive && m > 0;
        sig[k] = std::sqrt(std::max(m, 0.0) / E);
      }
      if (!positive) break;  // a model at or below zero has no Poisson variance: keep the data errors
      FitResult r = fit_curve(cm, out.tau_us, out.g2, sig, out.fit.parameters, options.solver);
      if (!r.ok()) break;
      double change = 0;
      for (std::size_t i = 0; i < np; ++i)
        change = std::max(change, std::abs(r.parameters[i] - out.fit.parameters[i]) / (r.standard_errors[i] + 1e-300));
      out.fit = std::move(r);
      out.g2_err = sig;
      out.reweightings = pass + 1;
      out.poisson_model_weights = true;
      if (change < 1e-4) break;  // parameters settled to 1e-4 of their standard errors
    }
  }
  if (out.fit.status != FitStatus::kNumericalIssue) canonicalize(out.model, out.fit);
  out.model_g2.resize(out.tau_us.size());
  std::vector<double> g(np);
  for (std::size_t k = 0; k < out.tau_us.size(); ++k) out.model_g2[k] = out.model.evaluate(out.fit.parameters, out.tau_us[k], g);
  return out;
}

std::string G2FitResult::full_report() const {
  std::ostringstream o;
  o << "model " << model.spec << " on " << tau_us.size() << " bins";
  if (poisson_model_weights) o << ", Poisson weights from the model (" << reweightings << " reweightings)";
  else if (empty_bins_replaced) o << " (" << empty_bins_replaced << " empty bins given the error of one count)";
  o << "\n" << fit.full_report();
  return o.str();
}

}  // namespace flyby::analysis
