// Streaming generator of synthetic time-tag records (see synthetic_tags.h).
#include "engine/records/synthetic_tags.h"

#include <cmath>
#include <functional>
#include <limits>
#include <numbers>
#include <queue>
#include <sstream>

#include "engine/common/errors.h"
#include "engine/common/random.h"

namespace flyby::records {

std::optional<std::string> SyntheticOptions::validate() const {
  if (channels.empty()) return "at least one channel is needed";
  if (channels.size() > 256) return "at most 256 channels, got " + std::to_string(channels.size());
  for (const auto& c : channels) {
    if (!is_valid_channel_name(c.name)) return "invalid channel name '" + c.name.substr(0, 80) + "'";
    if (!std::isfinite(c.rate_per_s) || c.rate_per_s < 0)
      return "channel '" + c.name + "': rate must be finite and >= 0 per s";
  }
  if (!std::isfinite(duration_s) || duration_s <= 0) return "duration must be > 0 s";
  if (duration_s > 1e6) return "duration must be <= 1e6 s (int64 picoseconds with margin)";
  if (!std::isfinite(resolution_ps) || resolution_ps < 1) return "resolution must be >= 1 ps";
  if (pairs) {
    const auto& p = *pairs;
    if (p.first >= channels.size() || p.second >= channels.size()) return "pair channels must be among the channels";
    if (!std::isfinite(p.rate_per_s) || p.rate_per_s < 0) return "pair rate must be finite and >= 0 per s";
    if (!std::isfinite(p.decay_us) || p.decay_us <= 0) return "pair decay time must be > 0 us";
    if (!std::isfinite(p.beat_MHz) || p.beat_MHz < 0) return "beat frequency must be >= 0 MHz";
    if (!std::isfinite(p.visibility) || p.visibility < 0 || p.visibility > 1) return "beat visibility must be in 0..1";
  }
  double total = pairs ? pairs->rate_per_s : 0;
  for (const auto& c : channels) total += c.rate_per_s;
  if (total <= 0) return "every rate is zero: no tags to generate";
  if (total > 1e12) return "total rate above 1e12 per s (one tag per ps)";
  return std::nullopt;
}

std::string SyntheticSummary::brief_report() const {
  std::ostringstream o;
  o << tag_count << " tags in " << channel_counts.size() << " channels over " << duration_ps * 1e-12 << " s";
  if (pair_count > 0) o << ", " << pair_count << " correlated pairs";
  return o.str();
}

namespace {

// Poisson arrival times in integer ps: exponential steps accumulated with the fraction carried,
// so long runs neither drift nor lose resolution.
struct PoissonClock {
  double mean_step_ps;
  std::int64_t t = 0;
  double frac = 0;
  std::int64_t next(Rng& rng) {
    const double x = frac - std::log(uniform_open0(rng)) * mean_step_ps;
    const double whole = std::floor(x);
    frac = x - whole;
    t += static_cast<std::int64_t>(whole);
    return t;
  }
};

}  // namespace

SyntheticSummary write_synthetic_record(const std::filesystem::path& path, const SyntheticOptions& o,
                                        RecordProvenance provenance) {
  if (auto e = o.validate()) throw InputError("synthetic record: " + *e);
  const std::int64_t window_ps = static_cast<std::int64_t>(std::llround(o.duration_s * 1e12));
  constexpr std::int64_t kNever = std::numeric_limits<std::int64_t>::max();

  RecordHeader h;
  for (std::size_t i = 0; i < o.channels.size(); ++i)
    h.channels.push_back(Channel{static_cast<ChannelId>(i), o.channels[i].name, o.channels[i].role});
  h.resolution_ps = o.resolution_ps;
  h.start_ps = 0;
  h.duration_ps = window_ps;
  h.provenance = std::move(provenance);
  RecordWriter w(path, h, o.writer);

  // Uncorrelated tags: one Poisson stream at the total rate, channel drawn by weight.
  double single_rate = 0;
  std::vector<double> cum;
  for (const auto& c : o.channels) cum.push_back(single_rate += c.rate_per_s);
  Rng rng_single = make_stream(o.seed, StreamPurpose::kAnalysis, 0);
  Rng rng_pairs = make_stream(o.seed, StreamPurpose::kAnalysis, 1);
  PoissonClock single{single_rate > 0 ? 1e12 / single_rate : 0};
  std::int64_t next_single = single_rate > 0 ? single.next(rng_single) : kNever;
  auto single_channel = [&] {
    const double u = uniform_open0(rng_single) * single_rate;
    std::size_t k = 0;
    while (k + 1 < cum.size() && cum[k] < u) ++k;
    return static_cast<ChannelId>(k);
  };

  const bool with_pairs = o.pairs && o.pairs->rate_per_s > 0;
  PoissonClock pair_clock{with_pairs ? 1e12 / o.pairs->rate_per_s : 0};
  std::int64_t next_pair = with_pairs ? pair_clock.next(rng_pairs) : kNever;
  // Delayed second tags, earliest first; ties resolved by generation order (the sequence).
  using Pending = std::pair<std::int64_t, std::uint64_t>;
  std::priority_queue<Pending, std::vector<Pending>, std::greater<>> pending;
  std::uint64_t pending_seq = 0;
  auto draw_delay_ps = [&] {
    // Rejection from the exponential envelope: accept with (1 + V cos 2πfτ) / (1 + V).
    const auto& p = *o.pairs;
    const double decay_ps = p.decay_us * 1e6, cycles_per_ps = p.beat_MHz * 1e-6;
    for (;;) {
      const double tau = -std::log(uniform_open0(rng_pairs)) * decay_ps;
      const double accept = (1 + p.visibility * std::cos(2 * std::numbers::pi * cycles_per_ps * tau)) / (1 + p.visibility);
      if (uniform_open0(rng_pairs) <= accept) return static_cast<std::int64_t>(tau);
    }
  };

  SyntheticSummary s;
  s.channel_counts.assign(o.channels.size(), 0);
  const std::uint64_t max_tags = o.max_tags.value_or(std::numeric_limits<std::uint64_t>::max());
  const std::size_t kBlock = 1 << 16;
  std::vector<std::int64_t> bt;
  std::vector<ChannelId> bc;
  bt.reserve(kBlock);
  bc.reserve(kBlock);
  const bool quantize = o.resolution_ps != 1.0;
  std::int64_t last = 0;
  for (;;) {
    const std::int64_t tp = pending.empty() ? kNever : pending.top().first;
    const std::int64_t t = std::min({next_single, next_pair, tp});
    if (t >= window_ps || s.tag_count >= max_tags) break;
    ChannelId c;
    if (t == next_single) {
      c = single_channel();
      next_single = single.next(rng_single);
    } else if (t == next_pair) {
      c = static_cast<ChannelId>(o.pairs->first);
      pending.emplace(t + draw_delay_ps(), pending_seq++);
      s.peak_pending_tags = std::max(s.peak_pending_tags, pending.size());
      next_pair = pair_clock.next(rng_pairs);
    } else {
      c = static_cast<ChannelId>(o.pairs->second);
      pending.pop();
      ++s.pair_count;
    }
    const std::int64_t tq =
        quantize ? static_cast<std::int64_t>(std::floor(static_cast<double>(t) / o.resolution_ps) * o.resolution_ps) : t;
    bt.push_back(tq);
    bc.push_back(c);
    ++s.channel_counts[c];
    ++s.tag_count;
    last = tq;
    if (bt.size() == kBlock) {
      w.append(bt, bc);
      bt.clear();
      bc.clear();
    }
  }
  w.append(bt, bc);
  s.duration_ps = s.tag_count >= max_tags ? last + 1 : window_ps;
  w.set_window(0, s.duration_ps);
  w.commit();
  return s;
}

}  // namespace flyby::records
