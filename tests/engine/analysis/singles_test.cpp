// Singles and the χ² drift test (engine/analysis/singles.h) on Poisson streams with a known rate:
// constant rate → the p-values of repeated streams are uniform (Pearson's dispersion test for
// Poisson counts, e.g. Cochran, Biometrics 10, 417 (1954) [memory]); a linear ramp → the fitted
// relative slope agrees with the ramp within its standard error and the test rejects constancy.
#include <catch2/catch.hpp>

#include <cmath>
#include <random>
#include <vector>

#include "engine/analysis/singles.h"
#include "engine/common/errors.h"
#include "engine/common/random.h"
#include "tests/support/test_seed.h"

using namespace flyby::analysis;

namespace {

// Poisson process of rate r(t) = r0 (1 + b (t − T/2)) by thinning, two channels interleaved.
void stream(std::uint64_t seed, double T_s, double r0, double b, std::vector<std::int64_t>& t,
            std::vector<std::uint8_t>& ch) {
  std::mt19937_64 g(seed);
  std::exponential_distribution<double> e(r0 * (1 + std::abs(b) * T_s / 2));
  std::uniform_real_distribution<double> u(0, 1);
  const double rmax = r0 * (1 + std::abs(b) * T_s / 2);
  double x = 0;
  t.clear();
  ch.clear();
  while ((x += e(g)) < T_s) {
    if (u(g) * rmax > r0 * (1 + b * (x - T_s / 2))) continue;
    t.push_back(static_cast<std::int64_t>(x * 1e12));
    ch.push_back(static_cast<std::uint8_t>(u(g) < 0.5 ? 3 : 7));
  }
}

}  // namespace

TEST_CASE("singles: constant Poisson rate gives uniform drift p-values and the right rate", "[singles]") {
  const auto seed = flyby::test::seed("singles constant rate");
  const int M = 200;
  int below_tenth = 0;
  for (int k = 0; k < M; ++k) {
    std::vector<std::int64_t> t;
    std::vector<std::uint8_t> ch;
    stream(seed + k, 1.0, 2000.0, 0.0, t, ch);
    SinglesOptions o;
    o.duration_ps = 1000000000000;
    o.slices = 20;
    o.channels = {3, 7};
    SinglesCounter c(o);
    // Two chunks: the result must not depend on chunking.
    const std::size_t h = t.size() / 2;
    c.add_chunk(std::span(t).subspan(0, h), std::span(ch).subspan(0, h));
    c.add_chunk(std::span(t).subspan(h), std::span(ch).subspan(h));
    const auto r = c.finish();
    REQUIRE(r.channels.size() == 2);
    std::uint64_t total = 0;
    for (const auto& x : r.channels) total += x.counts;
    CHECK(total == t.size());
    // Rate 1000/s per channel within 5 standard errors.
    CHECK(std::abs(r.channels[0].rate_per_s - 1000.0) < 5 * std::sqrt(1000.0));
    REQUIRE(std::isfinite(r.channels[0].drift_p_value));
    if (r.channels[0].drift_p_value < 0.1) ++below_tenth;
  }
  // Under the null P(p < 0.1) = 0.1: binomial standard error √(M·0.1·0.9), 5σ bound.
  CHECK(std::abs(below_tenth - 0.1 * M) < 5 * std::sqrt(M * 0.09));
}

TEST_CASE("singles: a linear rate ramp is detected and its slope recovered", "[singles]") {
  const auto seed = flyby::test::seed("singles ramp");
  std::vector<std::int64_t> t;
  std::vector<std::uint8_t> ch;
  const double b = 0.4;  // relative slope per second
  stream(seed, 1.0, 20000.0, b, t, ch);
  SinglesOptions o;
  o.duration_ps = 1000000000000;
  o.slices = 25;
  o.channels = {3, 7};
  SinglesCounter c(o);
  c.add_chunk(t, ch);
  const auto r = c.finish();
  for (const auto& x : r.channels) {
    REQUIRE(std::isfinite(x.drift_slope_per_s));
    CHECK(std::abs(x.drift_slope_per_s - b) < 5 * x.drift_slope_err_per_s);
    CHECK(x.drift_p_value < 1e-6);
  }
}

TEST_CASE("singles: bad options are input errors", "[singles]") {
  SinglesOptions o;
  o.duration_ps = 0;
  CHECK_THROWS_AS(SinglesCounter(o), flyby::InputError);
  o.duration_ps = 100;
  o.slices = 1;
  CHECK_THROWS_AS(SinglesCounter(o), flyby::InputError);
}
