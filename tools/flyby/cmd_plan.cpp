// `flyby plan`: integration time needed for a target precision of the beat frequency or a
// target significance of the beats, from the Fisher information of the Poisson-count histogram
// (engine/analysis/plan.h). Two forms: a model histogram given on the command line, or a
// scenario config, whose rates, beat contrast, frequency and decay come from a short simulation
// analysed by the same pipeline as `flyby analyze` (models/analysis/scenario_plan.h).
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>

#include "engine/analysis/plan.h"
#include "engine/common/errors.h"
#include "engine/common/provenance.h"
#include "models/analysis/scenario_plan.h"
#include "tools/flyby/commands.h"

namespace flyby::cli {
namespace {

struct PlanArgs {
  analysis::BeatHistogramModel m;
  std::optional<double> decay_us;
  std::optional<double> singles_per_s;
  std::vector<std::string> targets;
  bool json = false;
  bool start_rate_given = false, stop_rate_given = false;
  std::string config;
  analysis::ScenarioPlanOptions scenario;
};

void print_plan_json(const analysis::PlanResult& r, const analysis::BeatHistogramModel& m,
                     const analysis::ScenarioPlan* sp) {
  const auto prov = current_provenance();
  nlohmann::ordered_json j;
  j["flyby_output"] = "integration-time plan (flyby plan)";
  j["flyby_version"] = prov.version;
  j["command_line"] = prov.command_line;
  j["status"] = r.status == analysis::PlanStatus::kSuccess ? "success" : "singular-information";
  j["message"] = r.message;
  j["model"] = {{"start_rate_per_s", m.start_rate_per_s}, {"stop_rate_per_s", m.stop_rate_per_s},
                {"g2_background", m.g2_background},       {"bin_width_ns", m.bin_width_ns},
                {"range_ns", m.range_ns},                 {"contrast", m.contrast},
                {"beat_MHz", m.beat_MHz},                 {"phase_rad", m.phase_rad}};
  j["model"]["decay_us"] = m.decay_us ? nlohmann::json(*m.decay_us) : nlohmann::json(nullptr);
  if (sp) j["scenario"] = sp->to_json();
  j["counts_per_bin_per_s"] = r.counts_per_bin_per_s;
  j["bins"] = r.bins;
  j["sigma_freq_kHz_at_1s"] = r.sigma_freq_kHz_at_1s;
  j["sigma_contrast_at_1s"] = r.sigma_contrast_at_1s;
  j["targets"] = nlohmann::json::array();
  for (std::size_t i = 0; i < r.targets.size() && i < r.duration_s.size(); ++i)
    j["targets"].push_back({{"quantity", analysis::to_string(r.targets[i].kind)},
                            {"value", r.targets[i].value},
                            {"duration_s", r.duration_s[i]}});
  std::cout << j.dump(1) << "\n";
}

void run_scenario_plan(const PlanArgs& a) {
  std::vector<analysis::PlanTarget> targets;
  for (const auto& t : a.targets) targets.push_back(analysis::PlanTarget::parse(t));
  const auto sp = analysis::plan_from_scenario(a.config, a.scenario, targets);
  if (a.json) {
    print_plan_json(sp.plan, sp.plan.model, &sp);
  } else {
    std::cout << sp.full_report();
  }
  if (sp.plan.status != analysis::PlanStatus::kSuccess) throw InputError("plan: " + sp.plan.message);
}

void run_plan(PlanArgs a) {
  if (!a.config.empty()) return run_scenario_plan(a);
  if (a.singles_per_s) {
    if (a.start_rate_given || a.stop_rate_given)
      throw InputError("--singles-per-s sets both rates; do not combine it with --start-rate-per-s/--stop-rate-per-s");
    a.m.start_rate_per_s = a.m.stop_rate_per_s = *a.singles_per_s;
  } else if (!a.start_rate_given || !a.stop_rate_given) {
    throw InputError("give the singles rates: --singles-per-s, or both --start-rate-per-s and --stop-rate-per-s");
  }
  a.m.decay_us = a.decay_us;
  std::vector<analysis::PlanTarget> targets;
  for (const auto& t : a.targets) targets.push_back(analysis::PlanTarget::parse(t));
  const auto r = analysis::plan_integration(a.m, targets);
  if (a.json) {
    print_plan_json(r, a.m, nullptr);
  } else {
    std::cout << r.full_report();
  }
  if (r.status != analysis::PlanStatus::kSuccess) throw InputError("plan: " + r.message);
}

void register_plan(CLI::App& app) {
  auto args = std::make_shared<PlanArgs>();
  auto* c = app.add_subcommand(
      "plan",
      "Integration time for a beat-frequency precision or beat significance, from the Fisher information of "
      "the Poisson-count correlation histogram: of a model beat signal given by options, or of the signal a "
      "scenario config predicts (short simulation, analysed like flyby analyze)");
  c->add_option("config", args->config, "scenario config (.toml): rates, contrast, beat from a short simulation");
  c->add_option("--simulate-s", args->scenario.simulate_s, "config form: lab time of the short simulation (s; default: the config's run.duration_s)");
  c->add_option("--seed", args->scenario.seed, "config form: seed of the short simulation (default: the config's)");
  c->add_option("--pair", args->scenario.pair, "config form: channel pair START:STOP whose beat is planned (default: the best beat)");
  c->add_option("--tau-min-ns", args->scenario.analysis.tau_min_ns, "config form: first delay of the fitted histogram (ns)");
  c->add_option("--delta-m", args->scenario.analysis.delta_m, "config form: Delta m of the beat (for the field it implies)");
  c->add_option("--threads", args->scenario.threads, "config form: threads of the simulation and correlator");
  c->add_option("--singles-per-s", args->singles_per_s, "singles rate of both start and stop channel (1/s)");
  auto* start_rate = c->add_option("--start-rate-per-s", args->m.start_rate_per_s, "singles rate of the start channel (1/s)");
  auto* stop_rate = c->add_option("--stop-rate-per-s", args->m.stop_rate_per_s, "singles rate of the stop channel (1/s)");
  c->add_option("--g2-background", args->m.g2_background, "g2 level the beats sit on (default 1)");
  auto* bin = c->add_option("--bin-ns", args->m.bin_width_ns, "histogram bin width (ns)");
  auto* range = c->add_option("--range-ns", args->m.range_ns, "delays analysed: 0 .. range (ns)");
  auto* contrast = c->add_option("--contrast", args->m.contrast, "beat contrast relative to the background, 0..1");
  auto* beat = c->add_option("--beat-MHz", args->m.beat_MHz, "beat frequency omega/2pi (MHz)");
  c->add_option("--decay-us", args->decay_us, "1/e decay time of the beat amplitude (us); omit: undamped");
  c->add_option("--phase-rad", args->m.phase_rad, "beat phase at tau = 0 (rad)");
  c->add_option("--target", args->targets, "beat-freq-kHz=<sigma in kHz> or beat-significance=<n sigma>; repeatable")
      ->required();
  c->add_flag("--json", args->json, "print the plan as JSON");
  c->callback([args, start_rate, stop_rate, bin, range, contrast, beat] {
    args->start_rate_given = start_rate->count() > 0;
    args->stop_rate_given = stop_rate->count() > 0;
    if (!args->config.empty()) {
      if (contrast->count() || beat->count() || args->singles_per_s || args->start_rate_given || args->stop_rate_given)
        throw InputError("with a scenario config the rates, contrast and beat come from the simulation; drop "
                         "--contrast/--beat-MHz/--singles-per-s/--start-rate-per-s/--stop-rate-per-s");
      if (bin->count()) args->scenario.analysis.bin_width_ns = args->m.bin_width_ns;
      if (range->count()) args->scenario.analysis.range_ns = args->m.range_ns;
    } else {
      for (auto* opt : {bin, range, contrast, beat})
        if (opt->count() == 0) throw InputError(opt->get_name() + " is required (or give a scenario config)");
    }
    run_plan(*args);
  });
}

}  // namespace

const CommandRegistrar kRegisterPlan{62, &register_plan};

}  // namespace flyby::cli
