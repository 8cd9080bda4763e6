// Checks of the start–stop correlator (engine/analysis/correlator.h): equality with a brute-force
// O(N²) pair count over every chunking and thread count, and g2 = 1 for independent Poisson
// streams within Poisson errors.
#include <catch2/catch.hpp>

#include <gsl/gsl_cdf.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <random>
#include <string>
#include <vector>

#include "engine/analysis/correlator.h"
#include "engine/common/errors.h"
#include "engine/common/random.h"
#include "tests/support/test_seed.h"

using namespace flyby::analysis;

namespace {

struct Tags {
  std::vector<std::int64_t> t;
  std::vector<int> ch;
};

// Brute force straight from the definition in correlator.h: every ordered pair of distinct tags
// (a in start, b in stop), start a passing windows and herald, delay t_b − t_a binned as
// floor((2τ + W) / 2W) over k = −K..K.
std::vector<std::uint64_t> brute_force(const Tags& d, const CorrelatorOptions& o) {
  const std::int64_t W = o.bin_width_ps, K = o.range_ps / o.bin_width_ps;
  std::vector<std::uint64_t> h(static_cast<std::size_t>(2 * K + 1), 0);
  const std::size_t n = d.t.size();
  for (std::size_t a = 0; a < n; ++a) {
    if (d.ch[a] != o.start_channel) continue;
    bool ok = o.start_windows.empty();
    for (const auto& w : o.start_windows) ok = ok || (d.t[a] >= w.begin_ps && d.t[a] < w.end_ps);
    if (o.herald) {
      bool heralded = false;
      for (std::size_t h2 = 0; h2 < n; ++h2) {
        if (h2 == a || d.ch[h2] != o.herald->channel) continue;
        const std::int64_t dly = d.t[a] - d.t[h2];
        heralded = heralded || (dly >= o.herald->min_delay_ps && dly <= o.herald->max_delay_ps);
      }
      ok = ok && heralded;
    }
    if (!ok) continue;
    for (std::size_t b = 0; b < n; ++b) {
      if (b == a || d.ch[b] != o.stop_channel) continue;
      const std::int64_t tau = d.t[b] - d.t[a];
      const double k = std::floor(static_cast<double>(2 * tau + W) / static_cast<double>(2 * W));
      if (k >= -static_cast<double>(K) && k <= static_cast<double>(K)) ++h[static_cast<std::size_t>(k + K)];
    }
  }
  return h;
}

// Random tags with many equal time stamps (to exercise ties at chunk boundaries).
Tags random_tags(flyby::Rng& rng, std::size_t n, std::int64_t span_ps, int n_channels) {
  std::uniform_int_distribution<std::int64_t> ut(0, span_ps);
  std::uniform_int_distribution<int> uc(0, n_channels - 1);
  Tags d;
  d.t.resize(n);
  for (auto& t : d.t) t = ut(rng);
  std::sort(d.t.begin(), d.t.end());
  d.ch.resize(n);
  for (auto& c : d.ch) c = uc(rng);
  return d;
}

CorrelationHistogram run_chunked(const Tags& d, const CorrelatorOptions& o, flyby::Rng& rng, std::size_t max_chunk) {
  Correlator c(o);
  std::uniform_int_distribution<std::size_t> uchunk(0, max_chunk);
  std::size_t i = 0;
  while (i < d.t.size()) {
    const std::size_t m = std::min(uchunk(rng), d.t.size() - i);  // includes empty chunks
    c.add_chunk(std::span<const std::int64_t>(d.t).subspan(i, m), std::span<const int>(d.ch).subspan(i, m));
    i += m;
  }
  return c.finish();
}

}  // namespace

