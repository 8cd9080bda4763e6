// Engine workloads shared by bench/bench_engine.cpp and `flyby bench` (tools/flyby/cmd_bench.cpp):
// a driven two-level atom and a driven 87Rb F=2 → F′=3 atom (12 sublevels) in a tilted magnetic
// field, optionally coupled to two resonator polarization modes (cut at `cutoff` photons) with a
// constant or Gaussian-transit coupling. bench/scipy_waiting_time.py implements the first two in
// numpy/scipy. Units: rad/µs; Γ = 2π·6.0666 MHz (Steck, Rb87 D line data, REFERENCES.md [memory]).
#pragma once

#include <gsl/gsl_sf_coupling.h>

#include <cmath>
#include <vector>

#include "engine/trajectory/model.h"

namespace flyby::bench_models {

using operators::Complex;
using operators::LocalMatrix;
using operators::Operator;

inline constexpr double kPi = 3.14159265358979323846;
inline const double kGamma = 2 * kPi * 6.0666;

inline double cg(int two_j1, int two_m1, int two_j2, int two_m2, int two_J, int two_M) {
  if (two_m1 + two_m2 != two_M) return 0.0;
  const double sign = (((two_j1 - two_j2 + two_M) / 2) % 2 == 0) ? 1.0 : -1.0;
  return sign * std::sqrt(two_J + 1.0) * gsl_sf_coupling_3j(two_j1, two_j2, two_J, two_m1, two_m2, -two_M);
}

// A_{-1}, A_0, A_{+1} of a closed F → F′ transition (ground first, then excited).
inline std::vector<LocalMatrix> lowering(int two_F, int two_Fp) {
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

inline space::Vector basis(int d, int k) {
  space::Vector v = space::Vector::Zero(d);
  v[k] = 1;
  return v;
}

inline trajectory::Model two_level(double end_us) {
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
inline trajectory::Model rb_atom(double end_us, int cutoff, bool transit) {
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

}  // namespace flyby::bench_models
