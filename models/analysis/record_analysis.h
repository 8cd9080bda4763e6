// `flyby analyze` as a library: one pass over a time-tag record gives the singles per channel
// and their drift, the g2 histograms of the relevant channel pairs (from the channel roles:
// herald → every other channel, each channel with itself, and detector pairs when there is no
// herald), fits of level + transit envelope + beat to each, and the physics they imply:
//  * B from the beat frequency via g_F of the atom (beat_field.h);
//  * the effective mean atom number N_eff and the transit time τ_t from the correlation
//    envelope. For independent emitters with a Poisson number in the mode (H. J. Kimble,
//    M. Dagenais and L. Mandel, Phys. Rev. A 18, 201 (1978)), g2(τ) = 1 + g2_1(τ) env(τ)/N_eff
//    with g2_1 the single-atom correlation; at delays beyond the single-atom dynamics g2_1 → 1, so
//    the fitted envelope a e^{−τ²/τ_t²} on the level c gives N_eff = c / a. For a Gaussian
//    excitation profile (intensity ∝ e^{−2ρ²/w²}, weak excitation) crossed at speed v the
//    same-atom pair rate is ∝ e^{−v²τ²/w²}: τ_t = w / v, and N_eff is the mean number of atoms
//    within the 1/e² radius w (uniform density; a standing wave adds a factor 2/3).
// The same code runs on simulated records (config in the provenance: atom, field direction and
// channel polarizations known) and on measured ones (atom from the options, or no B at all).
#pragma once

#include <nlohmann/json.hpp>

#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "engine/analysis/correlator.h"
#include "engine/analysis/g2_fit.h"
#include "engine/analysis/singles.h"
#include "engine/records/record_format.h"
#include "models/analysis/beat_field.h"

namespace flyby::analysis {

struct RecordAnalysisOptions {
  double bin_width_ns = 10.0;     // g2 bin width, ns (whole ps), > 0
  double range_ns = 5000.0;       // largest |τ| of the histograms, ns, >= 10 bins
  // Fits use bins with τ >= this, ns: leaves out the antibunching dip, detector jitter and
  // dead time near τ = 0 (the single-atom dynamics, a few 1/Γ). >= 0.
  double tau_min_ns = 100.0;
  int slices = 20;                // time slices of the singles drift test, >= 2
  // Time blocks of the delete-one-block jackknife of every fitted quantity (Estimate), >= 2, or
  // 0 for fit errors only. Blocks must be much longer than the correlation times.
  int jackknife_blocks = 10;
  // Channel pairs "START:STOP" (names or ids); empty: from the channel roles (file comment).
  std::vector<std::string> pairs;
  // Fit model (g2_model.h spec) for every pair, or "auto": the largest of level+transit_gauss+beat,
  // level+beat, level+transit_gauss, level whose fit converges with every added term above
  // `significance_sigma` (amplitude / its standard error).
  std::string model = "auto";
  double significance_sigma = 3.0;  // > 0
  std::optional<int> delta_m;       // Δm of the beat (default from the channels, else 2 assumed)
  // The atom for measured records (ignored when the record carries a config): species, line,
  // ground F. Without them no B is derived.
  std::optional<std::string> species;
  std::string line = "D2";
  std::optional<double> ground_F;
  int threads = 0;                  // OpenMP threads of the correlator, 0: default
  std::size_t block_tags = std::size_t{1} << 20;  // tags read per block

  std::optional<std::string> validate() const;
};

// A value with its standard error.
// std_error is the larger of the fit's σ (independent Poisson bins) and the delete-one-block
// jackknife σ over time blocks: photons of one atom's passage form correlated bursts, so pair
// counts of different bins are not independent and the fit's σ alone can be too small.
struct Estimate {
  double value = 0;
  double std_error = 0;
  double fit_std_error = 0;        // from the fit covariance
  double jackknife_std_error = 0;  // 0 if the jackknife was off or failed
};

struct PairAnalysis {
  int start_channel = 0, stop_channel = 0;
  std::string start_name, stop_name;
  std::string kind;                 // "herald", "cross" or "auto"
  CorrelationHistogram histogram;
  std::optional<G2FitResult> fit;   // unset: no model could be fitted (message says why)
  std::string fit_message;          // model selection / trouble, for the report
  std::optional<Estimate> beat_MHz, beat_decay_us, beat_contrast;
  std::optional<Estimate> transit_us, atoms_effective;
  std::optional<FieldFromBeat> field;  // with g_F known and a beat found
  std::optional<DeltaM> delta_m;
  std::string jackknife_message;    // empty if the jackknife ran; else why not
};

enum class RecordAnalysisStatus {
  kSuccess,
  kPartial,   // some pair had no usable fit or the atom was unknown (messages say which)
};
const char* to_string(RecordAnalysisStatus s);

struct RecordAnalysis {
  RecordAnalysisStatus status = RecordAnalysisStatus::kSuccess;
  std::vector<std::string> notes;     // assumptions and trouble, one sentence each
  std::string record_path;
  records::RecordHeader header;
  bool simulated = false;             // the record carries a scenario config
  std::optional<GroundLevel> ground;  // the atom's ground level, if known
  std::optional<double> configured_field_G;  // |B| of the config (simulated records)
  SinglesResult singles;
  int jackknife_blocks = 0;           // as in the options
  std::vector<PairAnalysis> pairs;
  // Best estimates over the pairs (smallest standard error); unset if no pair gives one.
  std::optional<Estimate> field_G, beat_MHz, transit_us, atoms_effective;

  std::string brief_report() const;
  nlohmann::ordered_json to_json() const;  // the --json summary (units in the names)
};

// Runs the whole analysis. InputError for bad options or a bad record.
RecordAnalysis analyze_record(const std::string& path, const RecordAnalysisOptions& options);

// File-name-safe label of a pair, e.g. "g2_det_det".
std::string pair_label(const PairAnalysis& p);

// The Markdown report. `figures` maps "singles" and pair labels to figure file names relative to
// the report; a missing entry is reported as a missing figure with `figure_problem`.
std::string markdown_report(const RecordAnalysis& a, const std::vector<std::pair<std::string, std::string>>& figures,
                            const std::string& figure_problem);

}  // namespace flyby::analysis
