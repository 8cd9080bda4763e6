// Small physical models built directly from engine primitives for the engine's validation tests
// (the full scenario layer lives in models/). Conventions of shared/DESIGN.md §3: ħ = 1, rates in
// 1/µs, H = −Δσ₊σ₋ + (Ω/2)(σ₊ + σ₋) for a driven two-level atom, H = g(a†σ + σ†a) + E(a + a†)
// for an atom in a resonantly driven resonator, collapses √Γ σ and √(2κ) a.
#pragma once

#include <cmath>
#include <cstdlib>
#include <gsl/gsl_sf_coupling.h>

#include "engine/trajectory/model.h"

namespace flyby::test {

using operators::Complex;
using operators::LocalMatrix;
using operators::Operator;

// FLYBY_TEST_SCALE (default 1) shrinks Monte Carlo sample sizes, e.g. 0.25 under sanitizers;
// tolerances always come from the standard errors of the sample actually drawn.
inline double test_scale() {
  const char* s = std::getenv("FLYBY_TEST_SCALE");
  double v = s ? std::atof(s) : 1.0;
  return v > 0 ? v : 1.0;
}
inline long scaled(long n) { return std::max(1L, long(std::lround(double(n) * test_scale()))); }

inline LocalMatrix sigma_minus() {  // |g⟩⟨e|, basis {g, e}
  LocalMatrix m = LocalMatrix::Zero(2, 2);
  m(0, 1) = 1.0;
  return m;
}

inline LocalMatrix annihilation(int cutoff) {
  LocalMatrix a = LocalMatrix::Zero(cutoff + 1, cutoff + 1);
  for (int n = 1; n <= cutoff; ++n) a(n - 1, n) = std::sqrt(double(n));
  return a;
}

inline space::Vector basis(int dim, int k) {
  space::Vector v = space::Vector::Zero(dim);
  v[k] = 1.0;
  return v;
}

// Driven two-level atom (subsystem 0), one detected channel "fluorescence".
inline trajectory::Model two_level(double omega, double gamma, double delta, double end_us) {
  trajectory::Model m;
  m.subsystems = {space::Subsystem::levels("atom", 2)};
  m.initial = {{0, basis(2, 0)}};
  const LocalMatrix sm = sigma_minus();
  const LocalMatrix ee = sm.adjoint() * sm;
  m.hamiltonian.add(Operator::local(0, ee, -delta));
  m.hamiltonian.add(Operator::local(0, sm + sm.adjoint(), omega / 2));
  m.channels = {{"fluorescence", true, Operator::local(0, sm, std::sqrt(gamma))}};
  m.physical_decay = Operator::local(0, ee, gamma);
  m.end_us = end_us;
  return m;
}

// Resonator mode (subsystem 0, cutoff `cutoff`) driven with E, plus `n_atoms` two-level atoms
// (subsystems 1..N) with equal coupling g, all present from the start in |0, g…g⟩.
// Channel 0: resonator output √(2κ) a (detected); channels 1..N: spontaneous emission √Γ σ_j.
inline trajectory::Model resonator(double g, double kappa, double gamma, double drive, int n_atoms, int cutoff,
                                   double end_us) {
  trajectory::Model m;
  m.subsystems.push_back(space::Subsystem::mode("resonator", cutoff));
  const LocalMatrix a = annihilation(cutoff);
  const LocalMatrix sm = sigma_minus();
  m.initial.push_back({0, basis(cutoff + 1, 0)});
  m.hamiltonian.add(Operator::local(0, a + a.adjoint(), drive));
  m.channels.push_back({"output", true, Operator::local(0, a, std::sqrt(2 * kappa))});
  m.physical_decay = Operator::local(0, a.adjoint() * a, 2 * kappa);
  for (int j = 1; j <= n_atoms; ++j) {
    m.subsystems.push_back(space::Subsystem::levels("atom " + std::to_string(j), 2));
    m.initial.push_back({j, basis(2, 0)});
    m.hamiltonian.add_hermitian(operators::Coefficient::scalar(g), Operator::product({{0, a.adjoint()}, {j, sm}}));
    m.channels.push_back({"atom " + std::to_string(j), false, Operator::local(j, sm, std::sqrt(gamma))});
    m.physical_decay += Operator::local(j, sm.adjoint() * sm, gamma);
  }
  m.end_us = end_us;
  return m;
}

// Clebsch–Gordan ⟨j1 m1; j2 m2 | J M⟩ (Condon–Shortley) from GSL's 3j symbol:
// ⟨j1 m1 j2 m2|J M⟩ = (−1)^{j1−j2+M} √(2J+1) (j1 j2 J; m1 m2 −M) (Edmonds (3.7.3)).
inline double clebsch_gordan(int two_j1, int two_m1, int two_j2, int two_m2, int two_J, int two_M) {
  if (two_m1 + two_m2 != two_M) return 0.0;
  const int phase2 = two_j1 - two_j2 + two_M;  // twice the exponent, always even
  const double sign = ((phase2 / 2) % 2 == 0) ? 1.0 : -1.0;
  return sign * std::sqrt(two_J + 1.0) * gsl_sf_coupling_3j(two_j1, two_j2, two_J, two_m1, two_m2, -two_M);
}

// Closed F → F′ transition: basis ground m = −F..F, then excited m′ = −F′..F′ (dimension
// 2F+1 + 2F′+1). A_q = Σ ⟨F m; 1 q | F′ m′⟩ |F m⟩⟨F′ m′| with m′ = m + q, so Σ_q A_q†A_q = P_e.
// Returns A_{−1}, A_0, A_{+1}.
inline std::vector<LocalMatrix> dipole_lowering(int two_F, int two_Fp) {
  const int ng = two_F + 1, ne = two_Fp + 1, d = ng + ne;
  std::vector<LocalMatrix> out;
  for (int q = -1; q <= 1; ++q) {
    LocalMatrix a = LocalMatrix::Zero(d, d);
    for (int i = 0; i < ng; ++i)
      for (int j = 0; j < ne; ++j) {
        const int two_m = -two_F + 2 * i, two_mp = -two_Fp + 2 * j;
        if (two_mp != two_m + 2 * q) continue;
        a(i, ng + j) = clebsch_gordan(two_F, two_m, 2, 2 * q, two_Fp, two_mp);
      }
    out.push_back(a);
  }
  return out;
}

// Parameters of the F = 1 → F′ = 2 test atom in a tilted field, shared with
// tests/reference/multilevel_master.py (same numbers on its command line).
struct MultilevelParams {
  double gamma = 1.0;         // Γ, 1/µs
  double omega = 1.2;         // Rabi frequency of the drive, rad/µs
  double delta = 0.3;         // drive detuning ω_L − ω_0, rad/µs
  double theta = 0.6;         // angle between the linear drive polarization and B, rad
  double zeeman_g = 0.7;      // ground Zeeman shift per unit m, rad/µs (g_F μB B/ħ)
  double zeeman_e = 0.45;     // excited Zeeman shift per unit m′, rad/µs
};

// H = Σ_m zg·m |m⟩⟨m| + Σ_m′ (zeeman_e·m′ − Δ) |m′⟩⟨m′| + (Ω/2)(D + D†),
// D = Σ_q c_q A_q† with the polarization ε = cosθ e₀ + sinθ x̂ in the B frame,
// x̂ = (e₋₁ − e₊₁)/√2 → c₀ = cosθ, c₊₁ = −sinθ/√2, c₋₁ = +sinθ/√2.
// Here q labels the change of m on *excitation* (A_q† takes |F m⟩ to |F′ m+q⟩, absorbing e_q
// light). Channels 0, 1, 2 = √Γ A_{−1}, √Γ A_0, √Γ A_{+1}: decay m′ → m′+1 (σ− light),
// m′ → m′ (π), m′ → m′−1 (σ+ light). (LevelStructure labels the same operators by −q.)
inline trajectory::Model multilevel(const MultilevelParams& p, double end_us) {
  const int two_F = 2, two_Fp = 4, ng = 3, ne = 5, d = ng + ne;
  auto a = dipole_lowering(two_F, two_Fp);
  LocalMatrix h0 = LocalMatrix::Zero(d, d);
  for (int i = 0; i < ng; ++i) h0(i, i) = p.zeeman_g * (i - 1);
  for (int j = 0; j < ne; ++j) h0(ng + j, ng + j) = p.zeeman_e * (j - 2) - p.delta;
  const double c[3] = {std::sin(p.theta) / std::sqrt(2.0), std::cos(p.theta), -std::sin(p.theta) / std::sqrt(2.0)};
  LocalMatrix raise = LocalMatrix::Zero(d, d);
  for (int k = 0; k < 3; ++k) raise += c[k] * a[k].adjoint();
  trajectory::Model m;
  m.subsystems = {space::Subsystem::levels("atom", d)};
  m.initial = {{0, basis(d, 0)}};
  m.hamiltonian.add(Operator::local(0, h0));
  m.hamiltonian.add(Operator::local(0, raise + raise.adjoint(), p.omega / 2));
  const char* names[3] = {"q=-1", "q=0", "q=+1"};
  LocalMatrix pe = LocalMatrix::Zero(d, d);
  for (int j = 0; j < ne; ++j) pe(ng + j, ng + j) = 1.0;
  for (int k = 0; k < 3; ++k) m.channels.push_back({names[k], true, Operator::local(0, a[k], std::sqrt(p.gamma))});
  m.physical_decay = Operator::local(0, pe, p.gamma);
  m.end_us = end_us;
  return m;
}

}  // namespace flyby::test
