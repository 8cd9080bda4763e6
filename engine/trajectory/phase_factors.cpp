// Two-lane exp / sincos for the exact propagator's phase factors (see phase_factors.h). Hand
// written because the libm calls are scalar and were the largest share of the time of small
// atoms (bench/bench_engine BM_Rb87TwelveLevel, docs/performance.md); a vectorized libm (libmvec)
// would need -ffast-math and gives CPU-dependent results.
#include "engine/trajectory/phase_factors.h"

#include <bit>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <type_traits>
#include <algorithm>

namespace flyby::trajectory {

namespace {

// The four-lane kernels are always inlined into the AVX2 entry point, so no call passes a 32-byte
// vector across a function boundary; GCC's note about that ABI does not apply. (For the whole
// file: GCC reports it at the end of the translation unit.)
#pragma GCC diagnostic ignored "-Wpsabi"

// Lane vectors of W doubles and W 64-bit integers (GCC/Clang vector extensions): W = 2 is one
// SSE2 register, W = 4 one AVX2 register. Every lane runs the same sequence of IEEE operations
// whatever W is, so both widths give the same bits.
template <int W>
struct Vec;
template <>
struct Vec<2> {
  using L = double __attribute__((vector_size(16)));
  using B = long long __attribute__((vector_size(16)));
};
template <>
struct Vec<4> {
  using L = double __attribute__((vector_size(32)));
  using B = long long __attribute__((vector_size(32)));
};

// The kernels are templates on the lane type and always inlined, so the AVX2 entry point below
// (target attribute) compiles them with 256-bit registers and the default one with SSE2.
#define FLYBY_LANES_INLINE [[gnu::always_inline]] inline

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

template <class V>
FLYBY_LANES_INLINE V splat(typename std::remove_reference_t<decltype(V{}[0])> v) {
  V r;
  for (int l = 0; l < int(sizeof(V) / sizeof(v)); ++l) r[l] = v;
  return r;
}

// sin r and cos r for |r| ≤ π/4 + ε: Taylor series to r¹⁷ and r¹⁸ (remainder < 1e-19 there),
// the polynomials in z = r² evaluated by Estrin's scheme (a tree of depth 3 instead of a chain
// of 8 dependent steps: the kernels are latency bound).
template <int kOdd, class L>
FLYBY_LANES_INLINE L series_in_z(const L& z, const L& z2, const L& z4) {
  // Σ_{m=0}^{7} (−1)^m z^m / (2m + kOdd)!, with kOdd = 3 (sine) or 4 (cosine).
  // Scalar coefficients (a vector-returning lambda would not be always inlined), broadcast by the
  // vector–scalar operators.
  auto a = [](int m) { return (m % 2 ? -1.0 : 1.0) * inv_factorial(2 * m + kOdd); };
  const L b0 = a(0) + a(1) * z, b1 = a(2) + a(3) * z, b2 = a(4) + a(5) * z, b3 = a(6) + a(7) * z;
  const L c0 = b0 + b1 * z2, c1 = b2 + b3 * z2;
  return c0 + c1 * z4;
}

template <class L>
FLYBY_LANES_INLINE void sincos_kernel(const L& r, L& s, L& c) {
  const L z = r * r, z2 = z * z, z4 = z2 * z2;
  s = r - r * z * series_in_z<3>(z, z2, z4);                         // r − r³/3! + r⁵/5! − …
  c = splat<L>(1.0) - z * (splat<L>(0.5) - z * series_in_z<4>(z, z2, z4));  // 1 − r²/2 + r⁴/4! − …
}

// e^r for |r| ≤ ln2/2 + ε: Taylor series to r¹³ (remainder < 1e-17 relative), Estrin's scheme.
template <class L>
FLYBY_LANES_INLINE L exp_kernel(const L& r) {
  auto a = [](int k) { return inv_factorial(k); };
  const L r2 = r * r, r4 = r2 * r2, r8 = r4 * r4;
  const L b0 = a(0) + a(1) * r, b1 = a(2) + a(3) * r, b2 = a(4) + a(5) * r, b3 = a(6) + a(7) * r;
  const L b4 = a(8) + a(9) * r, b5 = a(10) + a(11) * r, b6 = a(12) + a(13) * r;
  const L c0 = b0 + b1 * r2, c1 = b2 + b3 * r2, c2 = b4 + b5 * r2;
  const L d0 = c0 + c1 * r4, d1 = c2 + b6 * r4;
  return d0 + d1 * r8;
}

template <class L>
FLYBY_LANES_INLINE L load(const double* p) {
  L v;
  std::memcpy(&v, p, sizeof v);
  return v;
}

// Bitwise select: a where the mask lane is all ones, b where it is zero.
template <class L, class B>
FLYBY_LANES_INLINE L select(const B& mask, const L& a, const L& b) {
  return (L)(((B)a & mask) | ((B)b & ~mask));
}

// A lane in the fast ranges (else its result comes from libm; NaN goes to libm too).
inline bool sincos_fast(double x) { return std::abs(x) <= kSincosMax; }
inline bool exp_fast(double x) { return x >= kExpMin && x <= kExpMax; }

// Branch-free: the quadrant comes from the low mantissa bits of x·2/π + 1.5·2⁵² (the rounded
// integer in two's complement), and x = q·π/2 + r rotates (sin r, cos r) by q mod 4.
template <class L, class B>
FLYBY_LANES_INLINE void sincos_lanes(const L& x, L& s, L& c) {
  const L shifted = x * splat<L>(kTwoOverPi) + splat<L>(kRound);
  const L q = shifted - splat<L>(kRound);
  const L r = ((x - q * splat<L>(kPio2_1)) - q * splat<L>(kPio2_2)) - q * splat<L>(kPio2_3);
  L sr, cr;
  sincos_kernel(r, sr, cr);
  const B one = splat<B>(1);
  const B j = (B)shifted & splat<B>(3);
  const B swap = -(j & one);                  // odd quadrant: sin ↔ cos
  const B neg_s = -((j >> 1) & one);          // quadrants 2, 3: −sin
  const B neg_c = -(((j + one) >> 1) & one);  // quadrants 1, 2: −cos
  const B sign = splat<B>(std::bit_cast<long long>(-0.0));  // the sign bit
  s = (L)((B)select(swap, cr, sr) ^ (sign & neg_s));
  c = (L)((B)select(swap, sr, cr) ^ (sign & neg_c));
}

// 2^k from the low mantissa bits of x/ln2 + 1.5·2⁵², placed into the exponent field.
template <class L, class B>
FLYBY_LANES_INLINE L exp_lanes(const L& x) {
  const L shifted = x * splat<L>(kInvLn2) + splat<L>(kRound);
  const L k = shifted - splat<L>(kRound);
  const L r = (x - k * splat<L>(kLn2Hi)) - k * splat<L>(kLn2Lo);
  const B ki = (B)shifted - (B)splat<L>(kRound);
  const L scale = (L)((ki + splat<B>(1023)) << 52);
  return exp_kernel(r) * scale;
}

// W eigenvalues at a time; the last group is padded with zeros (lanes not stored).
template <int W>
FLYBY_LANES_INLINE void phase_factors_lanes(const double* re, const double* im, double tau, const std::complex<double>* c,
                                            std::complex<double>* out, long n) {
  using L = typename Vec<W>::L;
  using B = typename Vec<W>::B;
  for (long k = 0; k < n; k += W) {
    const int m = int(std::min<long>(W, n - k));
    L ph, ex;
    if (m == W) {
      ph = load<L>(re + k) * tau;
      ex = load<L>(im + k) * tau;
    } else {
      for (int l = 0; l < W; ++l) {
        ph[l] = l < m ? re[k + l] * tau : 0.0;
        ex[l] = l < m ? im[k + l] * tau : 0.0;
      }
    }
    // Every lane through the polynomial path, then lanes outside its range from libm: a lane's
    // result never depends on its neighbours (so on W or on how eigenvalues are grouped).
    L sn, co;
    sincos_lanes<L, B>(ph, sn, co);
    L amp = exp_lanes<L, B>(ex);
    for (int l = 0; l < W; ++l) {
      if (!sincos_fast(ph[l])) {
        sn[l] = std::sin(ph[l]);
        co[l] = std::cos(ph[l]);
      }
      if (!exp_fast(ex[l])) amp[l] = std::exp(ex[l]);
    }
    // c · amp (cos − i sin), in real arithmetic (std::complex products check for NaN).
    const L fr = amp * co, fi = -(amp * sn);
    for (int l = 0; l < m; ++l) {
      const std::complex<double> v = c[k + l];
      out[k + l] = std::complex<double>(v.real() * fr[l] - v.imag() * fi[l], v.real() * fi[l] + v.imag() * fr[l]);
    }
  }
}

void phase_factors_sse2(const double* re, const double* im, double tau, const std::complex<double>* c,
                        std::complex<double>* out, long n) {
  phase_factors_lanes<2>(re, im, tau, c, out, n);
}

#if defined(__x86_64__)
__attribute__((target("avx2"))) void phase_factors_avx2(const double* re, const double* im, double tau,
                                                        const std::complex<double>* c, std::complex<double>* out, long n) {
  phase_factors_lanes<4>(re, im, tau, c, out, n);
}
#endif

// y = A·x on the pair layout (phase_factors.h), P row pairs at a time: each pair has two
// accumulator chains per lane group, so P pairs keep 2P (four lanes) or 4P (two lanes) chains of
// additions in flight instead of one latency-bound chain per row.
template <int W, int P>
FLYBY_LANES_INLINE void dense_block(const double* lanes, long n, long pair, const double* xl, std::complex<double>* y) {
  using L = typename Vec<W>::L;
  constexpr int G = 4 / W;  // lane groups per half (a or b part) of a pair: 2 for SSE2, 1 for AVX2
  L a[P][G], b[P][G];
  for (int p = 0; p < P; ++p)
    for (int g = 0; g < G; ++g) a[p][g] = b[p][g] = L{};
  for (long j = 0; j < n; ++j) {
    const L xr = load<L>(xl + 8 * j), xi = load<L>(xl + 8 * j + 4);
    for (int p = 0; p < P; ++p) {
      const double* e = lanes + 8 * ((pair + p) * n + j);
      for (int g = 0; g < G; ++g) {
        a[p][g] += load<L>(e + W * g) * xr;
        b[p][g] += load<L>(e + 4 + W * g) * xi;
      }
    }
  }
  for (int p = 0; p < P; ++p) {
    const long i = 2 * (pair + p);
    for (int g = 0; g < G; ++g) {
      const L sum = a[p][g] + b[p][g];
      for (int l = 0; l < W; l += 2) {
        const long row = i + (W * g + l) / 2;
        if (row < n) y[row] = std::complex<double>(sum[l], sum[l + 1]);
      }
    }
  }
}

template <int W>
FLYBY_LANES_INLINE void dense_apply_lanes(const double* lanes, long n, const std::complex<double>* x, std::complex<double>* y,
                                          double* xl) {
  for (long j = 0; j < n; ++j) {
    for (int l = 0; l < 4; ++l) {
      xl[8 * j + l] = x[j].real();
      xl[8 * j + 4 + l] = x[j].imag();
    }
  }
  const long pairs = (n + 1) / 2;
  long p = 0;
  for (; p + 4 <= pairs; p += 4) dense_block<W, 4>(lanes, n, p, xl, y);
  for (; p + 2 <= pairs; p += 2) dense_block<W, 2>(lanes, n, p, xl, y);
  for (; p < pairs; ++p) dense_block<W, 1>(lanes, n, p, xl, y);
}

void dense_apply_sse2(const double* lanes, long n, const std::complex<double>* x, std::complex<double>* y, double* xl) {
  dense_apply_lanes<2>(lanes, n, x, y, xl);
}

#if defined(__x86_64__)
__attribute__((target("avx2"))) void dense_apply_avx2(const double* lanes, long n, const std::complex<double>* x,
                                                      std::complex<double>* y, double* xl) {
  dense_apply_lanes<4>(lanes, n, x, y, xl);
}
#endif

FLYBY_LANES_INLINE void sincos2_impl(const double x[2], double s[2], double c[2]) {
  using L = typename Vec<2>::L;
  using B = typename Vec<2>::B;
  L sv, cv;
  sincos_lanes<L, B>(load<L>(x), sv, cv);
  for (int l = 0; l < 2; ++l) {
    s[l] = sincos_fast(x[l]) ? sv[l] : std::sin(x[l]);
    c[l] = sincos_fast(x[l]) ? cv[l] : std::cos(x[l]);
  }
}

FLYBY_LANES_INLINE void exp2v_impl(const double x[2], double e[2]) {
  using L = typename Vec<2>::L;
  using B = typename Vec<2>::B;
  const L ev = exp_lanes<L, B>(load<L>(x));
  for (int l = 0; l < 2; ++l) e[l] = exp_fast(x[l]) ? ev[l] : std::exp(x[l]);
}

}  // namespace

void sincos2(const double x[2], double s[2], double c[2]) { sincos2_impl(x, s, c); }
void exp2v(const double x[2], double e[2]) { exp2v_impl(x, e); }

bool wide_lanes_available() {
#if defined(__x86_64__)
  static const bool avx2 = __builtin_cpu_supports("avx2");
  return avx2;
#else
  return false;
#endif
}

void phase_factors(const double* re, const double* im, double tau, const std::complex<double>* c,
                   std::complex<double>* out, long n, LaneWidth width) {
#if defined(__x86_64__)
  if (width == LaneWidth::kWide && wide_lanes_available()) {
    phase_factors_avx2(re, im, tau, c, out, n);
    return;
  }
#endif
  phase_factors_sse2(re, im, tau, c, out, n);
}

// Four lanes pay from four eigenvalues (or rows) on; below, half of each vector would be padding.
void phase_factors(const double* re, const double* im, double tau, const std::complex<double>* c,
                   std::complex<double>* out, long n) {
  phase_factors(re, im, tau, c, out, n, n >= 4 ? LaneWidth::kWide : LaneWidth::kTwo);
}

std::vector<double> dense_lanes(const std::complex<double>* column_major, long n) {
  const long pairs = (n + 1) / 2;
  std::vector<double> out(8 * std::size_t(pairs * n), 0.0);
  for (long i = 0; i < n; ++i)
    for (long j = 0; j < n; ++j) {
      const std::complex<double> v = column_major[i + j * n];
      double* e = out.data() + 8 * ((i / 2) * n + j) + 2 * (i % 2);
      e[0] = v.real();
      e[1] = v.imag();
      e[4] = -v.imag();
      e[5] = v.real();
    }
  return out;
}

void dense_apply(const double* lanes, long n, const std::complex<double>* x, std::complex<double>* y,
                 std::vector<double>& scratch, LaneWidth width) {
  scratch.resize(8 * std::size_t(n));
#if defined(__x86_64__)
  if (width == LaneWidth::kWide && wide_lanes_available()) {
    dense_apply_avx2(lanes, n, x, y, scratch.data());
    return;
  }
#endif
  dense_apply_sse2(lanes, n, x, y, scratch.data());
}

void dense_apply(const double* lanes, long n, const std::complex<double>* x, std::complex<double>* y,
                 std::vector<double>& scratch) {
  dense_apply(lanes, n, x, y, scratch, n >= 4 ? LaneWidth::kWide : LaneWidth::kTwo);
}

}  // namespace flyby::trajectory
