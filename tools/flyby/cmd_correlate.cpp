// `flyby correlate`: start–stop correlation histogram and g2(τ) of a time-tag record, streamed
// block by block through the correlator (engine/analysis/correlator.h).
#include <cmath>
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>
#include <fstream>
#include <sstream>

#include "engine/analysis/correlator.h"
#include "engine/analysis/g2_csv.h"
#include "engine/common/atomic_output.h"
#include "engine/common/errors.h"
#include "engine/common/provenance.h"
#include "engine/records/block_prefetch.h"
#include "engine/records/record_reader.h"
#include "tools/flyby/commands.h"
#include "tools/flyby/plot_runner.h"

namespace flyby::cli {
namespace {

struct CorrelateArgs {
  std::string record;
  std::string start, stop;
  double bin_ns = 0, range_ns = 0;
  std::string output;
  bool json = false;
  std::string plot;
  std::vector<std::string> windows_us;
  std::string slice;
  std::string herald;
  double herald_min_ns = 0, herald_max_ns = -1;
  int threads = 0;
  std::size_t block_tags = 1 << 20;
};

// A channel given by name or by numeric id; InputError listing the channels otherwise.
int resolve_channel(const records::RecordHeader& h, const std::string& text, const char* flag) {
  if (auto i = h.channel_index(text)) return h.channels[*i].id;
  try {
    std::size_t used = 0;
    const int id = std::stoi(text, &used);
    if (used == text.size() && id >= 0 && id <= 255)
      if (auto i = h.channel_index(static_cast<records::ChannelId>(id))) return id;
  } catch (const std::exception&) {
  }
  std::string names;
  for (const auto& c : h.channels) names += (names.empty() ? "" : ", ") + c.name + "=" + std::to_string(c.id);
  throw InputError(std::string(flag) + " '" + text + "': no such channel in the record (channels: " + names + ")");
}

std::int64_t ps_from_ns(double ns, const char* flag) {
  const double ps = ns * 1e3;
  if (!std::isfinite(ps) || std::abs(ps - std::round(ps)) > 1e-6 * std::max(1.0, std::abs(ps)))
    throw InputError(std::string(flag) + " " + std::to_string(ns) + " ns is not a whole number of ps");
  return static_cast<std::int64_t>(std::llround(ps));
}

std::string channel_label(const records::RecordHeader& h, int id) {
  auto i = h.channel_index(static_cast<records::ChannelId>(id));
  return std::to_string(id) + " (" + (i ? h.channels[*i].name : std::string("?")) + ")";
}

void run_correlate(const CorrelateArgs& a) {
  records::RecordReader reader(a.record);
  const auto& h = reader.header();
  analysis::CorrelatorOptions o;
  o.start_channel = resolve_channel(h, a.start, "--start");
  o.stop_channel = resolve_channel(h, a.stop, "--stop");
  o.bin_width_ps = ps_from_ns(a.bin_ns, "--bin-ns");
  o.range_ps = ps_from_ns(a.range_ns, "--range-ns");
  if (h.duration_ps > 0) o.duration_ps = h.duration_ps;
  o.threads = a.threads;
  for (const auto& w : a.windows_us) {
    const auto colon = w.find(':');
    double t0 = 0, t1 = 0;
    try {
      if (colon == std::string::npos) throw std::invalid_argument("no colon");
      t0 = std::stod(w.substr(0, colon));
      t1 = std::stod(w.substr(colon + 1));
    } catch (const std::exception&) {
      throw InputError("--window-us '" + w + "': expected BEGIN:END in µs from the record start");
    }
    o.start_windows.push_back({h.start_ps + static_cast<std::int64_t>(std::llround(t0 * 1e6)),
                               h.start_ps + static_cast<std::int64_t>(std::llround(t1 * 1e6))});
  }
  if (!a.slice.empty()) {
    if (!o.start_windows.empty()) throw InputError("--slice and --window-us cannot be combined");
    int i = 0, n = 0;
    char slash = 0;
    std::istringstream ss(a.slice);
    if (!(ss >> i >> slash >> n) || slash != '/' || !ss.eof() || n < 1 || i < 1 || i > n)
      throw InputError("--slice '" + a.slice + "': expected I/N with 1 <= I <= N");
    if (h.duration_ps <= 0) throw InputError("--slice: the record has no duration");
    const auto b = h.start_ps + h.duration_ps * static_cast<std::int64_t>(i - 1) / n;
    const auto e = h.start_ps + h.duration_ps * static_cast<std::int64_t>(i) / n;
    o.start_windows.push_back({b, e});
  }
  if (!a.herald.empty()) {
    if (a.herald_max_ns < 0) throw InputError("--herald needs --herald-max-ns (longest herald-to-start delay)");
    o.herald = analysis::HeraldCondition{resolve_channel(h, a.herald, "--herald"), ps_from_ns(a.herald_min_ns, "--herald-min-ns"),
                                         ps_from_ns(a.herald_max_ns, "--herald-max-ns")};
  }
  if (a.block_tags < 1) throw InputError("--block-tags must be >= 1");

  analysis::Correlator corr(o);
  records::TagBlock block;
  {
    // The next block is read on a background thread while this one is correlated.
    records::BlockPrefetcher ahead(reader, a.block_tags);
    while (ahead.next(block)) corr.add_chunk(block.time_ps, block.channel);
  }
  const auto r = corr.finish();

  const auto prov = current_provenance();
  std::vector<std::pair<std::string, std::string>> meta{
      {"flyby_output", "correlation histogram (flyby correlate)"},
      {"flyby_version", prov.version},
      {"command_line", prov.command_line},
      {"host", prov.host},
      {"date_utc", prov.date_utc},
      {"record", a.record},
      {"record_source", h.provenance.source},
      {"record_flyby_version", h.provenance.flyby_version},
      {"record_seed", h.provenance.seed ? std::to_string(*h.provenance.seed) : std::string("none")},
      {"start_channel", channel_label(h, o.start_channel)},
      {"stop_channel", channel_label(h, o.stop_channel)},
      {"bin_width_ps", std::to_string(o.bin_width_ps)},
      {"range_ps", std::to_string(r.options.range_ps)},
      {"duration_s", std::to_string(r.duration_ps * 1e-12)},
      {"n_start", std::to_string(r.n_start_used)},
      {"n_start_seen", std::to_string(r.n_start_seen)},
      {"n_stop", std::to_string(r.n_stop)},
      {"expected_counts_per_bin", std::to_string(r.expected_counts_per_bin)},
      {"normalization", "g2 = counts / (n_start n_stop bin_width / duration); g2_err = sqrt(counts) / same"},
      {"status", analysis::to_string(r.status)}};
  if (!o.start_windows.empty()) {
    std::string w;
    for (const auto& win : o.start_windows)
      w += (w.empty() ? "" : " ") + std::to_string((win.begin_ps - h.start_ps) * 1e-6) + ":" +
           std::to_string((win.end_ps - h.start_ps) * 1e-6);
    meta.emplace_back("start_windows_us", w);
  }
  if (o.herald)
    meta.emplace_back("herald", channel_label(h, o.herald->channel) + " " + std::to_string(o.herald->min_delay_ps) +
                                    ".." + std::to_string(o.herald->max_delay_ps) + " ps before the start");

  if (!a.output.empty()) {
    AtomicTextFile f(a.output);
    analysis::write_g2_csv(f.stream(), r, meta);
    f.commit();
  }
  if (a.json) {
    nlohmann::ordered_json j;
    for (const auto& [k, v] : meta) j["meta"][k] = v;
    j["status"] = analysis::to_string(r.status);
    j["message"] = r.message;
    j["n_start"] = r.n_start_used;
    j["n_stop"] = r.n_stop;
    j["duration_ps"] = r.duration_ps;
    j["bin_width_ps"] = o.bin_width_ps;
    j["expected_counts_per_bin"] = r.expected_counts_per_bin;
    std::vector<double> tau_ns(r.tau_ps.size());
    for (std::size_t b = 0; b < tau_ns.size(); ++b) tau_ns[b] = static_cast<double>(r.tau_ps[b]) * 1e-3;
    j["tau_ns"] = tau_ns;
    j["counts"] = r.counts;
    j["g2"] = r.g2;
    j["g2_err"] = r.g2_err;
    std::cout << j.dump(1) << "\n";
  } else if (a.output.empty()) {
    analysis::write_g2_csv(std::cout, r, meta);
  } else {
    std::cerr << r.full_report();
  }
  if (!a.plot.empty()) {
    if (r.status != analysis::CorrelatorStatus::kSuccess)
      throw InputError("cannot plot: " + r.message);
    std::string csv = a.output;
    std::unique_ptr<AtomicOutputPath> tmp;
    if (csv.empty()) {  // the plot helper reads a CSV: write a temporary one next to the figure
      tmp = std::make_unique<AtomicOutputPath>(a.plot + ".csv");
      std::ofstream f(tmp->temp_path());
      analysis::write_g2_csv(f, r, meta);
      f.close();
      csv = tmp->temp_path().string();
    }
    run_plot_script("plot_g2.py", {csv}, a.plot);
  }
  if (r.status != analysis::CorrelatorStatus::kSuccess) std::cerr << "flyby correlate: warning: " << r.message << "\n";
}

void register_correlate(CLI::App& app) {
  auto args = std::make_shared<CorrelateArgs>();
  auto* c = app.add_subcommand("correlate",
                               "Correlation histogram of all start-stop tag pairs within +-range and its "
                               "normalization to g2(tau); CSV columns tau_ns,counts,g2,g2_err");
  c->add_option("record", args->record, "time-tag record (.h5)")->required();
  c->add_option("--start", args->start, "start channel: name or id")->required();
  c->add_option("--stop", args->stop, "stop channel: name or id (same as --start: autocorrelation)")->required();
  c->add_option("--bin-ns", args->bin_ns, "bin width in ns (whole ps)")->required();
  c->add_option("--range-ns", args->range_ns, "largest |tau| of a bin centre in ns")->required();
  c->add_option("-o,--output", args->output, "write the CSV here (default: standard output)");
  c->add_flag("--json", args->json, "print the result as JSON on standard output");
  c->add_option("--plot", args->plot, "write a figure of g2 with error bars (.png, .svg, .pdf)");
  c->add_option("--window-us", args->windows_us,
                "count starts only in BEGIN:END (us from the record start); repeatable, sorted, non-overlapping");
  c->add_option("--slice", args->slice, "count starts only in slice I/N of the record (drift checks)");
  c->add_option("--herald", args->herald, "count a start only after a click in this channel (name or id)");
  c->add_option("--herald-min-ns", args->herald_min_ns, "shortest herald-to-start delay in ns (default 0)");
  c->add_option("--herald-max-ns", args->herald_max_ns, "longest herald-to-start delay in ns");
  c->add_option("--threads", args->threads, "OpenMP threads (default: OMP_NUM_THREADS or all cores)");
  c->add_option("--block-tags", args->block_tags, "tags read per block (memory use ~ 27 bytes per tag: three blocks in flight)");
  c->callback([args] { run_correlate(*args); });
}

}  // namespace

const CommandRegistrar kRegisterCorrelate{60, &register_correlate};

}  // namespace flyby::cli
