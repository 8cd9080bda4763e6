// Checks of the synthetic record generator (engine/records/synthetic_tags.h) and of the bounded
// streaming path it exists for: channel counts are Poisson, the beat-correlated pairs reproduce
// the delay distribution p(τ) ∝ e^{−τ/d}(1 + V cos ωτ) in the cross-correlation (χ² test),
// the same seed gives the same record, and reading + correlating a 10^6-tag record through the
// read-ahead path buffers a bounded number of tags and equals the in-memory correlation.
#include <catch2/catch.hpp>

#include <gsl/gsl_cdf.h>

#include <cmath>
#include <numbers>

#include "engine/analysis/correlator.h"
#include "engine/common/errors.h"
#include "engine/records/block_prefetch.h"
#include "engine/records/record_reader.h"
#include "engine/records/synthetic_tags.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

using namespace flyby::records;

namespace {

SyntheticOptions beat_options(std::uint64_t seed) {
  SyntheticOptions o;
  o.channels = {{"A", ChannelRole::kHerald, 2.5e5}, {"B", ChannelRole::kDetector, 2.5e5}};
  o.pairs = SyntheticPairs{0, 1, 5e4, 0.2, 5.0, 0.8};
  o.duration_s = 2.0;
  o.seed = seed;
  return o;
}

// ∫_a^b e^{−τ/d}(1 + V cos ωτ) dτ, from the antiderivative
// ∫ e^{−τ/d} cos ωτ dτ = e^{−τ/d}(ω sin ωτ − cos(ωτ)/d)/(1/d² + ω²) [standard integral, e.g.
// Gradshteyn & Ryzhik 2.663.3].
double envelope_integral(double a, double b, double d, double w, double V) {
  auto F = [&](double t) {
    const double e = std::exp(-t / d);
    return -d * e + V * e * (w * std::sin(w * t) - std::cos(w * t) / d) / (1 / (d * d) + w * w);
  };
  return F(b) - F(a);
}

}  // namespace

TEST_CASE("synthetic record: Poisson channel counts and beat pairs in the cross-correlation", "[records][synthetic]") {
  flyby::test::ScratchDir dir("synthetic_beat");
  const auto o = beat_options(flyby::test::seed("synthetic_beat"));
  const auto path = dir / "beat.h5";
  const auto s = write_synthetic_record(path, o, current_record_provenance("synthetic"));
  RecordReader r(path);
  REQUIRE(r.tag_count() == s.tag_count);
  REQUIRE(r.header().duration_ps == 2'000'000'000'000);

  // Channel B: uncorrelated 2.5e5/s plus the pairs' second tags that fall in the window;
  // channel A: 2.5e5/s + 5e4/s. Counts are Poisson: 5σ with σ = √mean.
  const double mean_a = (2.5e5 + 5e4) * 2.0;
  REQUIRE(std::isfinite(mean_a));
  CHECK(std::abs(static_cast<double>(s.channel_counts[0]) - mean_a) < 5 * std::sqrt(mean_a));
  const double mean_b = 2.5e5 * 2.0 + static_cast<double>(s.pair_count);
  CHECK(std::abs(static_cast<double>(s.channel_counts[1]) - mean_b) < 5 * std::sqrt(mean_b));
  const double mean_pairs = 5e4 * 2.0;  // all but the last few µs of pairs land inside
  CHECK(std::abs(static_cast<double>(s.pair_count) - mean_pairs) < 5 * std::sqrt(mean_pairs));

  // Cross-correlation A→B: E accidentals per bin plus pairs × (probability of the bin).
  flyby::analysis::CorrelatorOptions co;
  co.start_channel = 0;
  co.stop_channel = 1;
  co.bin_width_ps = 5000;
  co.range_ps = 2'000'000;
  co.duration_ps = r.header().duration_ps;
  flyby::analysis::Correlator corr(co);
  {
    BlockPrefetcher ahead(r, 1 << 16);
    TagBlock b;
    while (ahead.next(b)) corr.add_chunk(b.time_ps, b.channel);
  }
  const auto h = corr.finish();
  REQUIRE(h.status == flyby::analysis::CorrelatorStatus::kSuccess);
  const double d_ps = 0.2e6, w = 2 * std::numbers::pi * 5.0e-6, V = 0.8;  // per ps
  const double norm = envelope_integral(0, 1e9 * d_ps, d_ps, w, V);
  double chi2 = 0;
  for (std::size_t k = 0; k < h.counts.size(); ++k) {
    const double lo = static_cast<double>(h.tau_ps[k]) - 2500, hi = lo + 5000;
    double expect = h.expected_counts_per_bin;
    if (hi > 0) expect += static_cast<double>(s.pair_count) * envelope_integral(std::max(lo, 0.0), hi, d_ps, w, V) / norm;
    REQUIRE(std::isfinite(expect));
    const double diff = static_cast<double>(h.counts[k]) - expect;
    chi2 += diff * diff / expect;
  }
  // Pearson χ² with one dof per bin (the model has no fitted parameter); bound at p = 1e-4.
  const double dof = static_cast<double>(h.counts.size());
  INFO("chi2 " << chi2 << " for " << dof << " bins");
  CHECK(chi2 < gsl_cdf_chisq_Qinv(1e-4, dof));
  // The pending queue holds the delayed tags of about rate × mean delay pairs (5e4/s × 0.2 µs
  // = 0.01): it must stay tiny, independent of the record length.
  CHECK(s.peak_pending_tags < 64);
}

