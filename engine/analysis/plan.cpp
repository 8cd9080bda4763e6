// Integration-time planner from the Poisson Fisher information (see plan.h).
#include "engine/analysis/plan.h"

#include <cmath>
#include <iomanip>
#include <numbers>
#include <sstream>

#include "engine/common/errors.h"

namespace flyby::analysis {

std::optional<std::string> BeatHistogramModel::validate() const {
  auto pos = [](double v) { return std::isfinite(v) && v > 0; };
  if (!pos(start_rate_per_s)) return "start rate must be > 0 per s";
  if (!pos(stop_rate_per_s)) return "stop rate must be > 0 per s";
  if (!pos(g2_background)) return "g2 background must be > 0";
  if (!pos(bin_width_ns)) return "bin width must be > 0 ns";
  if (!(std::isfinite(range_ns) && range_ns >= 5 * bin_width_ns)) return "range must be at least 5 bins";
  if (range_ns / bin_width_ns > 1e7) return "range / bin width exceeds 1e7 bins";
  if (!(std::isfinite(contrast) && contrast > 0 && contrast < 1)) return "contrast must be in (0, 1)";
  if (!pos(beat_MHz)) return "beat frequency must be > 0 MHz";
  if (decay_us && !pos(*decay_us)) return "decay time must be > 0 us";
  if (!std::isfinite(phase_rad)) return "phase must be finite";
  return std::nullopt;
}

double BeatHistogramModel::counts_per_bin_per_s() const {
  return start_rate_per_s * stop_rate_per_s * bin_width_ns * 1e-9 * g2_background;
}

Eigen::MatrixXd beat_fisher_information_per_s(const BeatHistogramModel& m) {
  if (auto err = m.validate()) throw InputError("plan: " + *err);
  const double B = m.counts_per_bin_per_s();
  const int n = static_cast<int>(std::floor(m.range_ns / m.bin_width_ns + 1e-9));
  const int np = m.decay_us ? 5 : 4;
  Eigen::MatrixXd I = Eigen::MatrixXd::Zero(np, np);
  Eigen::VectorXd g(np);
  const double w = 2 * std::numbers::pi * m.beat_MHz;  // rad/µs
  for (int k = 0; k < n; ++k) {
    const double t = k * m.bin_width_ns * 1e-3;  // µs
    const double e = m.decay_us ? std::exp(-t / *m.decay_us) : 1.0;
    const double c = std::cos(w * t + m.phase_rad), s = std::sin(w * t + m.phase_rad);
    const double shape = 1 + m.contrast * e * c;
    const double mu = B * shape;
    g(0) = shape;                                  // ∂μ/∂B
    g(1) = B * e * c;                              // ∂μ/∂C
    g(2) = -B * m.contrast * e * s * 2 * std::numbers::pi * t;  // ∂μ/∂f, f in MHz, t in µs
    g(3) = -B * m.contrast * e * s;                // ∂μ/∂φ
    if (m.decay_us) g(4) = B * m.contrast * e * c * t / (*m.decay_us * *m.decay_us);  // ∂μ/∂τ_d
    I.noalias() += g * g.transpose() / mu;
  }
  return I;
}

const char* to_string(PlanTargetKind k) {
  switch (k) {
    case PlanTargetKind::kBeatFrequency: return "beat-freq-kHz";
    case PlanTargetKind::kBeatSignificance: return "beat-significance";
  }
  return "unknown";
}

PlanTarget PlanTarget::parse(const std::string& text) {
  const auto eq = text.find('=');
  const std::string key = text.substr(0, eq);
  PlanTarget t;
  if (key == "beat-freq-kHz") t.kind = PlanTargetKind::kBeatFrequency;
  else if (key == "beat-significance") t.kind = PlanTargetKind::kBeatSignificance;
  else
    throw InputError("plan target '" + text + "': unknown quantity '" + key +
                     "' (valid: beat-freq-kHz=<kHz>, beat-significance=<sigmas>)");
  if (eq == std::string::npos) throw InputError("plan target '" + text + "': missing '=<value>'");
  std::size_t used = 0;
  try {
    t.value = std::stod(text.substr(eq + 1), &used);
  } catch (const std::exception&) {
    used = 0;
  }
  if (used == 0 || used != text.size() - eq - 1 || !(std::isfinite(t.value) && t.value > 0))
    throw InputError("plan target '" + text + "': value must be a positive number");
  return t;
}

double PlanResult::sigma_freq_kHz(double seconds) const { return sigma_freq_kHz_at_1s / std::sqrt(seconds); }
double PlanResult::significance(double seconds) const {
  return model.contrast / sigma_contrast_at_1s * std::sqrt(seconds);
}

PlanResult plan_integration(const BeatHistogramModel& model, const std::vector<PlanTarget>& targets) {
  PlanResult r;
  r.model = model;
  r.targets = targets;
  const Eigen::MatrixXd I = beat_fisher_information_per_s(model);
  r.counts_per_bin_per_s = model.counts_per_bin_per_s();
  r.bins = static_cast<int>(std::floor(model.range_ns / model.bin_width_ns + 1e-9));
  r.parameter_names = {"background_counts_per_bin", "contrast", "beat_MHz", "phase_rad"};
  if (model.decay_us) r.parameter_names.push_back("decay_us");
  Eigen::FullPivLU<Eigen::MatrixXd> lu(I);
  if (!lu.isInvertible()) {
    r.status = PlanStatus::kSingularInformation;
    r.message = "Fisher information is singular: the histogram does not determine all parameters "
                "(e.g. fewer than a few beat periods in the range, or decay much shorter than a bin)";
    return r;
  }
  r.covariance_at_1s = lu.inverse();
  r.sigma_freq_kHz_at_1s = std::sqrt(r.covariance_at_1s(2, 2)) * 1e3;
  r.sigma_contrast_at_1s = std::sqrt(r.covariance_at_1s(1, 1));
  r.sigma_decay_us_at_1s = model.decay_us ? std::sqrt(r.covariance_at_1s(4, 4)) : 0.0;
  for (const auto& t : targets) {
    if (!(t.value > 0 && std::isfinite(t.value))) throw InputError("plan: target values must be > 0");
    if (t.kind == PlanTargetKind::kBeatFrequency)
      r.duration_s.push_back(std::pow(r.sigma_freq_kHz_at_1s / t.value, 2));
    else
      r.duration_s.push_back(std::pow(t.value * r.sigma_contrast_at_1s / model.contrast, 2));
  }
  return r;
}

std::string PlanResult::brief_report() const {
  std::ostringstream o;
  o << std::setprecision(4);
  if (status != PlanStatus::kSuccess) return "plan: " + message;
  for (std::size_t i = 0; i < targets.size(); ++i)
    o << (i ? "; " : "") << to_string(targets[i].kind) << "=" << targets[i].value << " needs " << duration_s[i]
      << " s";
  if (targets.empty()) o << "sigma_f = " << sigma_freq_kHz_at_1s << " kHz after 1 s";
  return o.str();
}

std::string PlanResult::full_report() const {
  std::ostringstream o;
  o << std::setprecision(5);
  o << "integration-time plan (Cramer-Rao bound from the Poisson Fisher information)\n";
  o << "  model: mu_k = B T [1 + C exp(-tau_k/tau_d) cos(2 pi f tau_k + phi)], tau_k = k W, k = 0.." << bins - 1
    << "\n";
  o << "  start " << model.start_rate_per_s << " /s, stop " << model.stop_rate_per_s << " /s, g2 background "
    << model.g2_background << ", W " << model.bin_width_ns << " ns, range " << model.range_ns << " ns\n";
  o << "  B = R_start R_stop W g2_bg = " << counts_per_bin_per_s << " counts/bin/s; C = " << model.contrast
    << ", f = " << model.beat_MHz << " MHz, tau_d = " << (model.decay_us ? std::to_string(*model.decay_us) + " us" : "inf (undamped)")
    << ", phi = " << model.phase_rad << " rad\n";
  if (status != PlanStatus::kSuccess) return o.str() + "  " + message + "\n";
  o << "  after 1 s: sigma_f = " << sigma_freq_kHz_at_1s << " kHz, sigma_C = " << sigma_contrast_at_1s
    << " (significance " << model.contrast / sigma_contrast_at_1s << " sigma)";
  if (model.decay_us) o << ", sigma_tau_d = " << sigma_decay_us_at_1s << " us";
  o << "\n";
  for (std::size_t i = 0; i < targets.size(); ++i)
    o << "  target " << to_string(targets[i].kind) << " = " << targets[i].value << ": " << duration_s[i] << " s ("
      << duration_s[i] / 3600 << " h)\n";
  o << "  assumptions: independent Poisson counts per bin; stationary singles rates; the background is\n"
       "  accidentals R_start R_stop W times g2_background; all parameters (B, C, f, phi"
    << (model.decay_us ? ", tau_d" : "")
    << ") fitted together;\n  no dead time, jitter or afterpulses; sigma scales as 1/sqrt(T); the bound is reached by a\n"
       "  maximum-likelihood or Poisson-weighted fit when every bin holds many counts.\n";
  return o.str();
}

}  // namespace flyby::analysis
