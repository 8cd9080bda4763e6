// Throughput of the start–stop correlator (engine/analysis/correlator.h) on 10^7 synthetic tags:
// two independent Poisson channels, fed in blocks as a record reader delivers them. Reports
// tags/s in total and per thread (kIsRate), for 1 and 2 OpenMP threads and two ranges.
#include <benchmark/benchmark.h>

#include <algorithm>
#include <cmath>
#include <vector>

#include "engine/analysis/correlator.h"
#include "engine/common/random.h"

namespace {

struct Stream {
  std::vector<std::int64_t> t;
  std::vector<std::uint8_t> ch;
};

// 10^7 tags: channels 0 and 1 at 5e5 /s each (10 s of data), a lab-like singles rate.
const Stream& stream() {
  static const Stream s = [] {
    Stream out;
    const std::size_t n = 10'000'000;
    auto rng = flyby::make_stream(1, flyby::StreamPurpose::kTest, 0);
    out.t.reserve(n);
    out.ch.reserve(n);
    double t = 0;
    const double total_rate_per_ps = 1e6 * 1e-12;
    for (std::size_t i = 0; i < n; ++i) {
      t += -std::log(flyby::uniform_open0(rng)) / total_rate_per_ps;
      out.t.push_back(static_cast<std::int64_t>(t));
      out.ch.push_back(static_cast<std::uint8_t>(rng() & 1u));
    }
    return out;
  }();
  return s;
}

void BM_Correlator(benchmark::State& state) {
  const auto& s = stream();
  const int threads = static_cast<int>(state.range(0));
  const std::int64_t range_ps = state.range(1);
  const std::size_t block = 1 << 20;
  std::uint64_t pairs = 0;
  for (auto _ : state) {
    flyby::analysis::CorrelatorOptions o;
    o.start_channel = 0;
    o.stop_channel = 1;
    o.bin_width_ps = 1000;
    o.range_ps = range_ps;
    o.threads = threads;
    o.duration_ps = s.t.back() - s.t.front() + 1;
    flyby::analysis::Correlator c(o);
    for (std::size_t i = 0; i < s.t.size(); i += block) {
      const std::size_t m = std::min(block, s.t.size() - i);
      c.add_chunk(std::span<const std::int64_t>(s.t).subspan(i, m), std::span<const std::uint8_t>(s.ch).subspan(i, m));
    }
    const auto r = c.finish();
    pairs = 0;
    for (auto v : r.counts) pairs += v;
    benchmark::DoNotOptimize(pairs);
  }
  const double tags = static_cast<double>(s.t.size()) * static_cast<double>(state.iterations());
  state.counters["tags_per_s"] = benchmark::Counter(tags, benchmark::Counter::kIsRate);
  state.counters["tags_per_s_per_thread"] = benchmark::Counter(tags / threads, benchmark::Counter::kIsRate);
  state.counters["pairs_per_tag"] = static_cast<double>(pairs) / static_cast<double>(s.t.size());
}
// Arguments: threads, range in ps (±100 ns and ±1 µs around zero delay).
BENCHMARK(BM_Correlator)->Args({1, 100'000})->Args({2, 100'000})->Args({1, 1'000'000})->Args({2, 1'000'000})
    ->Unit(benchmark::kMillisecond)->UseRealTime();

}  // namespace

BENCHMARK_MAIN();
