// The two-lane exp / sincos of the exact propagator's phase factors against the C library
// (glibc's sin, cos, exp are correctly rounded or within 1 ulp — glibc manual, "Errors in Math
// Functions"), over the argument ranges the waiting-time search produces, and the phase factors
// against std::complex arithmetic.
#include <catch2/catch.hpp>
#include <cmath>
#include <complex>
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
