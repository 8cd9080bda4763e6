// Integration-time planning for a scenario config: a short simulation of the config is analysed
// by the `flyby analyze` pipeline (record_analysis.h); the singles rates, background level, beat
// contrast, frequency, decay and phase of the chosen channel pair then define the Poisson-count
// histogram model of engine/analysis/plan.h, over exactly the bins the analysis fits
// (τ from the fit start to the range), and the Fisher information gives the time per target.
#pragma once

#include <nlohmann/json.hpp>

#include <optional>
#include <string>
#include <vector>

#include "engine/analysis/plan.h"
#include "models/analysis/record_analysis.h"

namespace flyby::analysis {

struct ScenarioPlanOptions {
  std::optional<double> simulate_s;        // lab time of the short simulation, s, > 0; unset: the config's
  std::optional<std::uint64_t> seed;       // its seed; unset: the config's run.seed_id
  std::optional<std::string> pair;         // "START:STOP"; unset: the pair with the most precise beat
  RecordAnalysisOptions analysis;          // binning and fit start of the analysis being planned
  int threads = 0;                         // simulation and correlator threads, 0: default
};

struct ScenarioPlan {
  PlanResult plan;                         // plan over the fitted bins (τ shifted to the fit start)
  std::string pair;                        // "START → STOP"
  double simulated_s = 0;
  std::uint64_t seed = 0;
  Estimate beat_MHz, contrast, decay_us;   // as measured in the short simulation
  double fit_start_ns = 0;                 // τ of the first fitted bin
  std::optional<FieldFromBeat> field;      // B implied by the beat (for the report)
  std::vector<std::string> assumptions;

  std::string full_report() const;
  nlohmann::ordered_json to_json() const;
};

// InputError for a bad config or when the short simulation shows no beat (message says what to do).
ScenarioPlan plan_from_scenario(const std::string& config_path, const ScenarioPlanOptions& options,
                                const std::vector<PlanTarget>& targets);

// The histogram model for pair `p` of analysis `a` over the bins its fit used.
BeatHistogramModel beat_model_from_analysis(const RecordAnalysis& a, const PairAnalysis& p);

}  // namespace flyby::analysis
