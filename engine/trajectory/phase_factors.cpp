// Two-lane exp / sincos for the exact propagator's phase factors (see phase_factors.h). Hand
// written because the libm calls are scalar and were the largest share of the time of small
// atoms (bench/bench_engine BM_Rb87TwelveLevel, docs/performance.md); a vectorized libm (libmvec)
// would need -ffast-math and gives CPU-dependent results.
#include "engine/trajectory/phase_factors.h"

#include <bit>
#include <cmath>
#include <cstdint>
#include <cstring>

namespace flyby::trajectory {

namespace {

using Lanes = double __attribute__((vector_size(16)));

// Round to the nearest integer (ties to even) for |v| < 2⁵¹: adding and subtracting 1.5·2⁵²
// leaves the integer part in the low mantissa bits (IEEE round-to-nearest; no -ffast-math).
constexpr double kRound = 6755399441055744.0;

// π/2 in three 33-bit pieces (fdlibm k_rem_pio2/e_rem_pio2.c: pio2_1, pio2_2, pio2_3), so q·piece
// is exact for |q| < 2²⁰ and r = x − q·π/2 keeps full relative accuracy (Cody & Waite, Software
// Manual for the Elementary Functions, 1980).
constexpr double kTwoOverPi = 6.36619772367581382433e-01;
constexpr double kPio2_1 = 1.57079632673412561417e+00;
constexpr double kPio2_2 = 6.07710050630396597660e-11;
constexpr double kPio2_3 = 2.02226624871116645580e-21;
constexpr double kSincosMax = 1e5;  // |x| / (π/2) < 2²⁰ with a wide margin

// ln 2 in two pieces (fdlibm e_exp.c: ln2HI has 32 significant bits, so k·ln2HI is exact for
// |k| < 2²¹), and 1/ln 2.
constexpr double kLn2Hi = 6.93147180369123816490e-01;
constexpr double kLn2Lo = 1.90821492927058770002e-10;
constexpr double kInvLn2 = 1.44269504088896338700e+00;
constexpr double kExpMin = -700.0, kExpMax = 700.0;  // 2^k stays a normal number

constexpr double inv_factorial(int n) {
  double f = 1;
  for (int k = 2; k <= n; ++k) f *= k;
  return 1.0 / f;
}

inline Lanes splat(double v) { return Lanes{v, v}; }

// sin r and cos r for |r| ≤ π/4 + ε: Taylor series to r¹⁷ and r¹⁸ (remainder < 1e-19 there),
// the polynomials in z = r² evaluated by Estrin's scheme (a tree of depth 3 instead of a chain
// of 8 dependent steps: the kernels are latency bound).
template <int kOdd>
inline Lanes series_in_z(Lanes z, Lanes z2, Lanes z4) {
  // Σ_{m=0}^{7} (−1)^m z^m / (2m + kOdd)!, with kOdd = 3 (sine) or 4 (cosine).
  auto a = [](int m) { return splat((m % 2 ? -1.0 : 1.0) * inv_factorial(2 * m + kOdd)); };
  const Lanes b0 = a(0) + a(1) * z, b1 = a(2) + a(3) * z, b2 = a(4) + a(5) * z, b3 = a(6) + a(7) * z;
  const Lanes c0 = b0 + b1 * z2, c1 = b2 + b3 * z2;
  return c0 + c1 * z4;
}

inline void sincos_kernel(Lanes r, Lanes& s, Lanes& c) {
  const Lanes z = r * r, z2 = z * z, z4 = z2 * z2;
  s = r - r * z * series_in_z<3>(z, z2, z4);              // r − r³/3! + r⁵/5! − …
  c = splat(1.0) - z * (splat(0.5) - z * series_in_z<4>(z, z2, z4));  // 1 − r²/2 + r⁴/4! − …
}

// e^r for |r| ≤ ln2/2 + ε: Taylor series to r¹³ (remainder < 1e-17 relative), Estrin's scheme.
inline Lanes exp_kernel(Lanes r) {
  auto a = [](int k) { return splat(inv_factorial(k)); };
  const Lanes r2 = r * r, r4 = r2 * r2, r8 = r4 * r4;
  const Lanes b0 = a(0) + a(1) * r, b1 = a(2) + a(3) * r, b2 = a(4) + a(5) * r, b3 = a(6) + a(7) * r;
  const Lanes b4 = a(8) + a(9) * r, b5 = a(10) + a(11) * r, b6 = a(12) + a(13) * r;
  const Lanes c0 = b0 + b1 * r2, c1 = b2 + b3 * r2, c2 = b4 + b5 * r2;
  const Lanes d0 = c0 + c1 * r4, d1 = c2 + b6 * r4;
  return d0 + d1 * r8;
}

using Bits = long long __attribute__((vector_size(16)));

inline Lanes load2(const double* p) {
  Lanes v;
  std::memcpy(&v, p, sizeof v);
  return v;
}

// Bitwise select: a where the mask lane is all ones, b where it is zero.
inline Lanes select(Bits mask, Lanes a, Lanes b) { return (Lanes)(((Bits)a & mask) | ((Bits)b & ~mask)); }

// Both lanes in the fast ranges (else the caller uses libm).
inline bool sincos_fast(Lanes x) { return std::abs(x[0]) <= kSincosMax && std::abs(x[1]) <= kSincosMax; }
inline bool exp_fast(Lanes x) { return x[0] >= kExpMin && x[0] <= kExpMax && x[1] >= kExpMin && x[1] <= kExpMax; }

// Branch-free: the quadrant comes from the low mantissa bits of x·2/π + 1.5·2⁵² (the rounded
// integer in two's complement), and x = q·π/2 + r rotates (sin r, cos r) by q mod 4.
inline void sincos_lanes(Lanes x, Lanes& s, Lanes& c) {
  const Lanes shifted = x * splat(kTwoOverPi) + splat(kRound);
  const Lanes q = shifted - splat(kRound);
  const Lanes r = ((x - q * splat(kPio2_1)) - q * splat(kPio2_2)) - q * splat(kPio2_3);
  Lanes sr, cr;
  sincos_kernel(r, sr, cr);
  const Bits j = (Bits)shifted & Bits{3, 3};
  const Bits swap = -(j & Bits{1, 1});                        // odd quadrant: sin ↔ cos
  const Bits neg_s = -((j >> 1) & Bits{1, 1});                // quadrants 2, 3: −sin
  const Bits neg_c = -(((j + Bits{1, 1}) >> 1) & Bits{1, 1});  // quadrants 1, 2: −cos
  const Bits sign = (Bits)splat(-0.0);  // the sign bit
  s = (Lanes)((Bits)select(swap, cr, sr) ^ (sign & neg_s));
  c = (Lanes)((Bits)select(swap, sr, cr) ^ (sign & neg_c));
}

// 2^k from the low mantissa bits of x/ln2 + 1.5·2⁵², placed into the exponent field.
inline Lanes exp_lanes(Lanes x) {
  const Lanes shifted = x * splat(kInvLn2) + splat(kRound);
  const Lanes k = shifted - splat(kRound);
  const Lanes r = (x - k * splat(kLn2Hi)) - k * splat(kLn2Lo);
  const Bits ki = (Bits)shifted - (Bits)splat(kRound);
  const Lanes scale = (Lanes)((ki + Bits{1023, 1023}) << 52);
  return exp_kernel(r) * scale;
}

inline void sincos2_impl(const double x[2], double s[2], double c[2]) {
  const Lanes xv = load2(x);
  if (!sincos_fast(xv)) {
    for (int l = 0; l < 2; ++l) {
      s[l] = std::sin(x[l]);
      c[l] = std::cos(x[l]);
    }
    return;
  }
  Lanes sv, cv;
  sincos_lanes(xv, sv, cv);
  std::memcpy(s, &sv, sizeof sv);
  std::memcpy(c, &cv, sizeof cv);
}

inline void exp2v_impl(const double x[2], double e[2]) {
  const Lanes xv = load2(x);
  if (!exp_fast(xv)) {
    for (int l = 0; l < 2; ++l) e[l] = std::exp(x[l]);
    return;
  }
  const Lanes ev = exp_lanes(xv);
  std::memcpy(e, &ev, sizeof ev);
}

}  // namespace

void sincos2(const double x[2], double s[2], double c[2]) { sincos2_impl(x, s, c); }
void exp2v(const double x[2], double e[2]) { exp2v_impl(x, e); }

void phase_factors(const double* re, const double* im, double tau, const std::complex<double>* c,
                   std::complex<double>* out, long n) {
  for (long k = 0; k < n; k += 2) {
    const bool pair = k + 1 < n;
    Lanes ph, ex;
    if (pair) {
      ph = load2(re + k) * tau;
      ex = load2(im + k) * tau;
    } else {
      ph = Lanes{re[k] * tau, 0.0};
      ex = Lanes{im[k] * tau, 0.0};
    }
    Lanes sn, co, amp;
    if (sincos_fast(ph)) {
      sincos_lanes(ph, sn, co);
    } else {
      sn = Lanes{std::sin(ph[0]), std::sin(ph[1])};
      co = Lanes{std::cos(ph[0]), std::cos(ph[1])};
    }
    amp = exp_fast(ex) ? exp_lanes(ex) : Lanes{std::exp(ex[0]), std::exp(ex[1])};
    // c · amp (cos − i sin), in real arithmetic (std::complex products check for NaN).
    const Lanes fr = amp * co, fi = -(amp * sn);
    for (int l = 0; l < (pair ? 2 : 1); ++l) {
      const std::complex<double> v = c[k + l];
      out[k + l] = std::complex<double>(v.real() * fr[l] - v.imag() * fi[l], v.real() * fi[l] + v.imag() * fr[l]);
    }
  }
}

}  // namespace flyby::trajectory
