// Tests of the detector and tagger chain (models/detectors) against published formulas and
// exact properties of Poisson processes. Every Monte Carlo tolerance is in standard errors of
// the sample (5 sigma) or a chi-square quantile bound from GSL.
#include <gsl/gsl_cdf.h>

#include <catch2/catch.hpp>
#include <cmath>
#include <fstream>
#include <numeric>

#include "engine/common/errors.h"
#include "engine/common/random.h"
#include "models/detectors/detector_chain.h"
#include "tests/support/test_seed.h"

using namespace flyby::detectors;
using flyby::records::ChannelRole;
using flyby::records::TagBlock;

namespace {

constexpr double kSigmas = 5.0;

// Poisson photon arrivals of rate `rate_per_s` over [0, duration_ps) on channel `ch` (exact
// exponential gaps from the test stream, rounded to ps).
std::vector<Photon> poisson_photons(std::uint64_t seed, double rate_per_s, std::int64_t duration_ps, std::uint32_t ch = 0) {
  auto rng = flyby::make_stream(seed, flyby::StreamPurpose::kTest, 100 + ch);
  std::vector<Photon> v;
  double t = 0;
  while (true) {
    t += -std::log(flyby::uniform_open0(rng)) * 1e12 / rate_per_s;
    if (t >= static_cast<double>(duration_ps)) break;
    v.push_back({static_cast<std::int64_t>(std::llround(t)), ch});
  }
  return v;
}

TagBlock run_chain(const DetectorChainOptions& opt, std::uint64_t seed, const std::vector<Photon>& photons,
                   std::int64_t end_ps, std::size_t chunk = 100000) {
  DetectorChain chain(opt, seed, 0, end_ps);
  TagBlock out;
  for (std::size_t i = 0; i < photons.size(); i += chunk) {
    const std::size_t n = std::min(chunk, photons.size() - i);
    chain.push(std::span(photons).subspan(i, n), out);
  }
  chain.finish(out);
  return out;
}

DetectorChannelOptions channel(std::uint8_t id, const char* name) {
  DetectorChannelOptions c;
  c.channel = {id, name, ChannelRole::kDetector};
  return c;
}

struct MeanSe {
  double mean, se;
};
// Batch means: split [0, duration) into k windows, count tags per window, return the mean rate
// per second and its standard error from the sample spread.
MeanSe batch_rate(const TagBlock& tags, std::int64_t duration_ps, int k) {
  std::vector<double> n(k, 0.0);
  for (auto t : tags.time_ps) n[static_cast<std::size_t>(t * k / duration_ps)] += 1;
  const double w_s = static_cast<double>(duration_ps) * 1e-12 / k;
  double mean = 0, m2 = 0;  // Welford
  for (int i = 0; i < k; ++i) {
    const double x = n[i] / w_s, d = x - mean;
    mean += d / (i + 1);
    m2 += d * (x - mean);
  }
  return {mean, std::sqrt(m2 / (k - 1) / k)};
}

}  // namespace

