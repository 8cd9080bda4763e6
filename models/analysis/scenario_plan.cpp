// Config-driven integration-time plan (see scenario_plan.h).
#include "models/analysis/scenario_plan.h"

#include <unistd.h>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <sstream>

#include "engine/common/errors.h"
#include "models/simulation/simulation.h"

namespace flyby::analysis {

namespace {

double param_value(const G2FitResult& r, const std::string& name) {
  const auto& n = r.fit.parameter_names;
  for (std::size_t i = 0; i < n.size(); ++i)
    if (n[i] == name) return r.fit.parameters[i];
  throw InternalError("fit has no parameter " + name);
}

}  // namespace

BeatHistogramModel beat_model_from_analysis(const RecordAnalysis& a, const PairAnalysis& p) {
  FLYBY_CHECK(p.fit && p.beat_MHz, "beat_model_from_analysis: the pair has no beat fit");
  const auto& r = *p.fit;
  BeatHistogramModel m;
  const auto* s1 = a.singles.find(p.start_channel);
  const auto* s2 = a.singles.find(p.stop_channel);
  FLYBY_CHECK(s1 && s2, "beat_model_from_analysis: singles missing");
  m.start_rate_per_s = s1->rate_per_s;
  m.stop_rate_per_s = s2->rate_per_s;
  // The analysis normalizes by N_start N_stop W / T with N from the whole record: the level c of
  // the fit is the background g2 the beat sits on.
  const double c = param_value(r, "level");
  const double W_us = static_cast<double>(p.histogram.options.bin_width_ps) * 1e-6;
  m.g2_background = c;
  m.bin_width_ns = W_us * 1e3;
  // Bins the fit used: τ_0 … τ_0 + (n − 1) W; the planner's bins start at 0, so shift the origin:
  // A e^{−τ/τd} cos(2πfτ + φ) = A e^{−τ0/τd} e^{−τ′/τd} cos(2πfτ′ + 2πfτ0 + φ), τ = τ0 + τ′.
  const double tau0 = r.tau_us.front();
  m.range_ns = static_cast<double>(r.tau_us.size()) * m.bin_width_ns;
  const double A = param_value(r, "beat.amplitude"), f = param_value(r, "beat.freq_MHz"), td = param_value(r, "beat.decay_us"),
               phi = param_value(r, "beat.phase_rad");
  m.contrast = A * std::exp(-tau0 / td) / c;
  m.beat_MHz = f;
  m.decay_us = td;
  m.phase_rad = std::remainder(phi + 2 * M_PI * f * tau0, 2 * M_PI);
  return m;
}

ScenarioPlan plan_from_scenario(const std::string& config_path, const ScenarioPlanOptions& o,
                                const std::vector<PlanTarget>& targets) {
  const auto scenario = config::check_scenario(config::load_config_file(config_path));
  ScenarioPlan sp;
  sp.simulated_s = o.simulate_s ? *o.simulate_s : scenario.config.run.duration_s;
  if (!(sp.simulated_s > 0)) throw InputError("--simulate-s must be > 0");
  sp.seed = o.seed ? *o.seed : scenario.config.run.seed;

  // The short simulation goes to a temporary record that is removed afterwards.
  const auto tmp = std::filesystem::temp_directory_path() /
                   ("flyby-plan-" + std::to_string(::getpid()) + "-" + std::to_string(sp.seed) + ".h5");
  struct Remove {
    std::filesystem::path p;
    ~Remove() {
      std::error_code ec;
      std::filesystem::remove(p, ec);
    }
  } remove{tmp};
  simulation::Options so;
  so.output_path = tmp.string();
  so.duration_s = sp.simulated_s;
  so.seed = sp.seed;
  so.threads = o.threads;
  const auto sim = simulation::simulate(scenario, so);
  if (!sim.ok) sp.assumptions.push_back("The short simulation stopped early: " + sim.message);

  auto ao = o.analysis;
  ao.threads = o.threads;
  if (o.pair) ao.pairs = {*o.pair};
  if (ao.model == "auto") ao.model = "auto";
  const auto a = analyze_record(tmp.string(), ao);
  const PairAnalysis* best = nullptr;
  for (const auto& p : a.pairs)
    if (p.beat_MHz && p.beat_contrast && (!best || p.beat_MHz->std_error < best->beat_MHz->std_error)) best = &p;
  if (!best)
    throw InputError(config_path + ": the short simulation (" + std::to_string(sp.simulated_s) +
                     " s) shows no beat above the significance threshold in any channel pair; simulate longer "
                     "(--simulate-s) or check the scenario");
  sp.pair = best->start_name + " → " + best->stop_name;
  sp.beat_MHz = *best->beat_MHz;
  sp.contrast = *best->beat_contrast;
  sp.decay_us = *best->beat_decay_us;
  sp.fit_start_ns = best->fit->tau_us.front() * 1e3;
  sp.field = best->field;
  auto model = beat_model_from_analysis(a, *best);
  if (model.contrast >= 1) {
    // A full modulation (the histogram touching zero) fitted slightly above 1 by noise: the
    // Poisson model needs μ > 0 in every bin, and its Fisher information has a finite limit at 1.
    char note[200];
    std::snprintf(note, sizeof note, "The fitted contrast at the fit start, %.4g, is >= 1 (full modulation); planned with 0.999.",
                  model.contrast);
    sp.assumptions.push_back(note);
    model.contrast = 0.999;
  }
  sp.plan = plan_integration(model, targets);

  char buf[400];
  std::snprintf(buf, sizeof buf,
                "Rates, background, beat contrast, frequency, decay and phase from a %.4g s simulation (seed %llu) of "
                "the config, analysed like flyby analyze; pair %s, model %s.",
                sp.simulated_s, static_cast<unsigned long long>(sp.seed), sp.pair.c_str(), best->fit->model.spec.c_str());
  sp.assumptions.push_back(buf);
  std::snprintf(buf, sizeof buf,
                "The simulated beat itself is uncertain: contrast %.4g ± %.2g, frequency %.6g ± %.2g MHz; the planned "
                "times scale as 1/contrast² (simulate longer to pin them down).",
                sp.contrast.value, sp.contrast.std_error, sp.beat_MHz.value, sp.beat_MHz.std_error);
  sp.assumptions.push_back(buf);
  std::snprintf(buf, sizeof buf,
                "Histogram bins of %.4g ns from the fit start τ = %.4g ns to the range (%d bins), as the analysis fits "
                "them; the planner's phase and contrast refer to the fit start.",
                model.bin_width_ns, sp.fit_start_ns, sp.plan.bins);
  sp.assumptions.push_back(buf);
  sp.assumptions.push_back("The detector chain of the config (dead time, jitter, dark counts, afterpulses) is in the "
                           "simulated rates and contrast; the Fisher information treats bins as independent Poisson counts.");
  return sp;
}

std::string ScenarioPlan::full_report() const {
  std::ostringstream s;
  s << "scenario plan: beat " << pair << "\n";
  for (const auto& a : assumptions) s << "  * " << a << "\n";
  if (field) {
    char buf[160];
    std::snprintf(buf, sizeof buf, "  * Field implied by the beat: %.6g ± %.2g G.\n", field->field_G, field->field_err_G);
    s << buf;
  }
  s << plan.full_report();
  return s.str();
}

nlohmann::ordered_json ScenarioPlan::to_json() const {
  nlohmann::ordered_json j;
  j["pair"] = pair;
  j["simulated_s"] = simulated_s;
  j["seed"] = seed;
  j["beat_MHz"] = {{"value", beat_MHz.value}, {"std_error", beat_MHz.std_error}};
  j["contrast"] = {{"value", contrast.value}, {"std_error", contrast.std_error}};
  j["decay_us"] = {{"value", decay_us.value}, {"std_error", decay_us.std_error}};
  j["fit_start_ns"] = fit_start_ns;
  j["assumptions"] = assumptions;
  return j;
}

}  // namespace flyby::analysis