TEST_CASE("correlator equals a brute-force pair count for any chunking and thread count", "[correlator]") {
  auto rng = flyby::make_stream(flyby::test::seed("correlator brute force"), flyby::StreamPurpose::kTest, 1);
  std::uniform_int_distribution<std::int64_t> uw(1, 40), ur(0, 400);
  for (int trial = 0; trial < 40; ++trial) {
    const std::size_t n = 200 + static_cast<std::size_t>(trial) * 20;
    const Tags d = random_tags(rng, n, static_cast<std::int64_t>(n) * 3, 3);
    CorrelatorOptions o;
    o.start_channel = trial % 3;
    o.stop_channel = (trial / 3) % 3;  // includes autocorrelations
    o.bin_width_ps = uw(rng);
    o.range_ps = ur(rng);
    o.duration_ps = d.t.back() - d.t.front() + 1;
    if (trial % 4 == 1) {
      const std::int64_t T = d.t.back();
      o.start_windows = {{T / 10, T / 3}, {T / 3 + 7, T / 2}, {4 * T / 5, T + 1}};
    }
    if (trial % 5 == 2 && o.start_channel != (o.stop_channel + 1) % 3) {
      o.herald = HeraldCondition{(o.start_channel + 1) % 3, trial % 2 == 0 ? 0 : 3, 20 + trial};
    }
    INFO("trial " << trial << " start " << o.start_channel << " stop " << o.stop_channel << " W "
                  << o.bin_width_ps << " R " << o.range_ps);
    const auto expect = brute_force(d, o);
    std::uint64_t total = 0;
    for (auto c : expect) total += c;
    o.min_tags_per_thread = 1;  // split even tiny chunks over the threads
    for (int threads : {1, 2}) {
      o.threads = threads;
      for (std::size_t max_chunk : {std::size_t{1}, std::size_t{17}, n}) {
        const auto r = run_chunked(d, o, rng, max_chunk);
        REQUIRE(r.counts == expect);
      }
    }
    // The one-shot form agrees too, and the histogram is not trivially empty in most trials.
    REQUIRE(correlate(d.t, d.ch, o).counts == expect);
    if (o.range_ps >= 50 && !o.herald) REQUIRE(total > 0);
  }
}

