// Known-answer and independence checks of the keyed PCG streams (engine/common/random.h).
#include <catch2/catch.hpp>

#include <cmath>
#include <set>

#include "engine/common/random.h"

using flyby::make_stream;
using flyby::StreamPurpose;

TEST_CASE("keyed streams are reproducible and distinct", "[random]") {
  auto a = make_stream(42, StreamPurpose::kTrajectory, 7);
  auto b = make_stream(42, StreamPurpose::kTrajectory, 7);
  for (int i = 0; i < 100; ++i) REQUIRE(a() == b());

  // Different index, purpose or seed: different first draws (a collision of all of 64-bit
  // first outputs among these few streams would be a 2^-60-level accident).
  std::set<std::uint64_t> first;
  for (std::uint64_t seed : {1ULL, 2ULL})
    for (auto p : {StreamPurpose::kTrajectory, StreamPurpose::kArrivals})
      for (std::uint64_t i = 0; i < 50; ++i) first.insert(make_stream(seed, p, i)());
  REQUIRE(first.size() == 200);
}

TEST_CASE("uniform_open0 stays in the half-open unit interval with the right mean", "[random]") {
  auto r = make_stream(3, StreamPurpose::kTest, 0);
  const int n = 200000;
  double mean = 0.0, m2 = 0.0;  // Welford
  for (int i = 1; i <= n; ++i) {
    const double u = flyby::uniform_open0(r);
    REQUIRE(u > 0.0);
    REQUIRE(u <= 1.0);
    const double d = u - mean;
    mean += d / i;
    m2 += d * (u - mean);
  }
  const double se = std::sqrt(m2 / (n - 1) / n);
  // Uniform distribution on (0,1]: mean 1/2, variance 1/12 (common practice, no source).
  REQUIRE(std::abs(mean - 0.5) < 5 * se);
  // Standard error of the sample variance: sqrt((mu4 - sigma^4) / n), with mu4 = 1/80 and
  // sigma^4 = 1/144 for the uniform distribution (common practice, no source).
  const double se_var = std::sqrt((1.0 / 80.0 - 1.0 / 144.0) / n);
  REQUIRE(std::abs(m2 / (n - 1) - 1.0 / 12.0) < 5 * se_var);
}
