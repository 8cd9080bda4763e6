// Throughput of the quantum-jump engine (jumps/s and steps/s per core) on three problems:
// a driven two-level atom, a driven 87Rb F=2 → F′=3 atom (12 sublevels) in a tilted magnetic
// field, and that atom coupled to two resonator polarization modes cut at 2 photons (108
// states), time independent and with a Gaussian transit coupling (adaptive integrator).
// Units: rad/µs; Γ = 2π·6.0666 MHz (Steck, Rb87 D line data, REFERENCES.md [memory]).
// Compare with bench/scipy_waiting_time.py (same algorithm in plain numpy/scipy).
#include <benchmark/benchmark.h>
#include <gsl/gsl_sf_coupling.h>

#include <cmath>

#include "engine/common/random.h"
#include "engine/trajectory/integrator.h"

using namespace flyby;
using operators::Complex;
using operators::LocalMatrix;
using operators::Operator;

namespace {

constexpr double kPi = 3.14159265358979323846;
const double kGamma = 2 * kPi * 6.0666;

double cg(int two_j1, int two_m1, int two_j2, int two_m2, int two_J, int two_M) {
  if (two_m1 + two_m2 != two_M) return 0.0;
  const double sign = (((two_j1 - two_j2 + two_M) / 2) % 2 == 0) ? 1.0 : -1.0;
  return sign * std::sqrt(two_J + 1.0) * gsl_sf_coupling_3j(two_j1, two_j2, two_J, two_m1, two_m2, -two_M);
}

// A_{-1}, A_0, A_{+1} of a closed F → F′ transition (ground first, then excited).
std::vector<LocalMatrix> lowering(int two_F, int two_Fp) {
  const int ng = two_F + 1, ne = two_Fp + 1, d = ng + ne;
  std::vector<LocalMatrix> out;
  for (int q = -1; q <= 1; ++q) {
    LocalMatrix a = LocalMatrix::Zero(d, d);
    for (int i = 0; i < ng; ++i)
      for (int j = 0; j < ne; ++j) {
        const int tm = -two_F + 2 * i, tmp = -two_Fp + 2 * j;
        if (tmp == tm + 2 * q) a(i, ng + j) = cg(two_F, tm, 2, 2 * q, two_Fp, tmp);
      }
    out.push_back(a);
  }
  return out;
}

space::Vector basis(int d, int k) {
  space::Vector v = space::Vector::Zero(d);
  v[k] = 1;
  return v;
}

trajectory::Model two_level(double end_us) {
  trajectory::Model m;
  m.subsystems = {space::Subsystem::levels("atom", 2)};
  m.initial = {{0, basis(2, 0)}};
  LocalMatrix sm = LocalMatrix::Zero(2, 2);
  sm(0, 1) = 1;
  m.hamiltonian.add(Operator::local(0, sm + sm.adjoint(), kGamma / 2));  // Ω = Γ
  m.channels = {{"fluorescence", true, Operator::local(0, sm, std::sqrt(kGamma))}};
  m.physical_decay = Operator::local(0, sm.adjoint() * sm, kGamma);
  m.end_us = end_us;
  return m;
}

// 87Rb F=2 → F′=3 in B (ground g_F = 1/2, excited 2/3, 1.4 MHz/G·g_F·m at 3 G), drive Ω = Γ
// linearly polarized at 50° from B, detuned by Γ/2.
trajectory::Model rb_atom(double end_us, int cutoff, bool transit) {
  const int ng = 5, ne = 7, d = 12;
  auto a = lowering(4, 6);
  const double zg = 2 * kPi * 1.4 * 3 * 0.5, ze = 2 * kPi * 1.4 * 3 * 2.0 / 3, th = 50 * kPi / 180;
  LocalMatrix h0 = LocalMatrix::Zero(d, d);
  for (int i = 0; i < ng; ++i) h0(i, i) = zg * (i - 2);
  for (int j = 0; j < ne; ++j) h0(ng + j, ng + j) = ze * (j - 3) - kGamma / 2;
  const double c[3] = {std::sin(th) / std::sqrt(2.0), std::cos(th), -std::sin(th) / std::sqrt(2.0)};
  LocalMatrix up = LocalMatrix::Zero(d, d), pe = LocalMatrix::Zero(d, d);
  for (int k = 0; k < 3; ++k) up += c[k] * a[k].adjoint();
  for (int j = 0; j < ne; ++j) pe(ng + j, ng + j) = 1;
  trajectory::Model m;
  const int atom = cutoff > 0 ? 2 : 0;
  if (cutoff > 0) {
    m.subsystems = {space::Subsystem::mode("mode H", cutoff), space::Subsystem::mode("mode V", cutoff)};
    m.initial = {{0, basis(cutoff + 1, 0)}, {1, basis(cutoff + 1, 0)}};
  }
  m.subsystems.push_back(space::Subsystem::levels("atom", d));
  m.initial.push_back({atom, basis(d, 0)});
  m.hamiltonian.add(Operator::local(atom, h0));
  m.hamiltonian.add(Operator::local(atom, up + up.adjoint(), kGamma / 2));
  const char* names[3] = {"q=-1", "q=0", "q=+1"};
  for (int k = 0; k < 3; ++k) m.channels.push_back({names[k], true, Operator::local(atom, a[k], std::sqrt(kGamma))});
  m.physical_decay = Operator::local(atom, pe, kGamma);
  if (cutoff > 0) {
    // Modes along x̂ and ŷ: x̂ = (e₋₁ − e₊₁)/√2, ŷ = i(e₋₁ + e₊₁)/√2; g = 2π·10 MHz, κ = 2π·3 MHz.
    const double g = 2 * kPi * 10, kappa = 2 * kPi * 3;
    LocalMatrix an = LocalMatrix::Zero(cutoff + 1, cutoff + 1);
    for (int n = 1; n <= cutoff; ++n) an(n - 1, n) = std::sqrt(double(n));
    const LocalMatrix ax = (a[0] - a[2]) / std::sqrt(2.0), ay = Complex(0, 1) * (a[0] + a[2]) / std::sqrt(2.0);
    operators::Coefficient cg = operators::Coefficient::scalar(g);
    if (transit)  // Gaussian transit through the mode waist, 1 µs wide, centred at 1.5 µs
      cg = operators::Coefficient::of_time([g](double t) { return Complex(g * std::exp(-(t - 1.5) * (t - 1.5)), 0.0); });
    m.hamiltonian.add_hermitian(cg, Operator::product({{0, an.adjoint()}, {atom, ax}}));
    m.hamiltonian.add_hermitian(cg, Operator::product({{1, an.adjoint()}, {atom, ay}}));
    for (int k = 0; k < 2; ++k) {
      m.channels.push_back({k ? "output V" : "output H", true, Operator::local(k, an, std::sqrt(2 * kappa))});
      m.physical_decay += Operator::local(k, an.adjoint() * an, 2 * kappa);
    }
  }
  m.end_us = end_us;
  return m;
}

void run(benchmark::State& state, const trajectory::Model& model, trajectory::Options opt = {}) {
  opt.fock_error_population = 1.0;  // cutoff 2 is a benchmark setting, not a physics claim
  opt.fock_warning_population = 1.0;
  trajectory::Integrator integ(model, opt);
  trajectory::Workspace ws;
  std::uint64_t index = 0;
  double jumps = 0, steps = 0;
  for (auto _ : state) {
    Rng rng = make_stream(1, StreamPurpose::kTrajectory, index++);
    auto r = integ.run(rng, ws);
    if (!r.summary.ok()) {
      state.SkipWithError(r.summary.message.c_str());
      break;
    }
    jumps += double(r.summary.jumps);
    steps += double(r.summary.steps());
  }
  state.counters["jumps_per_s"] = benchmark::Counter(jumps, benchmark::Counter::kIsRate);
  state.counters["steps_per_s"] = benchmark::Counter(steps, benchmark::Counter::kIsRate);
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