TEST_CASE("dead time: measured rate follows Knoll's formulas on Poisson input", "[detectors]") {
  // G. F. Knoll, "Radiation Detection and Measurement", dead-time models [memory]:
  // non-paralyzable R_m = R / (1 + R tau), paralyzable R_m = R exp(-R tau) (REFERENCES.md).
  const auto seed = flyby::test::seed("dead time Knoll");
  const double photon_rate = 8e6, eff = 0.625, tau_ns = 50;
  const double R = photon_rate * eff, tau_s = tau_ns * 1e-9;  // true avalanche rate 5e6/s, R tau = 0.25
  const std::int64_t duration_ps = 250'000'000'000;           // 0.25 s
  const auto photons = poisson_photons(seed, photon_rate, duration_ps);
  for (auto model : {DeadTimeModel::kNonParalyzable, DeadTimeModel::kParalyzable}) {
    DetectorChainOptions opt;
    auto c = channel(1, "D");
    c.efficiency = eff;
    c.dead_time_ns = tau_ns;
    c.dead_time_model = model;
    opt.channels = {c};
    const TagBlock tags = run_chain(opt, seed, photons, duration_ps);
    const MeanSe r = batch_rate(tags, duration_ps, 100);
    REQUIRE(std::isfinite(r.mean));
    REQUIRE(std::isfinite(r.se));
    const double nonpar = R / (1 + R * tau_s), par = R * std::exp(-R * tau_s);
    const double want = model == DeadTimeModel::kParalyzable ? par : nonpar;
    const double other = model == DeadTimeModel::kParalyzable ? nonpar : par;
    INFO(to_string(model) << ": measured " << r.mean << " +- " << r.se << " /s, Knoll " << want);
    CHECK(std::abs(r.mean - want) < kSigmas * r.se);
    // The test can tell the two models apart.
    CHECK(std::abs(r.mean - other) > kSigmas * r.se);
    // No two tags closer than the dead time.
    std::int64_t min_gap = std::numeric_limits<std::int64_t>::max();
    for (std::size_t i = 1; i < tags.size(); ++i) min_gap = std::min(min_gap, tags.time_ps[i] - tags.time_ps[i - 1]);
    CHECK(min_gap >= 50'000);
  }
}

TEST_CASE("dark counts are Poisson in mean and variance", "[detectors]") {
  const auto seed = flyby::test::seed("dark counts Poisson");
  const double rate = 2e5;
  const std::int64_t duration_ps = 500'000'000'000;  // 0.5 s -> 1e5 counts
  DetectorChainOptions opt;
  auto c = channel(0, "dark");
  c.dark_rate_per_s = rate;
  opt.channels = {c};
  const TagBlock tags = run_chain(opt, seed, {}, duration_ps);
  const int k = 1000;
  std::vector<double> n(k, 0.0);
  for (auto t : tags.time_ps) n[static_cast<std::size_t>(t * k / duration_ps)] += 1;
  double mean = 0, m2 = 0;
  for (int i = 0; i < k; ++i) {
    const double d = n[i] - mean;
    mean += d / (i + 1);
    m2 += d * (n[i] - mean);
  }
  const double var = m2 / (k - 1);
  const double expected = rate * static_cast<double>(duration_ps) * 1e-12 / k;  // 100 per window
  REQUIRE(std::isfinite(mean));
  // Mean: standard error of the mean of k Poisson counts is sqrt(mean / k).
  CHECK(std::abs(mean - expected) < kSigmas * std::sqrt(expected / k));
  // Variance: for Poisson counts (k-1) s^2 / mu ~ chi^2(k-1) (dispersion test); two-sided bound
  // at tail probability 1e-6 from GSL's chi-square quantiles.
  const double stat = (k - 1) * var / expected;
  INFO("dispersion statistic " << stat << " for " << (k - 1) << " dof");
  CHECK(stat > gsl_cdf_chisq_Pinv(1e-6, k - 1));
  CHECK(stat < gsl_cdf_chisq_Qinv(1e-6, k - 1));
}

TEST_CASE("jitter broadens a sharp coincidence peak in quadrature", "[detectors]") {
  // Independent Gaussian jitters add in variance: sigma^2 = sigma_a^2 + sigma_b^2 (+ the uniform
  // quantization error res^2/12 of each channel); sigma = FWHM / (2 sqrt(2 ln 2)).
  const auto seed = flyby::test::seed("jitter quadrature");
  const std::int64_t duration_ps = 1'000'000'000'000;  // 1 s
  auto single = poisson_photons(seed, 1e5, duration_ps);
  std::vector<Photon> pairs;
  for (const Photon& p : single) {
    pairs.push_back({p.time_ps, 0});
    pairs.push_back({p.time_ps, 1});
  }
  DetectorChainOptions opt;
  auto a = channel(0, "A"), b = channel(1, "B");
  a.jitter_fwhm_ps = 350;
  b.jitter_fwhm_ps = 600;
  b.cable_delay_ns = 5.0;
  opt.channels = {a, b};
  opt.tagger.resolution_ps = 10;
  const TagBlock tags = run_chain(opt, seed, pairs, duration_ps, 33333);
  REQUIRE(std::is_sorted(tags.time_ps.begin(), tags.time_ps.end()));
  std::vector<std::int64_t> ta, tb;
  for (std::size_t i = 0; i < tags.size(); ++i) (tags.channel[i] == 0 ? ta : tb).push_back(tags.time_ps[i]);
  REQUIRE(ta.size() == tb.size());
  const std::size_t n = ta.size();
  double mean = 0, m2 = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const double d = static_cast<double>(tb[i] - ta[i]), dd = d - mean;
    mean += dd / static_cast<double>(i + 1);
    m2 += dd * (d - mean);
  }
  const double sd = std::sqrt(m2 / static_cast<double>(n - 1));
  const double k = 2 * std::sqrt(2 * std::log(2.0));
  const double want = std::sqrt(std::pow(350 / k, 2) + std::pow(600 / k, 2) + 2 * 100.0 / 12);
  REQUIRE(std::isfinite(sd));
  INFO("peak at " << mean << " ps, sigma " << sd << " ps, expected " << want);
  CHECK(std::abs(mean - 5000) < kSigmas * want / std::sqrt(static_cast<double>(n)));
  // Standard error of a sample standard deviation of normal data: sigma / sqrt(2 (n - 1)).
  CHECK(std::abs(sd - want) < kSigmas * want / std::sqrt(2.0 * static_cast<double>(n - 1)));
  // Every tag is a multiple of the tagger bin.
  CHECK(std::all_of(tags.time_ps.begin(), tags.time_ps.end(), [](std::int64_t t) { return t % 10 == 0; }));
}

