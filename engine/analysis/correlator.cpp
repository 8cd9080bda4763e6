// Streaming start–stop correlator (see correlator.h for the definition and the chunking rule).
#include "engine/analysis/correlator.h"

#include <omp.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <sstream>

#include "engine/common/errors.h"

namespace flyby::analysis {
namespace {

// Floor division for a positive divisor (C++ '/' truncates towards zero).
inline std::int64_t floor_div(std::int64_t a, std::int64_t b) {
  std::int64_t q = a / b;
  if ((a % b != 0) && (a < 0)) --q;
  return q;
}

}  // namespace

const char* to_string(CorrelatorStatus s) {
  switch (s) {
    case CorrelatorStatus::kSuccess: return "success";
    case CorrelatorStatus::kNoStarts: return "no-starts";
    case CorrelatorStatus::kNoStops: return "no-stops";
    case CorrelatorStatus::kNoDuration: return "no-duration";
  }
  return "unknown";
}

std::optional<std::string> CorrelatorOptions::validate() const {
  if (start_channel < 0) return "start channel must be >= 0, got " + std::to_string(start_channel);
  if (stop_channel < 0) return "stop channel must be >= 0, got " + std::to_string(stop_channel);
  if (bin_width_ps < 1) return "bin width must be >= 1 ps, got " + std::to_string(bin_width_ps) + " ps";
  if (range_ps < 0) return "range must be >= 0, got " + std::to_string(range_ps) + " ps";
  // 2K+1 bins; refuse histograms that could not be allocated sensibly.
  if (range_ps / bin_width_ps > 50'000'000)
    return "range / bin width gives more than 1e8 bins; widen the bins or shorten the range";
  if (range_ps > std::numeric_limits<std::int64_t>::max() / 8)
    return "range too large: " + std::to_string(range_ps) + " ps";
  if (duration_ps && *duration_ps <= 0)
    return "duration must be > 0 ps, got " + std::to_string(*duration_ps) + " ps";
  for (std::size_t i = 0; i < start_windows.size(); ++i) {
    const auto& w = start_windows[i];
    if (w.end_ps <= w.begin_ps)
      return "time window " + std::to_string(i) + " is empty or reversed: [" + std::to_string(w.begin_ps) +
             ", " + std::to_string(w.end_ps) + ") ps";
    if (i > 0 && w.begin_ps < start_windows[i - 1].end_ps)
      return "time windows must be sorted and non-overlapping; window " + std::to_string(i) +
             " starts before window " + std::to_string(i - 1) + " ends";
  }
  if (herald) {
    if (herald->channel < 0) return "herald channel must be >= 0";
    if (herald->channel == start_channel) return "herald channel must differ from the start channel";
    if (herald->min_delay_ps < 0) return "herald minimum delay must be >= 0 ps";
    if (herald->max_delay_ps < herald->min_delay_ps)
      return "herald maximum delay must be >= its minimum delay";
  }
  if (threads < 0) return "threads must be >= 0 (0: OpenMP default)";
  if (min_tags_per_thread < 1) return "min_tags_per_thread must be >= 1";
  return std::nullopt;
}

Correlator::Correlator(CorrelatorOptions options) : opt_(std::move(options)) {
  if (auto err = opt_.validate()) throw InputError("correlator: " + *err);
  half_bins_ = static_cast<int>(opt_.range_ps / opt_.bin_width_ps);
  opt_.range_ps = std::int64_t{half_bins_} * opt_.bin_width_ps;
  // Bin k holds 2τ + W in [2kW, 2kW + 2W): the largest |τ| that can land in a bin is
  // (2K+1)W/2, rounded up.
  lookback_ps_ = ((2 * std::int64_t{half_bins_} + 1) * opt_.bin_width_ps + 1) / 2;
  herald_lookback_ps_ = opt_.herald ? opt_.herald->max_delay_ps : 0;
  counts_.assign(2 * static_cast<std::size_t>(half_bins_) + 1, 0);
}

template <class Ch>
void Correlator::ingest(std::span<const std::int64_t> time_ps, std::span<const Ch> channel) {
  FLYBY_CHECK(!finished_, "Correlator::add_chunk after finish()");
  if (time_ps.size() != channel.size())
    throw InputError("correlator: chunk has " + std::to_string(time_ps.size()) + " times but " +
                     std::to_string(channel.size()) + " channels");
  if (time_ps.empty()) return;
  std::int64_t prev = last_time_ ? *last_time_ : std::numeric_limits<std::int64_t>::min();
  const int herald_ch = opt_.herald ? opt_.herald->channel : -1;
  for (std::size_t i = 0; i < time_ps.size(); ++i) {
    const std::int64_t t = time_ps[i];
    if (t < prev)
      throw InputError("correlator: tags not sorted in time: tag " + std::to_string(n_tags_ + i) + " at " +
                       std::to_string(t) + " ps follows " + std::to_string(prev) + " ps");
    prev = t;
    const int ch = static_cast<int>(channel[i]);
    std::uint8_t k = 0;
    if (ch == opt_.start_channel) k |= kStart;
    if (ch == opt_.stop_channel) k |= kStop;
    if (ch == herald_ch) k |= kHerald;
    if (k) {
      time_.push_back(t);
      kind_.push_back(k);
      used_.push_back(0);
    }
  }
  if (!first_time_) first_time_ = time_ps.front();
  last_time_ = time_ps.back();
  n_tags_ += time_ps.size();
  if (time_.empty()) return;
  // Hold back the tags that share the newest time stamp: a later chunk may hold more tags of
  // that instant, and ties must be processed together (heralds with zero delay).
  const auto ready = static_cast<std::size_t>(
      std::lower_bound(time_.begin(), time_.end(), time_.back()) - time_.begin());
  if (ready > n_done_) {
    process(ready);
    trim();
  }
}

void Correlator::add_chunk(std::span<const std::int64_t> t, std::span<const int> c) { ingest(t, c); }
void Correlator::add_chunk(std::span<const std::int64_t> t, std::span<const std::uint8_t> c) { ingest(t, c); }
void Correlator::add_chunk(std::span<const std::int64_t> t, std::span<const std::uint16_t> c) { ingest(t, c); }

void Correlator::process(std::size_t n_ready) {
  const std::size_t n0 = n_done_;
  // 1. Conditions on the new start tags, and singles counts.
  std::vector<std::int64_t> herald_times;
  if (opt_.herald) {
    for (std::size_t i = 0; i < n_ready; ++i)
      if (kind_[i] & kHerald) herald_times.push_back(time_[i]);
  }
  const auto& win = opt_.start_windows;
  for (std::size_t i = n0; i < n_ready; ++i) {
    const std::uint8_t k = kind_[i];
    if (k & kStop) ++n_stop_;
    if (k & kHerald) ++n_herald_;
    if (!(k & kStart)) continue;
    ++n_start_seen_;
    const std::int64_t t = time_[i];
    bool ok = true;
    if (!win.empty()) {
      auto it = std::upper_bound(win.begin(), win.end(), t,
                                 [](std::int64_t v, const TimeWindow& w) { return v < w.begin_ps; });
      ok = it != win.begin() && t < std::prev(it)->end_ps;
    }
    if (ok && opt_.herald) {
      auto it = std::lower_bound(herald_times.begin(), herald_times.end(), t - opt_.herald->max_delay_ps);
      ok = it != herald_times.end() && *it <= t - opt_.herald->min_delay_ps;
    }
    used_[i] = ok ? 1 : 0;
    if (ok) ++n_start_used_;
  }

  // 2. Start and stop lists over the buffer (positions are buffer indices, increasing).
  const bool autocorr = opt_.start_channel == opt_.stop_channel;
  std::vector<std::int64_t> s_time, p_time;
  std::vector<std::uint32_t> s_pos, p_pos;
  std::vector<std::uint8_t> s_used;
  FLYBY_CHECK(n_ready < std::numeric_limits<std::uint32_t>::max(), "correlator buffer exceeds 2^32 tags");
  for (std::size_t i = 0; i < n_ready; ++i) {
    if (kind_[i] & kStart) {
      s_time.push_back(time_[i]);
      s_pos.push_back(static_cast<std::uint32_t>(i));
      s_used.push_back(used_[i]);
    }
    if (!autocorr && (kind_[i] & kStop)) {
      p_time.push_back(time_[i]);
      p_pos.push_back(static_cast<std::uint32_t>(i));
    }
  }

  const std::int64_t W = opt_.bin_width_ps;
  const std::int64_t K = half_bins_;
  const std::int64_t L = lookback_ps_;
  const std::size_t nbins = counts_.size();
  auto bin_of = [W, K](std::int64_t tau) { return floor_div(2 * tau + W, 2 * W) + K; };

  // 3. Pair sweep. X is the list whose new elements are the later tag of a pair; Y the list of
  // earlier partners. Each thread takes a contiguous share of X's new elements.
  auto sweep = [&](const std::vector<std::int64_t>& xt, const std::vector<std::uint32_t>& xp,
                   const std::vector<std::int64_t>& yt, const std::vector<std::uint32_t>& yp,
                   auto&& count_pair, std::vector<std::vector<std::uint64_t>>& hist) {
    const std::size_t x0 = static_cast<std::size_t>(std::lower_bound(xp.begin(), xp.end(), n0) - xp.begin());
    const std::size_t nx = xt.size() - x0;
    if (nx == 0) return;
    const int nthreads = static_cast<int>(
        std::min<std::size_t>(hist.size(), std::max<std::size_t>(1, nx / opt_.min_tags_per_thread)));
#pragma omp parallel num_threads(nthreads)
    {
      const int tid = omp_get_thread_num();
      const int nt = omp_get_num_threads();
      const std::size_t a = x0 + nx * static_cast<std::size_t>(tid) / static_cast<std::size_t>(nt);
      const std::size_t b = x0 + nx * static_cast<std::size_t>(tid + 1) / static_cast<std::size_t>(nt);
      auto& h = hist[static_cast<std::size_t>(tid)];
      if (a < b) {
        std::size_t lo = static_cast<std::size_t>(
            std::lower_bound(yt.begin(), yt.end(), xt[a] - L) - yt.begin());
        std::size_t hi = static_cast<std::size_t>(std::lower_bound(yp.begin(), yp.end(), xp[a]) - yp.begin());
        for (std::size_t x = a; x < b; ++x) {
          const std::int64_t t = xt[x];
          while (lo < yt.size() && yt[lo] < t - L) ++lo;
          while (hi < yp.size() && yp[hi] < xp[x]) ++hi;
          for (std::size_t y = lo; y < hi; ++y) count_pair(h, x, y, t - yt[y]);
        }
      }
    }
  };

  int nthreads = opt_.threads > 0 ? opt_.threads : omp_get_max_threads();
  std::vector<std::vector<std::uint64_t>> hist(static_cast<std::size_t>(std::max(1, nthreads)),
                                               std::vector<std::uint64_t>(nbins, 0));
  auto add = [&](std::vector<std::uint64_t>& h, std::int64_t tau) {
    const std::int64_t b = bin_of(tau);
    if (b >= 0 && b < static_cast<std::int64_t>(nbins)) ++h[static_cast<std::size_t>(b)];
  };
  if (autocorr) {
    // Later tag x, earlier tag y of the same channel: (start y, stop x) at +d needs y used;
    // (start x, stop y) at −d needs x used.
    sweep(s_time, s_pos, s_time, s_pos,
          [&](std::vector<std::uint64_t>& h, std::size_t x, std::size_t y, std::int64_t d) {
            if (s_used[y]) add(h, d);
            if (s_used[x]) add(h, -d);
          },
          hist);
  } else {
    // Later stop x, earlier start y: τ = t_x − t_y >= 0.
    sweep(p_time, p_pos, s_time, s_pos,
          [&](std::vector<std::uint64_t>& h, std::size_t, std::size_t y, std::int64_t d) {
            if (s_used[y]) add(h, d);
          },
          hist);
    // Later start x, earlier stop y: τ = t_y − t_x <= 0.
    sweep(s_time, s_pos, p_time, p_pos,
          [&](std::vector<std::uint64_t>& h, std::size_t x, std::size_t, std::int64_t d) {
            if (s_used[x]) add(h, -d);
          },
          hist);
  }
  for (const auto& h : hist)
    for (std::size_t b = 0; b < nbins; ++b) counts_[b] += h[b];
  n_done_ = n_ready;
}

void Correlator::trim() {
  // Future tags come no earlier than the first unprocessed tag (or the newest processed one).
  const std::int64_t t_next = n_done_ < time_.size() ? time_[n_done_] : time_.back();
  const std::int64_t keep_after = t_next - std::max(lookback_ps_, herald_lookback_ps_);
  const auto drop = static_cast<std::size_t>(
      std::lower_bound(time_.begin(), time_.begin() + static_cast<std::ptrdiff_t>(n_done_), keep_after) -
      time_.begin());
  if (drop == 0) return;
  time_.erase(time_.begin(), time_.begin() + static_cast<std::ptrdiff_t>(drop));
  kind_.erase(kind_.begin(), kind_.begin() + static_cast<std::ptrdiff_t>(drop));
  used_.erase(used_.begin(), used_.begin() + static_cast<std::ptrdiff_t>(drop));
  n_done_ -= drop;
}

CorrelationHistogram Correlator::finish() {
  FLYBY_CHECK(!finished_, "Correlator::finish() called twice");
  if (time_.size() > n_done_) process(time_.size());
  finished_ = true;

  CorrelationHistogram r;
  r.options = opt_;
  r.half_bins = half_bins_;
  r.counts = counts_;
  r.n_start_seen = n_start_seen_;
  r.n_start_used = n_start_used_;
  r.n_stop = n_stop_;
  r.n_herald = n_herald_;
  r.n_tags = n_tags_;
  if (opt_.duration_ps) r.duration_ps = *opt_.duration_ps;
  else if (first_time_) r.duration_ps = *last_time_ - *first_time_;
  const std::size_t nb = counts_.size();
  r.tau_ps.resize(nb);
  for (std::size_t b = 0; b < nb; ++b)
    r.tau_ps[b] = (static_cast<std::int64_t>(b) - half_bins_) * opt_.bin_width_ps;

  r.expected_counts_per_bin = static_cast<double>(n_start_used_) * static_cast<double>(n_stop_) *
                              static_cast<double>(opt_.bin_width_ps) / static_cast<double>(r.duration_ps);
  if (n_start_used_ == 0) {
    r.status = CorrelatorStatus::kNoStarts;
    r.message = n_start_seen_ == 0 ? "no tags in the start channel " + std::to_string(opt_.start_channel)
                                   : "no start tag passed the window/herald conditions";
  } else if (n_stop_ == 0) {
    r.status = CorrelatorStatus::kNoStops;
    r.message = "no tags in the stop channel " + std::to_string(opt_.stop_channel);
  } else if (r.duration_ps <= 0) {
    r.status = CorrelatorStatus::kNoDuration;
    r.message = "record duration is zero; give it explicitly";
  }
  const bool ok = r.status == CorrelatorStatus::kSuccess;
  if (!ok) r.expected_counts_per_bin = std::numeric_limits<double>::quiet_NaN();
  r.g2.resize(nb);
  r.g2_err.resize(nb);
  for (std::size_t b = 0; b < nb; ++b) {
    const double c = static_cast<double>(counts_[b]);
    r.g2[b] = c / r.expected_counts_per_bin;
    r.g2_err[b] = std::sqrt(c) / r.expected_counts_per_bin;
  }
  return r;
}

std::string CorrelationHistogram::brief_report() const {
  std::ostringstream o;
  o << "correlation " << options.start_channel << "->" << options.stop_channel << ": " << to_string(status)
    << ", " << counts.size() << " bins of " << options.bin_width_ps << " ps, N_start " << n_start_used << ", N_stop "
    << n_stop << ", T " << duration_ps * 1e-12 << " s, expected " << expected_counts_per_bin << " counts/bin";
  if (!message.empty()) o << " (" << message << ")";
  return o.str();
}

std::string CorrelationHistogram::full_report() const {
  std::ostringstream o;
  o << brief_report() << "\n";
  o << "  start channel " << options.start_channel << ", stop channel " << options.stop_channel
    << (options.start_channel == options.stop_channel ? " (autocorrelation)" : "") << "\n";
  o << "  bins: " << counts.size() << " centred on k*" << options.bin_width_ps << " ps, k = " << -half_bins
    << ".." << half_bins << "\n";
  o << "  tags seen " << n_tags << ", start tags " << n_start_seen << " (used " << n_start_used
    << "), stop tags " << n_stop << "\n";
  if (!options.start_windows.empty()) {
    std::int64_t total = 0;
    for (const auto& w : options.start_windows) total += w.end_ps - w.begin_ps;
    o << "  starts restricted to " << options.start_windows.size() << " time windows, total "
      << total * 1e-12 << " s\n";
  }
  if (options.herald)
    o << "  herald: a click in channel " << options.herald->channel << " between "
      << options.herald->min_delay_ps << " and " << options.herald->max_delay_ps
      << " ps before the start (" << n_herald << " herald tags)\n";
  std::uint64_t total = 0;
  for (auto c : counts) total += c;
  o << "  pairs counted " << total << "; g2 = counts / (N_start N_stop W / T)\n";
  return o.str();
}

CorrelationHistogram correlate(std::span<const std::int64_t> time_ps, std::span<const int> channel,
                               const CorrelatorOptions& options) {
  Correlator c(options);
  c.add_chunk(time_ps, channel);
  return c.finish();
}

}  // namespace flyby::analysis
