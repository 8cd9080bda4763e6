// `flyby bench [--quick] [--json] [--threads-max N] [--scenario PATH]`: standard workloads
// (two-level fluorescence, 87Rb F=2 → F′=3 in a two-mode resonator, the thermal-beam reference
// scenario, the correlator on synthetic tags) at 1..N OpenMP threads, with throughput per core
// and parallel efficiency, so a lab can size a cluster job. Progress goes to stderr; the table
// (or, with --json, machine-readable results) to stdout. Timings are measurements, not checks:
// no result here is asserted on (tests only check that the command runs and the fields exist).
#include <sys/resource.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "bench/bench_models.h"
#include "engine/analysis/correlator.h"
#include "engine/common/errors.h"
#include "engine/common/provenance.h"
#include "engine/common/random.h"
#include "engine/ensemble/ensemble.h"
#include "engine/trajectory/integrator.h"
#include "models/config/scenario_config.h"
#include "models/simulation/simulation.h"
#include "tools/flyby/commands.h"

namespace {

namespace fs = std::filesystem;
using namespace flyby;

struct BenchArgs {
  bool quick = false;
  bool json = false;
  int threads_max = 0;
  std::string scenario;
};

// Process CPU time (all threads), s: with wall time it shows how much of a run the machine's
// other load took away.
double cpu_seconds() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  return double(u.ru_utime.tv_sec + u.ru_stime.tv_sec) + 1e-6 * double(u.ru_utime.tv_usec + u.ru_stime.tv_usec);
}

struct Timer {
  std::chrono::steady_clock::time_point wall0 = std::chrono::steady_clock::now();
  double cpu0 = cpu_seconds();
  double wall() const { return std::chrono::duration<double>(std::chrono::steady_clock::now() - wall0).count(); }
  double cpu() const { return cpu_seconds() - cpu0; }
};

// One measurement: `work` units done by `threads` threads in wall_s (and cpu_s of CPU time).
struct Measurement {
  int threads = 1;
  double work = 0;    // jumps, atom transits or tags
  double wall_s = 0;
  double cpu_s = 0;
  double lab_s = 0;   // simulated lab time (thermal-beam workload only)
};

struct Workload {
  std::string name, unit, description;
  std::vector<Measurement> runs;
};

void progress(const std::string& what) {
  std::fprintf(stderr, "  bench: %s\n", what.c_str());
  std::fflush(stderr);
}

// Trajectories of one engine model, enough to take about `target_s` of CPU at one thread.
Measurement engine_run(const trajectory::Model& model, int threads, std::size_t count) {
  trajectory::Options opt;
  opt.fock_error_population = 1.0;  // cutoff 2 is a benchmark setting, not a physics claim
  opt.fock_warning_population = 1.0;
  trajectory::Integrator integ(model, opt);
  Timer t;
  const auto r = ensemble::run(integ, count, 1, {threads, 0});
  Measurement m;
  m.wall_s = t.wall();
  m.cpu_s = t.cpu();
  m.threads = threads;
  m.work = double(r.summary.jumps);
  if (r.summary.failed > 0) throw InputError("bench: engine workload failed: " + r.summary.first_failure);
  return m;
}

Measurement thermal_run(const config::CheckedScenario& s, int threads, double duration_s) {
  const fs::path out = fs::temp_directory_path() / ("flyby-bench-" + std::to_string(::getpid()) + ".h5");
  simulation::Options o;
  o.output_path = out.string();
  o.duration_s = duration_s;
  o.threads = threads;
  Timer t;
  const auto sum = simulation::simulate(s, o);
  Measurement m;
  m.wall_s = t.wall();
  m.cpu_s = t.cpu();
  std::error_code ec;
  fs::remove(out, ec);
  if (!sum.ok) throw InputError("bench: thermal-beam workload stopped early: " + sum.message);
  m.threads = threads;
  m.work = double(sum.atoms);
  m.lab_s = duration_s;
  return m;
}

