// `flyby analyze`: singles and drift, g2 of the relevant channel pairs, fits, and the physics
// (B from the beat, atom number and transit time from the envelope) of a time-tag record, as a
// report directory (report.md with figures, summary.json, the g2 CSVs and fit JSONs). The
// pipeline is models/analysis/record_analysis.h; this file writes the directory atomically
// (built under a hidden temporary name, renamed when complete) and draws the figures.
//
// Exit codes: 0 report complete; 2 bad input; 3 i/o error; 4 report written but some or all
// figures are missing (plotting unavailable; report.md says why).
#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>

#include "engine/analysis/g2_csv.h"
#include "engine/common/errors.h"
#include "engine/common/provenance.h"
#include "models/analysis/record_analysis.h"
#include "tools/flyby/commands.h"
#include "tools/flyby/plot_runner.h"

namespace flyby::cli {
namespace {

namespace fs = std::filesystem;

struct AnalyzeArgs {
  std::string record;
  std::string output;
  bool json = false;
  bool no_plots = false;
  std::optional<double> ground_F;
  analysis::RecordAnalysisOptions o;
};

void write_text(const fs::path& p, const std::string& text) {
  std::ofstream f(p);
  f << text;
  f.close();
  if (!f) throw IoError("cannot write " + p.string());
}

nlohmann::ordered_json fit_json(const analysis::PairAnalysis& p) {
  const auto& r = *p.fit;
  nlohmann::ordered_json j;
  j["flyby_output"] = "g2 fit (flyby analyze)";
  j["start"] = p.start_name;
  j["stop"] = p.stop_name;
  j["model"] = r.model.spec;
  j["status"] = analysis::to_string(r.fit.status);
  j["parameters"] = nlohmann::json::array();
  for (std::size_t i = 0; i < r.fit.parameters.size(); ++i)
    j["parameters"].push_back({{"name", r.fit.parameter_names[i]},
                               {"value", r.fit.parameters[i]},
                               {"std_error", r.fit.standard_errors[i]},
                               {"start", r.start[i]}});
  j["chi2"] = r.fit.chi2;
  j["dof"] = r.fit.dof;
  j["p_value"] = r.fit.p_value;
  j["weights"] = r.poisson_model_weights ? "poisson-model" : "data";
  std::vector<double> tau_ns(r.tau_us.size());
  for (std::size_t k = 0; k < tau_ns.size(); ++k) tau_ns[k] = r.tau_us[k] * 1e3;
  j["data"] = {{"tau_ns", tau_ns}, {"g2", r.g2}, {"g2_err", r.g2_err}, {"model_g2", r.model_g2}};
  return j;
}

std::string singles_csv(const analysis::RecordAnalysis& a) {
  std::ostringstream s;
  s.precision(17);
  s << "# flyby_output: singles per time slice (flyby analyze)\n# record: " << a.record_path << "\n";
  s << "slice_mid_s";
  for (const auto& c : a.singles.channels) {
    auto i = a.header.channel_index(static_cast<records::ChannelId>(c.channel));
    const std::string n = i ? a.header.channels[*i].name : std::to_string(c.channel);
    s << "," << n << "_counts," << n << "_rate_per_s," << n << "_rate_err_per_s";
  }
  s << "\n";
  for (std::size_t k = 0; k < a.singles.slice_mid_s.size(); ++k) {
    s << a.singles.slice_mid_s[k];
    for (const auto& c : a.singles.channels)
      s << "," << c.slice_counts[k] << "," << c.slice_rate_per_s[k] << ","
        << std::sqrt(static_cast<double>(c.slice_counts[k])) / a.singles.slice_duration_s;
    s << "\n";
  }
  return s.str();
}

// Removes a half-built temporary directory unless released.
struct TempDirGuard {
  fs::path path;
  bool keep = false;
  ~TempDirGuard() {
    if (!keep) {
      std::error_code ec;
      fs::remove_all(path, ec);
    }
  }
};

void run_analyze(AnalyzeArgs a) {
  if (a.ground_F) a.o.ground_F = a.ground_F;
  const auto result = analysis::analyze_record(a.record, a.o);

  fs::path target = a.output.empty() ? fs::path(fs::path(a.record).replace_extension("").string() + "_report") : fs::path(a.output);
  if (target.filename().empty()) target = target.parent_path();
  const fs::path parent = target.parent_path().empty() ? fs::path(".") : target.parent_path();
  if (!fs::is_directory(parent)) throw IoError("report directory " + target.string() + ": parent folder does not exist");
  if (fs::exists(target) && !(fs::is_directory(target) && fs::exists(target / "report.md")))
    throw InputError("-o " + target.string() + " exists and is not a flyby report directory; choose another name");
  TempDirGuard tmp{parent / ("." + target.filename().string() + ".part-" + std::to_string(::getpid()))};
  fs::remove_all(tmp.path);
  if (!fs::create_directory(tmp.path)) throw IoError("cannot create " + tmp.path.string());

  write_text(tmp.path / "singles.csv", singles_csv(result));
  const auto prov = current_provenance();
  std::vector<std::pair<std::string, std::string>> figures;
  std::string figure_problem = a.no_plots ? "figures switched off (--no-plots)" : "";
  auto plot = [&](const std::string& script, const std::string& input, const std::string& key, const std::string& file) {
    if (!figure_problem.empty()) return;
    try {
      run_plot_script(script, {(tmp.path / input).string()}, tmp.path / file);
      figures.emplace_back(key, file);
    } catch (const Error& e) {
      figure_problem = std::string("plotting unavailable: ") + e.what();
    }
  };
  plot("plot_singles.py", "singles.csv", "singles", "singles.png");
  for (const auto& p : result.pairs) {
    const auto label = analysis::pair_label(p);
    if (p.histogram.status == analysis::CorrelatorStatus::kSuccess) {
      std::ofstream f(tmp.path / (label + ".csv"));
      analysis::write_g2_csv(f, p.histogram,
                             {{"flyby_output", "correlation histogram (flyby analyze)"},
                              {"flyby_version", prov.version},
                              {"command_line", prov.command_line},
                              {"record", a.record},
                              {"start_channel", p.start_name},
                              {"stop_channel", p.stop_name},
                              {"bin_width_ps", std::to_string(p.histogram.options.bin_width_ps)},
                              {"duration_s", std::to_string(p.histogram.duration_ps * 1e-12)},
                              {"n_start", std::to_string(p.histogram.n_start_used)},
                              {"n_stop", std::to_string(p.histogram.n_stop)}});
      if (!f) throw IoError("cannot write " + (tmp.path / (label + ".csv")).string());
    }
    if (p.fit) {
      write_text(tmp.path / ("fit_" + label + ".json"), fit_json(p).dump(1) + "\n");
      plot("plot_fit.py", "fit_" + label + ".json", label, label + ".png");
    }
  }
  write_text(tmp.path / "report.md", analysis::markdown_report(result, figures, figure_problem));
  auto summary = result.to_json();
  summary["flyby_output"] = "analysis summary (flyby analyze)";
  summary["flyby_version"] = prov.version;
  summary["command_line"] = prov.command_line;
  summary["report_dir"] = target.string();
  summary["figures_missing"] = figure_problem.empty() ? nlohmann::json(nullptr) : nlohmann::json(figure_problem);
  write_text(tmp.path / "summary.json", summary.dump(1) + "\n");

  // Replace an earlier report only once the new one is complete.
  if (fs::exists(target)) {
    const fs::path old = parent / ("." + target.filename().string() + ".old-" + std::to_string(::getpid()));
    fs::rename(target, old);
    fs::rename(tmp.path, target);
    tmp.keep = true;
    std::error_code ec;
    fs::remove_all(old, ec);
  } else {
    fs::rename(tmp.path, target);
    tmp.keep = true;
  }

  if (a.json) std::cout << summary.dump(1) << "\n";
  else std::cout << result.brief_report() << "\nreport: " << (target / "report.md").string() << "\n";
  if (!figure_problem.empty() && !a.no_plots) {
    std::cerr << "flyby analyze: warning: report written without figures: " << figure_problem << "\n";
    std::cout.flush();
    std::exit(4);
  }
}

void register_analyze(CLI::App& app) {
  auto args = std::make_shared<AnalyzeArgs>();
  auto* c = app.add_subcommand("analyze",
                               "Singles and drift, g2 of the relevant channel pairs, fits, B from the beat frequency, "
                               "atom number and transit time; writes a report directory (report.md with figures). "
                               "Exit 4: report written but figures missing");
  c->add_option("record", args->record, "time-tag record (.h5), simulated or imported")->required();
  c->add_option("-o,--output", args->output, "report directory (default: RECORD_report next to the record)");
  c->add_flag("--json", args->json, "print the summary as JSON on standard output");
  c->add_option("--bin-ns", args->o.bin_width_ns, "g2 bin width in ns")->capture_default_str();
  c->add_option("--range-ns", args->o.range_ns, "largest |tau| of the g2 histograms in ns")->capture_default_str();
  c->add_option("--tau-min-ns", args->o.tau_min_ns, "fit bins with tau >= this (ns): skips the single-atom dynamics")
      ->capture_default_str();
  c->add_option("--slices", args->o.slices, "time slices for the singles drift test")->capture_default_str();
  c->add_option("--jackknife-blocks", args->o.jackknife_blocks,
                "time blocks of the jackknife error estimate (0: fit errors only)")
      ->capture_default_str();
  c->add_option("--pair", args->o.pairs, "channel pair START:STOP (names or ids); repeatable; default from the roles");
  c->add_option("--model", args->o.model, "fit model for every pair (e.g. level+beat), or auto")->capture_default_str();
  c->add_option("--significance", args->o.significance_sigma, "auto model: keep a term above this many sigma")
      ->capture_default_str();
  c->add_option("--delta-m", args->o.delta_m, "Delta m of the heralded ground-state coherence (default from the channels)");
  c->add_option("--species", args->o.species, "atom of a measured record: Rb87, Rb85, Cs133, Na23, K39");
  c->add_option("--ground-F", args->ground_F, "ground hyperfine level F of the beat (with --species)");
  c->add_option("--line", args->o.line, "optical line with --species: D1 or D2")->capture_default_str();
  c->add_flag("--no-plots", args->no_plots, "do not draw figures");
  c->add_option("--threads", args->o.threads, "OpenMP threads of the correlator (default: all)");
  c->add_option("--block-tags", args->o.block_tags, "tags read per block");
  c->callback([args] { run_analyze(*args); });
}

}  // namespace

const CommandRegistrar kRegisterAnalyze{63, &register_analyze};

}  // namespace flyby::cli
