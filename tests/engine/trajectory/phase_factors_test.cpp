// The two-lane exp / sincos of the exact propagator's phase factors against the C library
// (glibc's sin, cos, exp are correctly rounded or within 1 ulp — glibc manual, "Errors in Math
// Functions"), over the argument ranges the waiting-time search produces, and the phase factors
// against std::complex arithmetic.
#include <catch2/catch.hpp>
#include <cmath>
#include <complex>
#include <cstring>
#include <limits>
#include <vector>

#include "engine/common/random.h"
#include "engine/trajectory/phase_factors.h"
#include "tests/support/test_seed.h"

using namespace flyby;

TEST_CASE("two-lane sincos and exp agree with libm to a few ulp", "[integrator]") {
  const std::uint64_t seed = test::seed("phase factors");
  auto rng = make_stream(seed, StreamPurpose::kTest, 0);
  constexpr double eps = std::numeric_limits<double>::epsilon();
  double worst_s = 0, worst_c = 0, worst_e = 0;
  for (int k = 0; k < 200000; ++k) {
    // Magnitudes from 1e-6 to 1e5 (log-uniform), both signs; exp arguments in [−700, 5].
    const double u = uniform_open0(rng), v = uniform_open0(rng), w = uniform_open0(rng);
    const double mag = std::pow(10.0, -6.0 + 11.0 * u);
    const double x[2] = {v < 0.5 ? -mag : mag, (w - 0.5) * 20.0};
    const double y[2] = {-700.0 * u, 5.0 * (w - 0.5)};
    double s[2], c[2], e[2];
    trajectory::sincos2(x, s, c);
    trajectory::exp2v(y, e);
    for (int l = 0; l < 2; ++l) {
      if (!(std::isfinite(s[l]) && std::isfinite(c[l]) && std::isfinite(e[l]))) {
        FAIL("non-finite result at x = " << x[l] << ", y = " << y[l]);
      }
      // Absolute error for sin/cos (values ≤ 1; near a zero only an absolute bound is
      // meaningful after range reduction), relative for exp.
      worst_s = std::max(worst_s, std::abs(s[l] - std::sin(x[l])) / eps);
      worst_c = std::max(worst_c, std::abs(c[l] - std::cos(x[l])) / eps);
      worst_e = std::max(worst_e, std::abs(e[l] - std::exp(y[l])) / std::exp(y[l]) / eps);
    }
  }
  INFO("max |sin err| " << worst_s << " eps, |cos err| " << worst_c << " eps, exp rel err " << worst_e << " eps");
  CHECK(worst_s <= 4);
  CHECK(worst_c <= 4);
  CHECK(worst_e <= 8);
  // Outside the fast ranges: libm.
  const double big[2] = {3e7, -1e6}, tiny[2] = {-800.0, -1e4};
  double s[2], c[2], e[2];
  trajectory::sincos2(big, s, c);
  trajectory::exp2v(tiny, e);
  CHECK(s[0] == std::sin(3e7));
  CHECK(c[1] == std::cos(-1e6));
  CHECK(e[0] == std::exp(-800.0));
  CHECK(e[1] == 0.0);
}

TEST_CASE("phase factors c e^{-i lambda tau} match complex arithmetic", "[integrator]") {
  const std::uint64_t seed = test::seed("phase factors complex");
  auto rng = make_stream(seed, StreamPurpose::kTest, 1);
  for (long n : {1L, 2L, 5L, 12L}) {
    std::vector<double> re(n), im(n);
    std::vector<std::complex<double>> c(n), out(n);
    for (long k = 0; k < n; ++k) {
      re[k] = 40.0 * (uniform_open0(rng) - 0.5);
      im[k] = -3.0 * uniform_open0(rng);
      c[k] = {uniform_open0(rng) - 0.5, uniform_open0(rng) - 0.5};
    }
    const double tau = 2.5 * uniform_open0(rng);
    trajectory::phase_factors(re.data(), im.data(), tau, c.data(), out.data(), n);
    for (long k = 0; k < n; ++k) {
      const std::complex<double> ref = c[k] * std::exp(std::complex<double>(0.0, -1.0) * std::complex<double>(re[k], im[k]) * tau);
      INFO("n " << n << " k " << k);
      REQUIRE(std::isfinite(out[k].real()));
      CHECK(std::abs(out[k] - ref) <= 1e-14 * std::max(1e-300, std::abs(ref)) + 1e-300);
    }
  }
}

