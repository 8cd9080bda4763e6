// `flyby simulate CONFIG.toml -o RUN.h5 [--duration-s S] [--seed N] [--threads T] [--json]
// [--progress]`: runs the scenario (models/simulation) and writes a time-tag record; progress
// with an ETA on stderr when stderr is a terminal (or with --progress, e.g. under mpirun), a
// closing summary on stdout. Under `mpirun -np K` every rank runs this; rank 0 prints and writes.
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <iostream>

#include "engine/common/errors.h"
#include "models/config/scenario_config.h"
#include "models/simulation/rank_link.h"
#include "models/simulation/simulation.h"
#include "tools/flyby/commands.h"

namespace {

struct SimulateArgs {
  std::string config, output;
  std::optional<double> duration_s;
  std::optional<std::uint64_t> seed;
  int threads = 0;
  std::size_t block_items = 0;
  bool json = false;
  bool progress = false;
};

void run_simulate(const SimulateArgs& a) {
  const auto checked = flyby::config::check_scenario(flyby::config::load_config_file(a.config));
  flyby::simulation::Options o;
  o.output_path = a.output;
  o.duration_s = a.duration_s;
  o.seed = a.seed;
  o.threads = a.threads;
  o.block_items = a.block_items;
  const bool rank0 = flyby::simulation::current_ranks().rank == 0;
  const bool terminal = isatty(fileno(stderr)) != 0;
  if (rank0 && (terminal || a.progress)) {
    const auto t0 = std::chrono::steady_clock::now();
    auto last = t0;
    // On a terminal one line updated in place 4 times a second; otherwise (a log, mpirun's
    // forwarding) a new line every 5 s.
    const auto every = terminal ? std::chrono::milliseconds(250) : std::chrono::milliseconds(5000);
    bool finished = false;
    o.progress = [t0, last, every, terminal, finished](std::size_t done, std::size_t total) mutable {
      const auto now = std::chrono::steady_clock::now();
      if (finished || (done < total && now - last < every)) return;
      finished = done >= total;
      last = now;
      const double el = std::chrono::duration<double>(now - t0).count();
      const double eta = done > 0 ? el * double(total - done) / double(done) : 0.0;
      std::fprintf(stderr, "%s  trajectories %zu / %zu  (%.0f %%)  elapsed %.1f s  ETA %.1f s   %s",
                   terminal ? "\r" : "", done, total, total ? 100.0 * double(done) / double(total) : 100.0, el, eta,
                   terminal && done < total ? "" : "\n");
      std::fflush(stderr);
    };
  }
  const auto summary = flyby::simulation::simulate(checked, o);
  if (!rank0) return;  // rank 0 prints the summary and reports errors (also those of other ranks)
  if (a.json)
    std::cout << summary.to_json() << "\n";
  else
    std::cout << summary.full_report();
  if (!summary.ok) throw flyby::InputError("simulation stopped early: " + summary.message);
}

void register_simulate(CLI::App& app) {
  auto args = std::make_shared<SimulateArgs>();
  CLI::App* c = app.add_subcommand("simulate", "Simulate a scenario config and write a time-tag record");
  c->add_option("CONFIG", args->config, "Scenario config (.toml)")->required();
  c->add_option("-o,--output", args->output, "Output record (.h5), written atomically")->required();
  c->add_option("--duration-s", args->duration_s, "Lab time to simulate, s (default: run.duration_s)");
  c->add_option("--seed", args->seed, "Master seed (default: run.seed_id)");
  c->add_option("--threads", args->threads, "OpenMP threads (0 = default); never changes the result")
      ->check(CLI::Range(0, 4096));
  c->add_option("--block-items", args->block_items,
                 "Work items (trajectories, empty-resonator pieces) per time block (0 = automatic); bounds memory, never changes the result")
      ->check(CLI::Range(std::size_t(0), std::size_t(1) << 30));
  c->add_flag("--progress", args->progress, "Print progress and ETA to stderr even when it is not a terminal");
  c->add_flag("--json", args->json, "Print the summary as JSON");
  c->callback([args] { run_simulate(*args); });
}

const flyby::cli::CommandRegistrar kRegisterSimulate{40, &register_simulate};

}  // namespace
