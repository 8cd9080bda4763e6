// Throughput of the quantum-jump engine (jumps/s and steps/s per core) on three problems:
// a driven two-level atom, a driven 87Rb F=2 → F′=3 atom (12 sublevels) in a tilted magnetic
// field, and that atom coupled to two resonator polarization modes cut at 2 photons (108
// states), time independent and with a Gaussian transit coupling (adaptive integrator).
// Units: rad/µs; Γ = 2π·6.0666 MHz (Steck, Rb87 D line data, REFERENCES.md [memory]).
// Compare with bench/scipy_waiting_time.py (same algorithm in plain numpy/scipy).
#include <benchmark/benchmark.h>

#include "bench/bench_models.h"
#include "engine/common/random.h"
#include "engine/trajectory/integrator.h"

using namespace flyby;
using operators::Complex;
using operators::LocalMatrix;
using operators::Operator;

using bench_models::rb_atom;
using bench_models::two_level;

namespace {

void run(benchmark::State& state, const trajectory::Model& model, trajectory::Options opt = {}) {
  opt.fock_error_population = 1.0;  // cutoff 2 is a benchmark setting, not a physics claim
  opt.fock_warning_population = 1.0;
  trajectory::Integrator integ(model, opt);
  trajectory::Workspace ws;
  std::uint64_t index = 0;
  double jumps = 0, steps = 0, evals = 0;
  for (auto _ : state) {
    Rng rng = make_stream(1, StreamPurpose::kTrajectory, index++);
    auto r = integ.run(rng, ws);
    if (!r.summary.ok()) {
      state.SkipWithError(r.summary.message.c_str());
      break;
    }
    jumps += double(r.summary.jumps);
    steps += double(r.summary.steps());
    evals += double(r.summary.exponential_evaluations);
  }
  state.counters["jumps_per_s"] = benchmark::Counter(jumps, benchmark::Counter::kIsRate);
  state.counters["steps_per_s"] = benchmark::Counter(steps, benchmark::Counter::kIsRate);
  state.counters["evals_per_jump"] = jumps > 0 ? evals / jumps : 0.0;
}

}  // namespace

static void BM_TwoLevel(benchmark::State& state) { run(state, two_level(20.0)); }
BENCHMARK(BM_TwoLevel)->Unit(benchmark::kMillisecond);

static void BM_TwoLevelAdaptive(benchmark::State& state) {
  trajectory::Options o;
  o.exact_exponential = false;
  run(state, two_level(20.0), o);
}
BENCHMARK(BM_TwoLevelAdaptive)->Unit(benchmark::kMillisecond);

static void BM_Rb87TwelveLevel(benchmark::State& state) { run(state, rb_atom(20.0, 0, false)); }
BENCHMARK(BM_Rb87TwelveLevel)->Unit(benchmark::kMillisecond);

static void BM_Rb87TwoModesCutoff2(benchmark::State& state) { run(state, rb_atom(3.0, 2, false)); }
BENCHMARK(BM_Rb87TwoModesCutoff2)->Unit(benchmark::kMillisecond);

static void BM_Rb87TwoModesCutoff2Transit(benchmark::State& state) { run(state, rb_atom(3.0, 2, true)); }
BENCHMARK(BM_Rb87TwoModesCutoff2Transit)->Unit(benchmark::kMillisecond);

// The same with rtol = 1e-6 (fewer, longer Dormand–Prince steps): the accuracy/speed trade-off.
static void BM_Rb87TwoModesCutoff2TransitRtol1e6(benchmark::State& state) {
  trajectory::Options o;
  o.rtol = 1e-6;
  o.atol = 1e-8;
  run(state, rb_atom(3.0, 2, true), o);
}
BENCHMARK(BM_Rb87TwoModesCutoff2TransitRtol1e6)->Unit(benchmark::kMillisecond);

BENCHMARK_MAIN();
