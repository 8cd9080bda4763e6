// The factors c_k e^{−iλ_k τ} of the exact propagator ψ(τ) = V e^{−iΛτ} V⁻¹ψ0, two at a time.
// The waiting-time search evaluates them a few times per jump for every eigenvalue, and the
// scalar libm exp and sincos calls were a quarter to a half of the time of small atoms
// (docs/performance.md). Here exp, sin and cos are computed together for two lanes with plain
// IEEE double arithmetic (range reduction by Cody–Waite, Taylor polynomials of degree 13/17/18
// on the reduced interval; no fused multiply–add, no table, no libm), so the result depends only
// on the inputs — the same on every x86-64 (or other IEEE) machine and for any thread count —
// and agrees with libm to a few units in the last place (tests/engine/trajectory/phase_factors_test.cpp).
// Arguments outside the reduced range (|Re λ τ| > 1e5, Im λ τ < −700) take the libm path.
#pragma once

#include <complex>

namespace flyby::trajectory {

// out_k = c_k · e^{im_k τ} (cos(re_k τ) − i sin(re_k τ)) for k < n, i.e. c_k e^{−iλ_k τ} with
// λ_k = re_k + i im_k. `re`, `im` of length n; out may alias c.
void phase_factors(const double* re, const double* im, double tau, const std::complex<double>* c,
                   std::complex<double>* out, long n);

// The two-lane kernels, exposed for the accuracy test: sin, cos and exp of x[0], x[1] (sincos
// for |x| ≤ 1e5, exp for x ≥ −700; outside, the libm functions are used).
void sincos2(const double x[2], double s[2], double c[2]);
void exp2v(const double x[2], double e[2]);

}  // namespace flyby::trajectory
