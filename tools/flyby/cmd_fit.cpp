// `flyby fit`: weighted nonlinear least-squares fit of a g2 model to a correlation CSV
// (engine/analysis/g2_fit.h), JSON result and an optional figure with residuals.
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>
#include <fstream>
#include <sstream>

#include "engine/analysis/g2_csv.h"
#include "engine/analysis/g2_fit.h"
#include "engine/common/atomic_output.h"
#include "engine/common/errors.h"
#include "engine/common/provenance.h"
#include "tools/flyby/commands.h"
#include "tools/flyby/plot_runner.h"

namespace flyby::cli {
namespace {

struct FitArgs {
  std::string csv;
  std::string model = "beats";
  std::string output;
  std::string plot;
  std::optional<double> tau_min_ns, tau_max_ns;
  std::string start;
  bool data_weights = false;
};

nlohmann::ordered_json fit_json(const FitArgs& a, const analysis::G2Csv& in, const analysis::G2FitResult& r) {
  const auto prov = current_provenance();
  nlohmann::ordered_json j;
  j["flyby_output"] = "g2 fit (flyby fit)";
  j["flyby_version"] = prov.version;
  j["command_line"] = prov.command_line;
  j["host"] = prov.host;
  j["date_utc"] = prov.date_utc;
  j["input"] = a.csv;
  for (const auto& [k, v] : in.comments) j["input_meta"][k] = v;
  j["model"] = r.model.spec;
  j["terms"] = nlohmann::json::array();
  for (auto t : r.model.terms) j["terms"].push_back(analysis::to_string(t));
  j["status"] = analysis::to_string(r.fit.status);
  j["message"] = r.fit.message;
  j["parameters"] = nlohmann::json::array();
  for (std::size_t i = 0; i < r.fit.parameters.size(); ++i)
    j["parameters"].push_back({{"name", r.fit.parameter_names[i]},
                               {"value", r.fit.parameters[i]},
                               {"std_error", r.fit.standard_errors[i]},
                               {"start", r.start[i]}});
  std::vector<std::vector<double>> cov(r.fit.parameters.size());
  for (std::size_t i = 0; i < cov.size(); ++i)
    for (std::size_t k = 0; k < cov.size(); ++k)
      cov[i].push_back(r.fit.covariance(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(k)));
  j["covariance"] = cov;
  j["chi2"] = r.fit.chi2;
  j["dof"] = r.fit.dof;
  j["reduced_chi2"] = r.fit.reduced_chi2;
  j["p_value"] = r.fit.p_value;
  j["iterations"] = r.fit.iterations;
  j["weights"] = r.poisson_model_weights ? "poisson-model" : "data";
  j["expected_counts_per_bin"] = r.expected_counts_per_bin;
  j["units"] = "tau in us inside the model (freq_MHz = omega/2pi in MHz, *_us in us, phase in rad); data tau in ns";
  std::vector<double> tau_ns(r.tau_us.size());
  for (std::size_t k = 0; k < tau_ns.size(); ++k) tau_ns[k] = r.tau_us[k] * 1e3;
  j["data"] = {{"tau_ns", tau_ns}, {"g2", r.g2}, {"g2_err", r.g2_err}, {"model_g2", r.model_g2}};
  return j;
}

void run_fit(const FitArgs& a) {
  const auto in = analysis::read_g2_csv(a.csv);
  analysis::G2FitOptions o;
  o.model = a.model;
  if (a.tau_min_ns) o.tau_min_us = *a.tau_min_ns * 1e-3;
  if (a.tau_max_ns) o.tau_max_us = *a.tau_max_ns * 1e-3;
  o.poisson_model_weights = !a.data_weights;
  if (!a.start.empty()) {
    std::stringstream ss(a.start);
    std::string item;
    while (std::getline(ss, item, ',')) {
      try {
        std::size_t used = 0;
        o.start.push_back(std::stod(item, &used));
        if (used != item.size()) throw std::invalid_argument(item);
      } catch (const std::exception&) {
        throw InputError("--start-values: '" + item + "' is not a number");
      }
    }
  }
  const auto r = analysis::fit_g2(in.data, o);
  const auto j = fit_json(a, in, r);
  if (!a.output.empty()) {
    AtomicTextFile f(a.output);
    f.stream() << j.dump(1) << "\n";
    f.commit();
  }
  std::cout << r.full_report();
  if (!a.plot.empty()) {
    std::string json_path = a.output;
    std::unique_ptr<AtomicOutputPath> tmp;
    if (json_path.empty()) {
      tmp = std::make_unique<AtomicOutputPath>(a.plot + ".json");
      std::ofstream f(tmp->temp_path());
      f << j.dump() << "\n";
      f.close();
      json_path = tmp->temp_path().string();
    }
    run_plot_script("plot_fit.py", {json_path}, a.plot);
  }
  if (!r.fit.ok()) std::cerr << "flyby fit: warning: " << analysis::to_string(r.fit.status) << ": " << r.fit.message << "\n";
}

void register_fit(CLI::App& app) {
  auto args = std::make_shared<FitArgs>();
  auto* c = app.add_subcommand("fit", "Weighted nonlinear least-squares fit of a g2 model to a correlation CSV");
  c->add_option("csv", args->csv, "correlation CSV (columns tau_ns, g2, g2_err), e.g. from flyby correlate")->required();
  c->add_option("--model", args->model,
                "model: beats (level+beat), beats2, transit, antibunching, or terms joined by '+': level, beat, "
                "transit_gauss, transit_exp, dip")
      ->capture_default_str();
  c->add_option("-o,--output", args->output, "write the fit result as JSON here");
  c->add_option("--plot", args->plot, "write a figure: data, fit and residuals (.png, .svg, .pdf)");
  c->add_option("--tau-min-ns", args->tau_min_ns, "fit only bins with tau >= this (ns); e.g. 0 for heralded beats");
  c->add_option("--tau-max-ns", args->tau_max_ns, "fit only bins with tau <= this (ns)");
  c->add_option("--start-values", args->start, "comma-separated starting values in parameter order (default: automatic)");
  c->add_flag("--data-weights", args->data_weights,
              "weight by the CSV's g2_err instead of Poisson weights from the model");
  c->callback([args] { run_fit(*args); });
}

}  // namespace

const CommandRegistrar kRegisterFit{61, &register_fit};

}  // namespace flyby::cli