// The plain walk pairs every tag with the one before it without a branch and takes the general
// walk only when a second earlier tag is within reach; this test covers the regimes where that
// matters (few pairs per tag as in a lab, bursts of equal time stamps, gaps right at the bin
// edges, a missing channel, time stamps near the ends of the int64 axis, bins wide enough for
// the 64-bit division path) against the brute-force count from the definition.
TEST_CASE("correlator plain walk equals a brute-force count at lab-like sparsity and at the edges", "[correlator]") {
  auto rng = flyby::make_stream(flyby::test::seed("correlator sparse walk"), flyby::StreamPurpose::kTest, 2);
  struct Case {
    const char* what;
    std::int64_t W, R;       // bin width, range
    std::int64_t t0;         // first time stamp
    std::vector<std::int64_t> gaps;  // gaps drawn from these (equally likely) ...
    std::int64_t mean_gap;   // ... or, if gaps is empty, exponential with this mean
    int n_channels;          // channels drawn from 0..n_channels−1
    int start, stop;
  };
  constexpr std::int64_t kMax = std::numeric_limits<std::int64_t>::max();
  constexpr std::int64_t kMin = std::numeric_limits<std::int64_t>::min();
  const std::vector<Case> cases = {
      {"sparse: 0.05 pairs per tag", 100, 1000, 0, {}, 20000, 2, 0, 1},
      {"sparse: 0.3 pairs per tag", 100, 3000, 0, {}, 10000, 2, 0, 1},
      {"about one earlier tag in reach", 100, 5000, 0, {}, 5000, 2, 1, 0},
      {"several earlier tags in reach", 10, 2000, 0, {}, 300, 2, 0, 1},
      {"autocorrelation, sparse", 100, 2000, 0, {}, 10000, 2, 0, 0},
      {"third channel counts nothing", 100, 2000, 0, {}, 3000, 3, 2, 0},
      {"bursts of equal time stamps", 10, 100, 0, {0, 0, 0, 1, 500, 3000}, 0, 2, 0, 1},
      {"equal time stamps, autocorrelation", 10, 100, 0, {0, 0, 2, 800, 5000}, 0, 2, 1, 1},
      // W = 10, K = 3: bin edges at ±5, ±15, ±25, outer edge ±35 (35 falls outside), look-back 35.
      {"gaps at the bin edges, even W", 10, 30, 0, {0, 4, 5, 6, 14, 15, 34, 35, 36, 70, 1000}, 0, 2, 0, 1},
      // W = 7, K = 2: outer edges at −17.5 and +17.5, look-back 18.
      {"gaps at the bin edges, odd W", 7, 14, 0, {0, 3, 4, 10, 11, 17, 18, 19, 36, 1000}, 0, 2, 1, 0},
      {"stop channel never occurs", 100, 2000, 0, {}, 1000, 1, 0, 1},
      {"start channel never occurs", 100, 2000, 0, {}, 1000, 1, 1, 0},
      {"time stamps near the lowest int64", 10, 100, kMin, {0, 1, 50, 105, 106, 3000}, 0, 2, 0, 1},
      {"time stamps near the highest int64", 10, 100, kMax - 20'000'000, {0, 1, 50, 105, 106, 3000}, 0, 2, 0, 1},
      // 2W(2K+1) > 2^32: bins by 64-bit division.
      {"bins too wide for the 32-bit reciprocal", 3'000'000'000, 6'000'000'000, 0, {}, 4'000'000'000, 2, 0, 1},
  };
  for (const auto& cs : cases) {
    const std::size_t n = 3000;
    Tags d;
    std::uniform_int_distribution<std::size_t> ugap(0, cs.gaps.empty() ? 0 : cs.gaps.size() - 1);
    std::exponential_distribution<double> ex(1.0);
    std::uniform_int_distribution<int> uc(0, cs.n_channels - 1);
    std::int64_t t = cs.t0;
    for (std::size_t i = 0; i < n; ++i) {
      const std::int64_t g = cs.gaps.empty() ? static_cast<std::int64_t>(ex(rng) * static_cast<double>(cs.mean_gap))
                                             : cs.gaps[ugap(rng)];
      if (i > 0) t += g;
      d.t.push_back(t);
      d.ch.push_back(uc(rng));
    }
    CorrelatorOptions o;
    o.start_channel = cs.start;
    o.stop_channel = cs.stop;
    o.bin_width_ps = cs.W;
    o.range_ps = cs.R;
    o.duration_ps = d.t.back() - d.t.front() + 1;
    o.min_tags_per_thread = 1;
    INFO(cs.what);
    const auto expect = brute_force(d, o);
    std::uint64_t total = 0;
    for (auto c : expect) total += c;
    const bool both_channels = cs.n_channels > std::max(cs.start, cs.stop);
    if (both_channels) REQUIRE(total > 0);  // the case is not vacuous
    for (int threads : {1, 2}) {
      o.threads = threads;
      for (std::size_t max_chunk : {std::size_t{1}, std::size_t{2}, std::size_t{3}, std::size_t{17}, n}) {
        const auto r = run_chunked(d, o, rng, max_chunk);
        REQUIRE(r.counts == expect);
        if (!both_channels) REQUIRE(r.status != CorrelatorStatus::kSuccess);
      }
    }
  }
}

TEST_CASE("independent Poisson streams give g2 = 1 at every delay", "[correlator]") {
  const std::uint64_t seed = flyby::test::seed("correlator poisson");
  // Two independent Poisson streams of 2e5 /s each over 1 s, plus a third channel as noise.
  const double rate_per_ps[3] = {2e5 * 1e-12, 2e5 * 1e-12, 5e4 * 1e-12};
  const std::int64_t T = 1'000'000'000'000;  // 1 s in ps
  Tags d;
  {
    std::vector<std::pair<std::int64_t, int>> all;
    for (int c = 0; c < 3; ++c) {
      auto rng = flyby::make_stream(seed, flyby::StreamPurpose::kTest, 100 + static_cast<std::uint64_t>(c));
      double t = 0;
      while (true) {
        t += -std::log(flyby::uniform_open0(rng)) / rate_per_ps[c];
        if (t >= static_cast<double>(T)) break;
        all.emplace_back(static_cast<std::int64_t>(t), c);
      }
    }
    std::sort(all.begin(), all.end());
    for (auto& [t, c] : all) {
      d.t.push_back(t);
      d.ch.push_back(c);
    }
  }
  for (auto [start, stop] : {std::pair{0, 1}, std::pair{0, 0}}) {
    CorrelatorOptions o;
    o.start_channel = start;
    o.stop_channel = stop;
    o.bin_width_ps = 2000;
    o.range_ps = 1'000'000;  // ±1 µs: the finite-record bias |τ|/T ≤ 1e-6 is far below the errors
    o.duration_ps = T;
    Correlator c(o);
    const std::size_t chunk = 100000;
    for (std::size_t i = 0; i < d.t.size(); i += chunk) {
      const std::size_t m = std::min(chunk, d.t.size() - i);
      c.add_chunk(std::span<const std::int64_t>(d.t).subspan(i, m), std::span<const int>(d.ch).subspan(i, m));
    }
    const auto r = c.finish();
    REQUIRE(r.status == CorrelatorStatus::kSuccess);
    REQUIRE(std::isfinite(r.expected_counts_per_bin));
    REQUIRE(r.expected_counts_per_bin > 50);  // Pearson χ² is then close to its χ² law
    // Pearson χ² of the counts against the normalization (g2 = 1), one degree of freedom per
    // bin (the expectation is fixed by the singles, not fitted). Under independence the counts
    // per bin are Poisson with mean N_a N_b W / T (autocorrelation: ordered pairs, mean
    // N(N−1)W/T, a relative 1/N = 5e-6 below the normalization, negligible here).
    double chi2 = 0;
    for (std::size_t b = 0; b < r.counts.size(); ++b) {
      REQUIRE(std::isfinite(r.g2[b]));
      const double e = r.expected_counts_per_bin;
      chi2 += (static_cast<double>(r.counts[b]) - e) * (static_cast<double>(r.counts[b]) - e) / e;
      // Every single bin within 6 Poisson standard deviations of g2 = 1 (1001 bins: a false
      // alarm has probability ~1e-6 for near-Gaussian counts of mean > 50).
      REQUIRE(std::abs(r.g2[b] - 1.0) < 6.0 / std::sqrt(e));
    }
    const double dof = static_cast<double>(r.counts.size());
    const double p = gsl_cdf_chisq_Q(chi2, dof);
    INFO("start " << start << " stop " << stop << " chi2 " << chi2 << " dof " << dof << " p " << p);
    // Two-sided p-value bound 1e-4: rejects both a miscalibrated normalization and errors that
    // are too small/large (chi2 far off dof).
    REQUIRE(p > 1e-4);
    REQUIRE(p < 1 - 1e-4);
  }
}

TEST_CASE("correlator refuses bad options and unsorted tags with one-line input errors", "[correlator]") {
  CorrelatorOptions o;
  o.bin_width_ps = 0;
  REQUIRE_THROWS_AS(Correlator(o), flyby::InputError);
  o.bin_width_ps = 10;
  o.start_windows = {{10, 5}};
  REQUIRE_THROWS_AS(Correlator(o), flyby::InputError);
  o.start_windows = {{0, 50}, {40, 60}};
  REQUIRE_THROWS_AS(Correlator(o), flyby::InputError);
  o.start_windows.clear();
  o.herald = HeraldCondition{o.start_channel, 0, 10};
  REQUIRE_THROWS_AS(Correlator(o), flyby::InputError);
  o.herald.reset();
  Correlator c(o);
  const std::vector<std::int64_t> t1{5, 10}, t2{9};
  const std::vector<int> c1{0, 1}, c2{0};
  c.add_chunk(t1, c1);
  REQUIRE_THROWS_AS(c.add_chunk(t2, c2), flyby::InputError);
}

// The plain walk checks the order on the way (no pass of its own): a decrease anywhere — the
// first tag against the previous chunk, inside a thread's share, at the seam between two threads'
// shares — is refused with the tag named, and the correlator is spent afterwards.
TEST_CASE("correlator plain walk refuses a decrease anywhere in a chunk and is spent afterwards", "[correlator]") {
  const std::size_t n = 1000;
  for (int threads : {1, 2}) {
    for (std::size_t bad : {std::size_t{0}, std::size_t{1}, std::size_t{2}, std::size_t{77}, n / 2, n - 1}) {
      CorrelatorOptions o;
      o.threads = threads;
      o.min_tags_per_thread = 1;
      o.bin_width_ps = 10;
      o.range_ps = 100;
      Correlator c(o);
      std::vector<std::int64_t> t0{0, 5};
      std::vector<int> c0{0, 1};
      c.add_chunk(t0, c0);
      std::vector<std::int64_t> t(n);
      std::vector<int> ch(n);
      for (std::size_t i = 0; i < n; ++i) {
        t[i] = 10 + 7 * static_cast<std::int64_t>(i);
        ch[i] = static_cast<int>(i % 2);
      }
      t[bad] = bad == 0 ? 4 : t[bad - 1] - 1;  // earlier than its predecessor
      INFO("threads " << threads << " bad tag " << bad);
      try {
        c.add_chunk(t, ch);
        FAIL("unsorted chunk accepted");
      } catch (const flyby::InputError& e) {
        REQUIRE(std::string(e.what()).find("tag " + std::to_string(2 + bad) + " ") != std::string::npos);
      }
      REQUIRE_THROWS_AS(c.add_chunk(t0, c0), flyby::InputError);
      REQUIRE_THROWS_AS(c.finish(), flyby::InputError);
    }
  }
  // A decrease across nearly the whole int64 axis (differences that overflow int64; run under
  // UBSan this checks that the walk meets them without undefined behaviour).
  constexpr std::int64_t kMax = std::numeric_limits<std::int64_t>::max();
  constexpr std::int64_t kMin = std::numeric_limits<std::int64_t>::min();
  for (const auto& t : {std::vector<std::int64_t>{kMax - 10, kMin + 10, kMax - 20, 0},
                        std::vector<std::int64_t>{kMin + 10, kMax - 10, kMin + 20, kMax - 5}}) {
    CorrelatorOptions o;
    o.bin_width_ps = 10;
    o.range_ps = 100;
    Correlator c(o);
    const std::vector<int> ch{0, 1, 0, 1};
    REQUIRE_THROWS_AS(c.add_chunk(t, ch), flyby::InputError);
  }
}

TEST_CASE("correlator reports missing channels as a status, not a crash", "[correlator]") {
  CorrelatorOptions o;
  o.start_channel = 5;
  const std::vector<std::int64_t> t{1, 2, 3};
  const std::vector<int> c{0, 1, 1};
  const auto r = correlate(t, c, o);
  REQUIRE(r.status == CorrelatorStatus::kNoStarts);
  REQUIRE(!r.message.empty());
}
