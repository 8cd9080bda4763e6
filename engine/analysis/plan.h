// Integration-time planning from the Fisher information of Poisson-count histograms.
//
// A correlation histogram of bins k with mean counts μ_k(θ) and independent Poisson counts has
// Fisher information I_ij = Σ_k ∂_iμ_k ∂_jμ_k / μ_k; the Cramér–Rao bound gives the smallest
// standard errors any unbiased estimator reaches, σ_i = √(I⁻¹)_ii, and the maximum-likelihood
// fit reaches it for large counts. All μ_k grow linearly with the integration time T, so
// I ∝ T and σ ∝ 1/√T: the time for a target follows from one evaluation.
//
// The model histogram is the heralded-beat signal on an accidental background:
//   μ_k = B T [1 + C e^{−τ_k/τ_d} cos(2π f τ_k + φ)],  B = R_start R_stop W g2_background,
// τ_k = k W for k = 0..n−1 (n = range / W), all five (four if undamped) parameters B, C, f, φ,
// τ_d unknown. A configuration-driven form (rates and contrast predicted by a simulation of the
// scenario) builds on this once the simulator exists.
#pragma once

#include <Eigen/Dense>

#include <optional>
#include <string>
#include <vector>

namespace flyby::analysis {

struct BeatHistogramModel {
  double start_rate_per_s = 1e4;   // singles rate of the start channel, 1/s, > 0
  double stop_rate_per_s = 1e4;    // singles rate of the stop channel, 1/s, > 0
  double g2_background = 1.0;      // g2 level the beat sits on (accidentals: 1), > 0
  double bin_width_ns = 1.0;       // histogram bin width W, ns, > 0
  double range_ns = 1000.0;        // last delay analysed (bins 0..range), ns, >= 5 W
  double contrast = 0.05;          // beat contrast C relative to the background, 0 < C < 1
  double beat_MHz = 1.0;           // beat frequency f = ω/2π, MHz, > 0
  std::optional<double> decay_us;  // 1/e decay time of the beat amplitude, µs, > 0; unset: undamped
  double phase_rad = 0.0;          // beat phase φ at τ = 0, rad

  std::optional<std::string> validate() const;
  // Mean coincidences per bin per second of integration, B = R_start R_stop W g2_background.
  double counts_per_bin_per_s() const;
};

// Fisher information per second of integration for the parameters
// (B [counts/bin/s], C, f [MHz], φ [rad] and, if damped, τ_d [µs]) in that order.
Eigen::MatrixXd beat_fisher_information_per_s(const BeatHistogramModel& m);

enum class PlanTargetKind {
  kBeatFrequency,     // standard error of the beat frequency, value in kHz
  kBeatSignificance,  // contrast / its standard error, value in σ
};
const char* to_string(PlanTargetKind k);

struct PlanTarget {
  PlanTargetKind kind = PlanTargetKind::kBeatFrequency;
  double value = 1.0;  // kHz for kBeatFrequency, number of σ for kBeatSignificance; > 0
  // Parses "beat-freq-kHz=0.5" or "beat-significance=5" (InputError otherwise).
  static PlanTarget parse(const std::string& text);
};

enum class PlanStatus { kSuccess, kSingularInformation };

struct PlanResult {
  PlanStatus status = PlanStatus::kSuccess;
  std::string message;
  BeatHistogramModel model;
  std::vector<PlanTarget> targets;
  std::vector<double> duration_s;           // integration time needed per target
  double counts_per_bin_per_s = 0;          // B
  int bins = 0;                             // n
  double sigma_freq_kHz_at_1s = 0;          // Cramér–Rao σ_f for 1 s of integration, kHz
  double sigma_contrast_at_1s = 0;          // σ_C for 1 s
  double sigma_decay_us_at_1s = 0;          // σ_τd for 1 s (0 if undamped)
  std::vector<std::string> parameter_names; // order of the covariance
  Eigen::MatrixXd covariance_at_1s;         // I⁻¹ for 1 s

  // σ_f and significance after `seconds` of integration.
  double sigma_freq_kHz(double seconds) const;
  double significance(double seconds) const;
  std::string brief_report() const;
  std::string full_report() const;  // includes the assumptions
};

PlanResult plan_integration(const BeatHistogramModel& model, const std::vector<PlanTarget>& targets);

}  // namespace flyby::analysis