TEST_CASE("four-lane phase factors give the bits of the two-lane path", "[integrator]") {
  // Reproducibility rule of the project (DESIGN.md §4): results must not depend on the CPU, so the
  // AVX2 kernel chosen at run time must reproduce the SSE2 kernel bit for bit, including lanes
  // that fall back to libm next to lanes that do not.
  if (!trajectory::wide_lanes_available()) {
    WARN("this CPU has no AVX2: only the two-lane path exists here, nothing to compare");
    return;
  }
  const std::uint64_t seed = test::seed("phase factors lanes");
  auto rng = make_stream(seed, StreamPurpose::kTest, 2);
  long compared = 0;
  for (int trial = 0; trial < 20000; ++trial) {
    const long n = 1 + long(uniform_open0(rng) * 13.0);
    std::vector<double> re(n), im(n);
    std::vector<std::complex<double>> c(n), two(n), wide(n);
    for (long k = 0; k < n; ++k) {
      const double u = uniform_open0(rng);
      // Mostly the fast ranges, sometimes beyond them (|Re λ τ| > 1e5, Im λ τ < −700).
      re[k] = (u < 0.05 ? 1e6 : 40.0) * (uniform_open0(rng) - 0.5);
      im[k] = (u > 0.95 ? -1e3 : -3.0) * uniform_open0(rng);
      c[k] = {uniform_open0(rng) - 0.5, uniform_open0(rng) - 0.5};
    }
    const double tau = 2.5 * uniform_open0(rng);
    trajectory::phase_factors(re.data(), im.data(), tau, c.data(), two.data(), n, trajectory::LaneWidth::kTwo);
    trajectory::phase_factors(re.data(), im.data(), tau, c.data(), wide.data(), n, trajectory::LaneWidth::kWide);
    for (long k = 0; k < n; ++k, ++compared) {
      INFO("trial " << trial << " n " << n << " k " << k << " re " << re[k] << " im " << im[k] << " tau " << tau);
      REQUIRE(std::memcmp(&two[k], &wide[k], sizeof two[k]) == 0);
    }
  }
  CHECK(compared > 100000);
}

TEST_CASE("dense complex products on the lane layout match complex arithmetic, in both widths", "[integrator]") {
  const std::uint64_t seed = test::seed("dense lanes");
  auto rng = make_stream(seed, StreamPurpose::kTest, 3);
  std::vector<double> scratch;
  for (long n : {1L, 2L, 3L, 5L, 8L, 11L, 12L, 17L}) {
    const auto un = static_cast<std::size_t>(n);
    std::vector<std::complex<double>> a(un * un), x(un), two(un), wide(un);
    for (auto& v : a) v = {uniform_open0(rng) - 0.5, uniform_open0(rng) - 0.5};
    for (auto& v : x) v = {uniform_open0(rng) - 0.5, uniform_open0(rng) - 0.5};
    const std::vector<double> lanes = trajectory::dense_lanes(a.data(), n);  // column-major a
    trajectory::dense_apply(lanes.data(), n, x.data(), two.data(), scratch, trajectory::LaneWidth::kTwo);
    trajectory::dense_apply(lanes.data(), n, x.data(), wide.data(), scratch, trajectory::LaneWidth::kWide);
    for (long i = 0; i < n; ++i) {
      std::complex<double> ref = 0;
      double mag = 0;
      for (long j = 0; j < n; ++j) {
        ref += a[std::size_t(i + j * n)] * x[std::size_t(j)];
        mag += std::abs(a[std::size_t(i + j * n)]) * std::abs(x[std::size_t(j)]);
      }
      INFO("n " << n << " row " << i);
      // Rounding bound of a dot product of length n (Higham, Accuracy and Stability of Numerical
      // Algorithms, 2nd ed., eq. 3.5): |error| ≤ γ_{n+2} Σ|a||x| per component, doubled for complex.
      const double bound = 2.0 * double(n + 2) * std::numeric_limits<double>::epsilon() * mag;
      CHECK(std::abs(two[std::size_t(i)] - ref) <= bound);
      // The four-lane path runs the same operations per lane: the same bits (or the same path
      // when the CPU has no AVX2).
      CHECK(std::memcmp(&two[std::size_t(i)], &wide[std::size_t(i)], sizeof two[0]) == 0);
    }
  }
}