TEST_CASE("a jitter histogram is reproduced in mean and variance", "[detectors]") {
  const auto seed = flyby::test::seed("jitter histogram");
  const std::string path = std::string(FLYBY_BINARY_DIR) + "/jitter_hist_test.csv";
  {
    std::ofstream f(path);
    f << "# triangular instrument response\noffset_ps,weight\n-200,1\n-100,2\n0,3\n100,2\n200,1\n";
  }
  const JitterHistogram h = load_jitter_histogram(path);
  // Exact moments of this histogram with uniform spread inside 100 ps bins:
  // mean 0, variance (2*1*200^2 + 2*2*100^2)/9 + 100^2/12 = 14166.67 ps^2.
  CHECK(h.mean_ps() == Approx(0.0).margin(1e-12));
  CHECK(h.variance_ps2() == Approx(120000.0 / 9 + 10000.0 / 12).epsilon(1e-12));
  const std::int64_t duration_ps = 1'000'000'000'000;
  const auto photons = poisson_photons(seed, 1e5, duration_ps);
  DetectorChainOptions opt;
  auto c = channel(0, "A");
  c.jitter_histogram = h;
  c.cable_delay_ns = 1.0;
  opt.channels = {c};
  const TagBlock tags = run_chain(opt, seed, photons, duration_ps);
  REQUIRE(tags.size() == photons.size());
  double mean = 0, m2 = 0, max_abs = 0;
  for (std::size_t i = 0; i < tags.size(); ++i) {
    const double d = static_cast<double>(tags.time_ps[i] - photons[i].time_ps) - 1000.0, dd = d - mean;
    mean += dd / static_cast<double>(i + 1);
    m2 += dd * (d - mean);
    max_abs = std::max(max_abs, std::abs(d));
  }
  CHECK(max_abs <= 251);  // the histogram's support [-250, 250] plus rounding
  const double n = static_cast<double>(tags.size()), var = m2 / (n - 1);
  const double sigma = std::sqrt(h.variance_ps2());
  CHECK(std::abs(mean) < kSigmas * sigma / std::sqrt(n));
  // Standard error of the sample variance: sqrt((mu4 - sigma^4) / n); mu4 of this distribution
  // is bounded by 250^2 sigma^2, which gives a conservative bound.
  CHECK(std::abs(var - h.variance_ps2()) < kSigmas * std::sqrt((250.0 * 250.0 * sigma * sigma) / n));
}

TEST_CASE("afterpulses give a peak at their delay with their probability", "[detectors]") {
  const auto seed = flyby::test::seed("afterpulse peak");
  const double rate = 2e4, p = 0.03, delay_ns = 200, tc_ns = 50;
  const std::int64_t duration_ps = 4'000'000'000'000;  // 4 s -> 8e4 primary clicks
  const auto photons = poisson_photons(seed, rate, duration_ps);
  DetectorChainOptions opt;
  auto c = channel(0, "A");
  c.dead_time_ns = 20;
  c.afterpulse_probability = p;
  c.afterpulse_delay_ns = delay_ns;
  c.afterpulse_time_constant_ns = tc_ns;
  opt.channels = {c};
  const TagBlock tags = run_chain(opt, seed, photons, duration_ps);
  const auto& t = tags.time_ps;
  // Pair counts (each click with every later click) in a signal window after the delay, a
  // window before it, and a background window far away (uncorrelated Poisson pairs).
  const double lo = delay_ns * 1e3, hi = lo + 20 * tc_ns * 1e3, width = hi - lo;
  auto count_pairs = [&](double a, double b, double* sum_dt, double* sum_dt2) {
    double k = 0;
    for (std::size_t i = 0; i < t.size(); ++i) {
      for (std::size_t j = i + 1; j < t.size(); ++j) {
        const double d = static_cast<double>(t[j] - t[i]);
        if (d >= b) break;
        if (d >= a) {
          k += 1;
          if (sum_dt) *sum_dt += d, *sum_dt2 += d * d;
        }
      }
    }
    return k;
  };
  double s1 = 0, s2 = 0;
  const double A = count_pairs(lo, hi, &s1, &s2);
  const double B = count_pairs(20e6, 20e6 + width, nullptr, nullptr);
  const double before = count_pairs(lo - width / 10, lo, nullptr, nullptr);
  const double N = static_cast<double>(t.size());
  // Each click (primary or afterpulse) triggers an afterpulse with probability p; those landing
  // in the dead time of a later click (probability ~ rate * 20 ns = 4e-4) are negligible here.
  const double excess = A - B;
  const double p_hat = excess / N, se = std::sqrt(A + B) / N;
  INFO("afterpulse probability " << p_hat << " +- " << se << ", configured " << p);
  REQUIRE(std::isfinite(p_hat));
  CHECK(std::abs(p_hat - p) < kSigmas * se);
  // Nothing before the delay beyond the background (B/10 expected, Poisson).
  CHECK(std::abs(before - B / 10) < kSigmas * std::sqrt(B / 10 + B / 100));
  // Mean delay of the excess pairs: delay + time constant. S = sum(dt over A) - B * centre;
  // delta-method variance with Var(sum dt) ~ sum dt^2 (compound Poisson), Cov(S, E) = sum dt + c B.
  const double cmid = 0.5 * (lo + hi);
  const double S = s1 - B * cmid, m = S / excess;
  const double var_s = s2 + cmid * cmid * B, var_e = A + B, cov = s1 + cmid * B;
  const double se_m = std::sqrt(std::max(0.0, var_s + m * m * var_e - 2 * m * cov)) / excess;
  INFO("mean afterpulse delay " << m << " +- " << se_m << " ps");
  CHECK(std::abs(m - (delay_ns + tc_ns) * 1e3) < kSigmas * se_m);
}

