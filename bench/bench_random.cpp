// Throughput of the keyed PCG streams: cost of making a stream and of a draw.
#include <benchmark/benchmark.h>

#include "engine/common/random.h"

static void BM_MakeStream(benchmark::State& state) {
  std::uint64_t i = 0;
  for (auto _ : state) {
    auto rng = flyby::make_stream(1, flyby::StreamPurpose::kTrajectory, i++);
    benchmark::DoNotOptimize(rng());
  }
  state.counters["streams_per_s"] = benchmark::Counter(double(state.iterations()), benchmark::Counter::kIsRate);
}
BENCHMARK(BM_MakeStream);

static void BM_UniformDraw(benchmark::State& state) {
  auto rng = flyby::make_stream(1, flyby::StreamPurpose::kTest, 0);
  for (auto _ : state) benchmark::DoNotOptimize(flyby::uniform_open0(rng));
  state.counters["draws_per_s"] = benchmark::Counter(double(state.iterations()), benchmark::Counter::kIsRate);
}
BENCHMARK(BM_UniformDraw);

BENCHMARK_MAIN();