// Two channels of Poisson tags at 1 MHz each, generated chunk by chunk (generation not timed),
// correlated over ±100 ns in 100 ps bins.
Measurement correlator_run(int threads, std::size_t n_tags) {
  analysis::CorrelatorOptions co;
  co.start_channel = 0;
  co.stop_channel = 1;
  co.bin_width_ps = 100;
  co.range_ps = 100000;
  co.threads = threads;
  analysis::Correlator corr(co);
  Rng rng = make_stream(1, StreamPurpose::kTrajectory, 0);
  constexpr std::size_t kChunk = 1 << 20;
  std::vector<std::int64_t> time(kChunk);
  std::vector<std::uint8_t> channel(kChunk);
  const double mean_gap_ps = 5e5;  // both channels together: 2 MHz
  double t_ps = 0;
  double wall = 0, cpu = 0;
  for (std::size_t done = 0; done < n_tags;) {
    const std::size_t n = std::min(kChunk, n_tags - done);
    for (std::size_t i = 0; i < n; ++i) {
      t_ps += -std::log(uniform_open0(rng)) * mean_gap_ps;
      time[i] = std::int64_t(t_ps);
      channel[i] = std::uint8_t(uniform_open0(rng) < 0.5 ? 0 : 1);
    }
    Timer t;
    corr.add_chunk(std::span<const std::int64_t>(time.data(), n), std::span<const std::uint8_t>(channel.data(), n));
    wall += t.wall();
    cpu += t.cpu();
    done += n;
  }
  Timer t;
  const auto h = corr.finish();
  wall += t.wall();
  cpu += t.cpu();
  if (h.n_tags != n_tags) throw InputError("bench: correlator saw a different number of tags");
  Measurement m;
  m.threads = threads;
  m.work = double(n_tags);
  m.wall_s = wall;
  m.cpu_s = cpu;
  return m;
}

std::string find_scenario(const std::string& given) {
  if (!given.empty()) {
    if (!fs::exists(given)) throw InputError("bench: --scenario file not found: " + given);
    return given;
  }
  const std::string rel = "configs/thermal_beam_reference.toml";
  if (fs::exists(rel)) return rel;
  // The source tree this program was built from (FLYBY_PLOT_DIR is <source>/tools/plot).
  const fs::path src = fs::path(FLYBY_PLOT_DIR).parent_path().parent_path() / rel;
  if (fs::exists(src)) return src.string();
  throw InputError("bench: configs/thermal_beam_reference.toml not found; give --scenario PATH");
}

double rate(const Measurement& m) { return m.wall_s > 0 ? m.work / m.wall_s : 0.0; }
double rate_per_core(const Measurement& m) { return rate(m) / double(m.threads); }

nlohmann::json to_json(const std::vector<Workload>& ws, const BenchArgs& a, int threads_max) {
  nlohmann::json j;
  const auto p = current_provenance();
  j["flyby_version"] = p.version;
  j["host"] = p.host;
  j["date_utc"] = p.date_utc;
  j["quick"] = a.quick;
  j["threads_max_count"] = threads_max;
  auto& arr = j["workloads"] = nlohmann::json::array();
  for (const auto& w : ws) {
    nlohmann::json wj;
    wj["name"] = w.name;
    wj["unit"] = w.unit;
    wj["description"] = w.description;
    auto& runs = wj["runs"] = nlohmann::json::array();
    const double base = w.runs.empty() ? 0.0 : rate_per_core(w.runs.front());
    for (const auto& m : w.runs) {
      nlohmann::json r;
      r["threads_count"] = m.threads;
      r["work_count"] = m.work;
      r["wall_s"] = m.wall_s;
      r["cpu_s"] = m.cpu_s;
      r["rate_per_s"] = rate(m);
      r["rate_per_core_per_s"] = rate_per_core(m);
      r["rate_per_cpu_s"] = m.cpu_s > 0 ? m.work / m.cpu_s : 0.0;
      r["efficiency_fraction"] = base > 0 ? rate_per_core(m) / base : 0.0;
      if (m.lab_s > 0) {
        r["lab_s"] = m.lab_s;
        r["lab_s_per_core_s"] = m.lab_s / (m.wall_s * m.threads);
        r["lab_s_per_cpu_s"] = m.cpu_s > 0 ? m.lab_s / m.cpu_s : 0.0;
      }
      runs.push_back(r);
    }
    arr.push_back(wj);
  }
  return j;
}