TEST_CASE("synthetic record: the same seed gives the same record, another seed another record", "[records][synthetic]") {
  flyby::test::ScratchDir dir("synthetic_repro");
  auto o = beat_options(flyby::test::seed("synthetic_repro"));
  o.duration_s = 0.05;
  write_synthetic_record(dir / "a.h5", o, current_record_provenance("synthetic"));
  write_synthetic_record(dir / "b.h5", o, current_record_provenance("synthetic"));
  o.seed += 1;
  write_synthetic_record(dir / "c.h5", o, current_record_provenance("synthetic"));
  const auto a = read_record(dir / "a.h5"), b = read_record(dir / "b.h5"), c = read_record(dir / "c.h5");
  REQUIRE(a.tags.size() > 1000);
  CHECK(a.tags.time_ps == b.tags.time_ps);
  CHECK(a.tags.channel == b.tags.channel);
  CHECK(a.tags.time_ps != c.tags.time_ps);
}

TEST_CASE("synthetic record: 10^6 tags stream through reader and correlator with bounded buffers", "[records][synthetic][scale]") {
  flyby::test::ScratchDir dir("synthetic_scale");
  SyntheticOptions o;
  o.channels = {{"A", ChannelRole::kDetector, 5e5}, {"B", ChannelRole::kDetector, 5e5}};
  o.duration_s = 10.0;
  o.max_tags = 1'000'000;
  o.seed = flyby::test::seed("synthetic_scale");
  o.writer.chunk_tags = 1 << 16;
  const auto path = dir / "big.h5";
  const auto s = write_synthetic_record(path, o, current_record_provenance("synthetic"));
  REQUIRE(s.tag_count == 1'000'000);

  flyby::analysis::CorrelatorOptions co;
  co.start_channel = 0;
  co.stop_channel = 1;
  co.bin_width_ps = 1000;
  co.range_ps = 1'000'000;
  co.threads = 2;
  co.min_tags_per_thread = 1024;
  const std::size_t block = 1 << 15;
  RecordReader r(path);
  flyby::analysis::Correlator streamed(co);
  {
    BlockPrefetcher ahead(r, block);
    TagBlock b;
    while (ahead.next(b)) streamed.add_chunk(b.time_ps, b.channel);
  }
  const auto hs = streamed.finish();
  // Buffered tags: one block plus the tags within the look-back span (1 µs at 1e6 tags/s: about
  // one tag) of the block boundary. A correlator that kept the record would hold 10^6.
  INFO("peak buffered " << hs.peak_buffered_tags);
  CHECK(hs.peak_buffered_tags <= block + 1000);

  // The in-memory one-shot correlation of the same tags (one thread) gives the same counts.
  const auto d = read_record(path);
  std::vector<int> ch(d.tags.channel.begin(), d.tags.channel.end());
  co.threads = 1;
  const auto hm = flyby::analysis::correlate(d.tags.time_ps, ch, co);
  CHECK(hm.counts == hs.counts);
  CHECK(hm.n_start_used == hs.n_start_used);
  CHECK(hm.n_stop == hs.n_stop);
}

TEST_CASE("synthetic record: bad options are input errors", "[records][synthetic]") {
  flyby::test::ScratchDir dir("synthetic_bad");
  SyntheticOptions o;
  CHECK_THROWS_AS(write_synthetic_record(dir / "x.h5", o, {}), flyby::InputError);  // no channel
  o.channels = {{"A", ChannelRole::kDetector, -1}};
  CHECK_THROWS_AS(write_synthetic_record(dir / "x.h5", o, {}), flyby::InputError);
  o.channels = {{"A", ChannelRole::kDetector, 10}};
  o.pairs = SyntheticPairs{0, 3, 1, 1, 0, 0};
  CHECK_THROWS_AS(write_synthetic_record(dir / "x.h5", o, {}), flyby::InputError);
  o.pairs.reset();
  o.duration_s = 0;
  CHECK_THROWS_AS(write_synthetic_record(dir / "x.h5", o, {}), flyby::InputError);
  CHECK(dir.entries().empty());  // nothing half-written left behind
}
