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
#include <vector>

namespace flyby::trajectory {

// Vector width of the kernels: two lanes (SSE2, every x86-64) or four (AVX2, chosen at run time
// when the CPU has it; no FMA). Each lane runs the same sequence of IEEE operations in both, so
// the results are the same bits (tests/engine/trajectory/phase_factors_test.cpp).
enum class LaneWidth { kTwo, kWide };

// True when this CPU runs the four-lane (AVX2) kernels.
bool wide_lanes_available();

// out_k = c_k · e^{im_k τ} (cos(re_k τ) − i sin(re_k τ)) for k < n, i.e. c_k e^{−iλ_k τ} with
// λ_k = re_k + i im_k. `re`, `im` of length n; out may alias c. The first form uses four lanes
// when the CPU has them and n ≥ 4; the second asks for a width (kWide falls back to two lanes
// without AVX2).
void phase_factors(const double* re, const double* im, double tau, const std::complex<double>* c,
                   std::complex<double>* out, long n);
void phase_factors(const double* re, const double* im, double tau, const std::complex<double>* c,
                   std::complex<double>* out, long n, LaneWidth width);

// The other kernel of every evaluation: y = A·x for a dense complex n × n matrix A (the
// eigenvectors V, or V⁻¹ once per leg), stored by dense_lanes: rows in pairs (an odd n gets a
// zero row), per pair and column j the eight numbers [Re A_ij, Im A_ij, Re A_i+1,j, Im A_i+1,j,
// −Im A_ij, Re A_ij, −Im A_i+1,j, Re A_i+1,j]. Row i's real and imaginary parts are each one sum
// over j in increasing order of A-lanes × Re x_j, plus one such sum of the second half × Im x_j,
// added at the end — the same IEEE operations for two and four lanes. `scratch` holds the
// broadcast x (8 doubles per column).
std::vector<double> dense_lanes(const std::complex<double>* column_major, long n);
void dense_apply(const double* lanes, long n, const std::complex<double>* x, std::complex<double>* y,
                 std::vector<double>& scratch);
void dense_apply(const double* lanes, long n, const std::complex<double>* x, std::complex<double>* y,
                 std::vector<double>& scratch, LaneWidth width);

// The two-lane kernels, exposed for the accuracy test: sin, cos and exp of x[0], x[1] (sincos
// for |x| ≤ 1e5, exp for x ≥ −700; outside, the libm functions are used).
void sincos2(const double x[2], double s[2], double c[2]);
void exp2v(const double x[2], double e[2]);

}  // namespace flyby::trajectory
