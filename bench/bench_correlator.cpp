// Throughput of the start–stop correlator (engine/analysis/correlator.h) on 10^7 synthetic tags:
// two independent Poisson channels at 5e5 /s each (10 s of data, a lab-like singles rate).
//
// BM_Correlator: tags in memory, fed in blocks of 2^20 as a record reader delivers them.
// BM_CorrelateFileVsPlainRead: the same tags written to a flyby record in /tmp; each iteration
// measures (1) a plain HDF5 read of both tag datasets in the same blocks, nothing else, and
// (2) `flyby correlate`'s path (validating RecordReader, read-ahead thread, correlator), and
// reports both rates and their ratios (wall time, and CPU time of all threads). Run with
//   bench_correlator --benchmark_out=correlator.json --benchmark_out_format=json
// for JSON. With FLYBY_BENCH_RECORD=RUN.h5 (channels 0 and 1) the file benchmark runs on that
// record instead (e.g. a 10^9-tag record from `flyby synth`). Rates per CPU second (tags_per_cpu_s) count the CPU time of all threads of the
// process, so they are rates per core even on a loaded machine; tags_per_s is wall time.
#include <benchmark/benchmark.h>
#include <hdf5.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdlib>
#include <ctime>
#include <filesystem>
#include <vector>

#include "engine/analysis/correlator.h"
#include "engine/common/random.h"
#include "engine/records/block_prefetch.h"
#include "engine/records/record_reader.h"
#include "engine/records/record_writer.h"