void print_table(const std::vector<Workload>& ws) {
  std::printf("%-22s %7s %12s %14s %10s %9s %9s\n", "workload", "threads", "work", "per core /s", "efficiency",
              "wall s", "CPU s");
  for (const auto& w : ws) {
    const double base = w.runs.empty() ? 0.0 : rate_per_core(w.runs.front());
    for (const auto& m : w.runs) {
      std::printf("%-22s %7d %12.4g %14.4g %9.1f%% %9.3f %9.3f", w.name.c_str(), m.threads, m.work, rate_per_core(m),
                  base > 0 ? 100.0 * rate_per_core(m) / base : 0.0, m.wall_s, m.cpu_s);
      if (m.lab_s > 0) std::printf("   %.4g lab s per core-s", m.lab_s / (m.wall_s * m.threads));
      std::printf("\n");
    }
    std::printf("%-22s unit: %s per core per wall second; %s\n", "", w.unit.c_str(), w.description.c_str());
  }
  std::printf("Efficiency = rate per core at T threads / rate at 1 thread. On a machine shared with other\n"
              "jobs compare wall and CPU seconds: CPU < threads x wall means the threads did not get whole cores.\n");
}

void run_bench(const BenchArgs& a) {
  const int nmax = a.threads_max > 0 ? a.threads_max : ensemble::omp_default_threads();
  const config::CheckedScenario scenario = config::check_scenario(config::load_config_file(find_scenario(a.scenario)));
  // Sizes: --quick runs each workload for a fraction of a second.
  const std::size_t two_level_count = a.quick ? 20 : 400;       // trajectories of 20 µs
  const std::size_t rb_count = a.quick ? 4 : 200;                 // trajectories of 3 µs
  const double lab_s = a.quick ? 0.002 : 0.1;                     // thermal-beam lab time
  const std::size_t tags = a.quick ? std::size_t(1e6) : std::size_t(1e8);

  std::vector<Workload> ws;
  ws.push_back({"two_level", "jumps", "driven two-level atom, Omega = Gamma, exact exponentials", {}});
  ws.push_back({"rb87_two_mode_resonator", "jumps",
                "87Rb F=2 -> F'=3 (12 sublevels) + two modes at Fock cutoff 2 (108 states)", {}});
  ws.push_back({"thermal_beam_reference", "atom transits",
                "configs/thermal_beam_reference.toml (10^4 atoms/s), " + std::to_string(lab_s) + " s lab time", {}});
  ws.push_back({"correlator", "tags", "two-channel Poisson tags, +-100 ns in 100 ps bins, public Correlator API", {}});
  for (int t = 1; t <= nmax; ++t) {
    progress("two-level, " + std::to_string(t) + " thread(s)");
    ws[0].runs.push_back(engine_run(bench_models::two_level(20.0), t, two_level_count));
    progress("87Rb in a two-mode resonator, " + std::to_string(t) + " thread(s)");
    ws[1].runs.push_back(engine_run(bench_models::rb_atom(3.0, 2, false), t, rb_count));
    progress("thermal-beam reference scenario, " + std::to_string(t) + " thread(s)");
    ws[2].runs.push_back(thermal_run(scenario, t, lab_s));
    progress("correlator on " + std::to_string(tags) + " tags, " + std::to_string(t) + " thread(s)");
    ws[3].runs.push_back(correlator_run(t, tags));
  }
  if (a.json)
    std::cout << to_json(ws, a, nmax).dump(2) << "\n";
  else
    print_table(ws);
}

void register_bench(CLI::App& app) {
  auto args = std::make_shared<BenchArgs>();
  CLI::App* c = app.add_subcommand("bench", "Run standard workloads: throughput per core and parallel efficiency");
  c->add_flag("--quick", args->quick, "Small workloads (seconds in total), e.g. to check an installation");
  c->add_flag("--json", args->json, "Print machine-readable results (JSON) instead of the table");
  c->add_option("--threads-max", args->threads_max, "Measure at 1..N OpenMP threads (0 = the OpenMP default)")
      ->check(CLI::Range(0, 4096));
  c->add_option("--scenario", args->scenario,
                "Thermal-beam scenario config (default: configs/thermal_beam_reference.toml)");
  c->callback([args] { run_bench(*args); });
}

const flyby::cli::CommandRegistrar kRegisterBench{90, &register_bench};

}  // namespace
