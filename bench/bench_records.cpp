// Throughput of the record path: HDF5 writer and reader, text import and CSV export, and the
// detector chain, in tags per second. Sizes are large enough that per-file overhead is small.
#include <benchmark/benchmark.h>
#include <unistd.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "engine/common/random.h"
#include "engine/records/csv_export.h"
#include "engine/records/record_reader.h"
#include "engine/records/record_writer.h"
#include "engine/records/tag_import.h"
#include "models/detectors/detector_chain.h"

namespace {

using namespace flyby::records;

std::filesystem::path tmp(const char* name) {
  return std::filesystem::temp_directory_path() / ("flyby-bench-" + std::to_string(::getpid()) + "-" + name);
}

RecordData make_data(std::size_t n) {
  auto rng = flyby::make_stream(1, flyby::StreamPurpose::kTest, 0);
  RecordData d;
  d.header.channels = {{0, "A", ChannelRole::kDetector}, {1, "B", ChannelRole::kDetector}};
  std::int64_t t = 0;
  for (std::size_t i = 0; i < n; ++i) {
    t += static_cast<std::int64_t>(rng() % 2'000'000);
    d.tags.push_back(t, static_cast<ChannelId>(rng() & 1));
  }
  d.header.duration_ps = t + 1;
  return d;
}

constexpr std::size_t kTags = 2'000'000;

void BM_WriteRecord(benchmark::State& state) {
  const RecordData d = make_data(kTags);
  const auto p = tmp("w.h5");
  for (auto _ : state) write_record(p, d);
  std::filesystem::remove(p);
  state.counters["tags_per_s"] = benchmark::Counter(double(state.iterations() * kTags), benchmark::Counter::kIsRate);
}
BENCHMARK(BM_WriteRecord)->Unit(benchmark::kMillisecond);

void BM_ReadRecord(benchmark::State& state) {
  const auto p = tmp("r.h5");
  write_record(p, make_data(kTags));
  for (auto _ : state) {
    RecordReader r(p);
    TagBlock b;
    std::int64_t sum = 0;
    while (r.read_next(b, static_cast<std::size_t>(state.range(0)))) sum += b.time_ps.back();
    benchmark::DoNotOptimize(sum);
  }
  std::filesystem::remove(p);
  state.counters["tags_per_s"] = benchmark::Counter(double(state.iterations() * kTags), benchmark::Counter::kIsRate);
}
BENCHMARK(BM_ReadRecord)->Arg(4096)->Arg(65536)->Arg(1 << 20)->Unit(benchmark::kMillisecond);

void BM_ExportImportCsv(benchmark::State& state) {
  const auto p = tmp("e.h5"), q = tmp("i.h5");
  write_record(p, make_data(kTags));
  for (auto _ : state) {
    std::stringstream csv;
    RecordReader r(p);
    export_csv(r, csv);
    TextImportOptions o;
    import_text(csv, "bench", q, o);
  }
  std::filesystem::remove(p);
  std::filesystem::remove(q);
  state.counters["tags_per_s"] = benchmark::Counter(double(state.iterations() * kTags), benchmark::Counter::kIsRate);
}
BENCHMARK(BM_ExportImportCsv)->Unit(benchmark::kMillisecond);

void BM_DetectorChain(benchmark::State& state) {
  using namespace flyby::detectors;
  DetectorChainOptions opt;
  for (std::uint8_t k = 0; k < 4; ++k) {
    DetectorChannelOptions c;
    c.channel = {k, std::string(1, static_cast<char>('a' + k)), ChannelRole::kDetector};
    c.efficiency = 0.6;
    c.dead_time_ns = 22;
    c.jitter_fwhm_ps = 350;
    c.dark_rate_per_s = 100;
    c.afterpulse_probability = 0.01;
    c.afterpulse_delay_ns = 30;
    c.afterpulse_time_constant_ns = 50;
    opt.channels.push_back(c);
  }
  auto rng = flyby::make_stream(2, flyby::StreamPurpose::kTest, 0);
  std::vector<Photon> photons;
  double t = 0;
  for (std::size_t i = 0; i < kTags; ++i) {
    t += -std::log(flyby::uniform_open0(rng)) * 1e6;  // 1e6 photons per second
    photons.push_back({static_cast<std::int64_t>(t), static_cast<std::uint32_t>(rng() & 3)});
  }
  for (auto _ : state) {
    DetectorChain chain(opt, 1, 0, static_cast<std::int64_t>(t) + 1);
    TagBlock out;
    for (std::size_t i = 0; i < photons.size(); i += 65536) {
      chain.push(std::span(photons).subspan(i, std::min<std::size_t>(65536, photons.size() - i)), out);
      out.clear();
    }
    chain.finish(out);
    benchmark::DoNotOptimize(out.size());
  }
  state.counters["photons_per_s"] = benchmark::Counter(double(state.iterations() * kTags), benchmark::Counter::kIsRate);
}
BENCHMARK(BM_DetectorChain)->Unit(benchmark::kMillisecond);

}  // namespace

BENCHMARK_MAIN();