namespace {

constexpr std::size_t kTags = 10'000'000;
constexpr std::size_t kBlock = std::size_t{1} << 20;

struct Stream {
  std::vector<std::int64_t> t;
  std::vector<std::uint8_t> ch;
};

const Stream& stream() {
  static const Stream s = [] {
    Stream out;
    auto rng = flyby::make_stream(1, flyby::StreamPurpose::kTest, 0);
    out.t.reserve(kTags);
    out.ch.reserve(kTags);
    double t = 0;
    const double total_rate_per_ps = 1e6 * 1e-12;
    for (std::size_t i = 0; i < kTags; ++i) {
      t += -std::log(flyby::uniform_open0(rng)) / total_rate_per_ps;
      out.t.push_back(static_cast<std::int64_t>(t));
      out.ch.push_back(static_cast<std::uint8_t>(rng() & 1u));
    }
    return out;
  }();
  return s;
}

double cpu_seconds() {
  timespec ts{};
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
}

double wall_seconds() {
  return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
}

flyby::analysis::CorrelatorOptions options(int threads, std::int64_t range_ps) {
  const auto& s = stream();
  flyby::analysis::CorrelatorOptions o;
  o.start_channel = 0;
  o.stop_channel = 1;
  o.bin_width_ps = 1000;
  o.range_ps = range_ps;
  o.threads = threads;
  o.duration_ps = s.t.back() - s.t.front() + 1;
  return o;
}

void BM_Correlator(benchmark::State& state) {
  const auto& s = stream();
  const int threads = static_cast<int>(state.range(0));
  std::uint64_t pairs = 0;
  double cpu = 0;
  for (auto _ : state) {
    const double c0 = cpu_seconds();
    flyby::analysis::Correlator c(options(threads, state.range(1)));
    for (std::size_t i = 0; i < s.t.size(); i += kBlock) {
      const std::size_t m = std::min(kBlock, s.t.size() - i);
      c.add_chunk(std::span<const std::int64_t>(s.t).subspan(i, m), std::span<const std::uint8_t>(s.ch).subspan(i, m));
    }
    const auto r = c.finish();
    cpu += cpu_seconds() - c0;
    pairs = 0;
    for (auto v : r.counts) pairs += v;
    benchmark::DoNotOptimize(pairs);
  }
  const double tags = static_cast<double>(s.t.size()) * static_cast<double>(state.iterations());
  state.counters["tags_per_s"] = benchmark::Counter(tags, benchmark::Counter::kIsRate);
  state.counters["tags_per_cpu_s"] = tags / cpu;
  state.counters["pairs_per_tag"] = static_cast<double>(pairs) / static_cast<double>(s.t.size());
}
// Arguments: threads, range in ps (±100 ns and ±1 µs around zero delay).
BENCHMARK(BM_Correlator)->Args({1, 100'000})->Args({2, 100'000})->Args({1, 1'000'000})->Args({2, 1'000'000})
    ->Unit(benchmark::kMillisecond)->UseRealTime();

const std::filesystem::path& record_file() {
  static const std::filesystem::path p = [] {
    if (const char* given = std::getenv("FLYBY_BENCH_RECORD")) return std::filesystem::path(given);
    const auto& s = stream();
    auto path = std::filesystem::temp_directory_path() / ("flyby-bench-corr-" + std::to_string(::getpid()) + ".h5");
    flyby::records::RecordHeader h;
    h.channels = {{0, "A", flyby::records::ChannelRole::kDetector}, {1, "B", flyby::records::ChannelRole::kDetector}};
    h.resolution_ps = 1;
    h.start_ps = 0;
    h.duration_ps = s.t.back() + 1;
    flyby::records::RecordWriter w(path, h);
    w.append(s.t, s.ch);
    w.commit();
    std::atexit([] { std::filesystem::remove(record_file()); });
    return path;
  }();
  return p;
}

// Plain HDF5 read of /tags/time_ps and /tags/channel in blocks: the floor for any analysis.
std::uint64_t plain_read(const std::filesystem::path& path) {
  const hid_t f = H5Fopen(path.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
  const hid_t dt = H5Dopen2(f, "/tags/time_ps", H5P_DEFAULT);
  const hid_t dc = H5Dopen2(f, "/tags/channel", H5P_DEFAULT);
  const hid_t fs_t = H5Dget_space(dt), fs_c = H5Dget_space(dc);
  hsize_t n = 0;
  H5Sget_simple_extent_dims(fs_t, &n, nullptr);
  std::vector<std::int64_t> t(kBlock);
  std::vector<std::uint8_t> c(kBlock);
  std::uint64_t sum = 0;
  for (hsize_t first = 0; first < n; first += kBlock) {
    const hsize_t cnt = std::min<hsize_t>(kBlock, n - first);
    const hid_t ms = H5Screate_simple(1, &cnt, nullptr);
    H5Sselect_hyperslab(fs_t, H5S_SELECT_SET, &first, nullptr, &cnt, nullptr);
    H5Sselect_hyperslab(fs_c, H5S_SELECT_SET, &first, nullptr, &cnt, nullptr);
    H5Dread(dt, H5T_NATIVE_INT64, ms, fs_t, H5P_DEFAULT, t.data());
    H5Dread(dc, H5T_NATIVE_UINT8, ms, fs_c, H5P_DEFAULT, c.data());
    H5Sclose(ms);
    sum += static_cast<std::uint64_t>(t[cnt - 1]) + c[cnt - 1];
  }
  H5Sclose(fs_t);
  H5Sclose(fs_c);
  H5Dclose(dt);
  H5Dclose(dc);
  H5Fclose(f);
  return sum;
}

void BM_CorrelateFileVsPlainRead(benchmark::State& state) {
  const auto& path = record_file();
  const int threads = static_cast<int>(state.range(0));
  double read_wall = 0, read_cpu = 0, corr_wall = 0, corr_cpu = 0;
  std::uint64_t n_tags = 0;
  for (auto _ : state) {
    double w0 = wall_seconds();
    const double r0 = cpu_seconds();
    benchmark::DoNotOptimize(plain_read(path));
    read_cpu += cpu_seconds() - r0;
    read_wall += wall_seconds() - w0;

    w0 = wall_seconds();
    const double c0 = cpu_seconds();
    flyby::records::RecordReader reader(path);
    auto o = options(threads, state.range(1));
    o.duration_ps = reader.header().duration_ps;
    n_tags = reader.tag_count();
    flyby::analysis::Correlator c(o);
    flyby::records::BlockPrefetcher ahead(reader, kBlock);
    flyby::records::TagBlock b;
    while (ahead.next(b)) c.add_chunk(b.time_ps, b.channel);
    benchmark::DoNotOptimize(c.finish().counts);
    corr_cpu += cpu_seconds() - c0;
    const double dw = wall_seconds() - w0;
    corr_wall += dw;
    state.SetIterationTime(dw);
  }
  const double tags = static_cast<double>(n_tags) * static_cast<double>(state.iterations());
  state.counters["plain_read_tags_per_s"] = tags / read_wall;
  state.counters["correlate_tags_per_s"] = tags / corr_wall;
  state.counters["correlate_tags_per_cpu_s"] = tags / corr_cpu;
  state.counters["plain_read_tags_per_cpu_s"] = tags / read_cpu;
  state.counters["correlate_over_plain_read"] = corr_wall / read_wall;
  state.counters["correlate_over_plain_read_cpu"] = corr_cpu / read_cpu;
}
// Arguments: threads, range in ps.
BENCHMARK(BM_CorrelateFileVsPlainRead)->Args({1, 100'000})->Args({2, 100'000})->Args({1, 1'000'000})
    ->Unit(benchmark::kMillisecond)->UseManualTime();

}  // namespace

BENCHMARK_MAIN();