TEST_CASE("output is sorted, reproducible and independent of input chunking", "[detectors]") {
  const auto seed = flyby::test::seed("chain chunking");
  const std::int64_t duration_ps = 20'000'000'000;
  std::vector<Photon> photons;
  for (std::uint32_t ch = 0; ch < 3; ++ch) {
    auto p = poisson_photons(seed, 3e6, duration_ps, ch);
    photons.insert(photons.end(), p.begin(), p.end());
  }
  std::stable_sort(photons.begin(), photons.end(), [](const Photon& x, const Photon& y) { return x.time_ps < y.time_ps; });
  DetectorChainOptions opt;
  for (std::uint8_t k = 0; k < 3; ++k) {
    auto c = channel(static_cast<std::uint8_t>(10 + k), k == 0 ? "a" : k == 1 ? "b" : "c");
    c.efficiency = 0.7;
    c.dead_time_ns = 22;
    c.jitter_fwhm_ps = 400 + 100 * k;
    c.dark_rate_per_s = 1e4;
    c.afterpulse_probability = 0.01;
    c.afterpulse_delay_ns = 30;
    c.afterpulse_time_constant_ns = 40;
    c.cable_delay_ns = k == 1 ? -3.0 : 2.0 * k;
    opt.channels.push_back(c);
  }
  opt.tagger.resolution_ps = 81;
  opt.tagger.max_rate_per_s = 2e7;
  const TagBlock one = run_chain(opt, seed, photons, duration_ps, photons.size() + 1);
  const TagBlock many = run_chain(opt, seed, photons, duration_ps, 997);
  const TagBlock tiny = run_chain(opt, seed, photons, duration_ps, 1);
  CHECK(one.time_ps == many.time_ps);
  CHECK(one.channel == many.channel);
  CHECK(one.time_ps == tiny.time_ps);
  REQUIRE(std::is_sorted(one.time_ps.begin(), one.time_ps.end()));
  std::int64_t min_gap = std::numeric_limits<std::int64_t>::max();
  for (std::size_t i = 1; i < one.size(); ++i) min_gap = std::min(min_gap, one.time_ps[i] - one.time_ps[i - 1]);
  CHECK(min_gap >= 50'000);  // tagger limit 2e7/s -> 50 ns
  CHECK(std::all_of(one.time_ps.begin(), one.time_ps.end(), [&](std::int64_t t) { return t >= 0 && t < duration_ps; }));
  const TagBlock other = run_chain(opt, seed + 1, photons, duration_ps);
  CHECK(other.time_ps != one.time_ps);
}

TEST_CASE("detector options outside their ranges are refused with the field named", "[detectors]") {
  DetectorChainOptions opt;
  auto c = channel(0, "A");
  c.efficiency = 1.5;
  opt.channels = {c};
  REQUIRE(opt.problem());
  CHECK(opt.problem()->find("efficiency") != std::string::npos);
  CHECK_THROWS_AS(DetectorChain(opt, 1, 0, 10), flyby::InputError);
  c.efficiency = 0.5;
  c.dead_time_ns = -1;
  opt.channels = {c};
  CHECK(opt.problem()->find("dead_time_ns") != std::string::npos);
  c.dead_time_ns = 0;
  opt.channels = {c, c};
  CHECK(opt.problem()->find("used twice") != std::string::npos);
  opt.channels = {c};
  opt.tagger.resolution_ps = 0;
  CHECK(opt.problem()->find("resolution_ps") != std::string::npos);
  opt.tagger.resolution_ps = 1;
  CHECK(!opt.problem());
}
