// Implementation of the detector and tagger chain (see the header for the order of effects and
// the random-stream layout).
#include "models/detectors/detector_chain.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <queue>
#include <sstream>

#include "engine/common/constants.h"
#include "engine/common/errors.h"
#include "engine/common/random.h"

namespace flyby::detectors {
namespace {

constexpr std::int64_t kNever = std::numeric_limits<std::int64_t>::min();
constexpr std::int64_t kInf = std::numeric_limits<std::int64_t>::max();
// FWHM = 2 sqrt(2 ln 2) sigma for a Gaussian.
const double kFwhmPerSigma = 2.0 * std::sqrt(2.0 * std::log(2.0));
constexpr double kJitterCutSigma = 8.0;

double exponential(Rng& rng, double mean) { return -mean * std::log(uniform_open0(rng)); }

// Standard normal by Box-Muller: two uniforms per draw, no cached state, so the draw sequence
// depends only on the number of draws (std::normal_distribution is implementation-defined).
double standard_normal(Rng& rng) {
  const double u1 = uniform_open0(rng);
  const double u2 = uniform_open0(rng);
  return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * constants::kPi * u2);
}

std::int64_t ps_from_ns(double ns) { return static_cast<std::int64_t>(std::llround(ns * 1e3)); }

struct PendingTag {
  std::int64_t time_ps;
  std::uint32_t channel;  // option index
  std::uint64_t seq;      // creation order: makes the order of equal times deterministic
  bool operator>(const PendingTag& o) const {
    if (time_ps != o.time_ps) return time_ps > o.time_ps;
    if (channel != o.channel) return channel > o.channel;
    return seq > o.seq;
  }
};

}  // namespace

struct DetectorChain::Impl {
  struct Channel {
    DetectorChannelOptions opt;
    Rng eff, dark, jitter, after;
    std::optional<JitterSampler> sampler;
    double sigma_ps = 0;
    std::int64_t dead_ps = 0;
    std::int64_t dead_until = kNever;
    std::int64_t next_dark = kInf;
    std::priority_queue<std::int64_t, std::vector<std::int64_t>, std::greater<>> afterpulses;
    double shift_min_ps = 0, shift_max_ps = 0;  // bounds of delay + jitter
  };

  DetectorChainOptions options;
  std::vector<Channel> ch;
  std::int64_t start = 0, end = 0;
  std::int64_t last_photon = kNever;
  std::int64_t processed_to = kNever;  // every channel's events before this time are done
  double global_shift_min_ps = 0;
  std::priority_queue<PendingTag, std::vector<PendingTag>, std::greater<>> pending;
  std::uint64_t seq = 0;
  std::int64_t last_recorded = kNever;
  std::int64_t min_spacing_ps = 0;
  DetectorChainSummary summary;

  void schedule_dark(Channel& c) {
    if (c.opt.dark_rate_per_s <= 0) return;
    const double gap_ps = exponential(c.dark, 1e12 / c.opt.dark_rate_per_s);
    const double next = static_cast<double>(c.next_dark == kInf ? start : c.next_dark) + gap_ps;
    c.next_dark = next >= static_cast<double>(end) ? kInf : static_cast<std::int64_t>(std::llround(next));
  }

  void click(std::size_t k, std::int64_t t) {
    Channel& c = ch[k];
    ChannelCounts& n = summary.channels[k];
    ++n.clicks;
    double jitter = 0;
    if (c.sampler) {
      jitter = c.sampler->draw_ps(c.jitter);
    } else if (c.sigma_ps > 0) {
      double z;
      do z = standard_normal(c.jitter);
      while (std::abs(z) > kJitterCutSigma);
      jitter = c.sigma_ps * z;
    }
    // Quantize in long double: exact for ps times up to 2^63 with sub-ps offsets.
    const long double arrive = static_cast<long double>(t) + static_cast<long double>(c.opt.cable_delay_ns) * 1e3L +
                               static_cast<long double>(jitter);
    const long double res = options.tagger.resolution_ps;
    const long double tagged = std::floor(arrive / res) * res;
    pending.push(PendingTag{static_cast<std::int64_t>(std::llround(tagged)), static_cast<std::uint32_t>(k), seq++});
    if (c.opt.afterpulse_probability > 0 && uniform_open0(c.after) <= c.opt.afterpulse_probability) {
      const double delay_ps = c.opt.afterpulse_delay_ns * 1e3 +
                              (c.opt.afterpulse_time_constant_ns > 0 ? exponential(c.after, c.opt.afterpulse_time_constant_ns * 1e3) : 0.0);
      c.afterpulses.push(t + static_cast<std::int64_t>(std::llround(delay_ps)));
      ++n.afterpulses;
    }
  }

  void arrival(std::size_t k, std::int64_t t) {
    Channel& c = ch[k];
    const bool live = t >= c.dead_until;
    if (live) click(k, t);
    else ++summary.channels[k].lost_dead_time;
    if (c.dead_ps > 0) {
      if (c.opt.dead_time_model == DeadTimeModel::kNonParalyzable) {
        if (live) c.dead_until = t + c.dead_ps;
      } else {
        c.dead_until = std::max(c.dead_until, t + c.dead_ps);
      }
    }
  }

  // Processes the channel's own events (dark counts, afterpulses) strictly before `t`.
  void internal_until(std::size_t k, std::int64_t t) {
    Channel& c = ch[k];
    while (true) {
      const std::int64_t ta = c.afterpulses.empty() ? kInf : c.afterpulses.top();
      const std::int64_t td = c.next_dark;
      const std::int64_t next = std::min(ta, td);
      if (next >= t || next >= end) break;
      if (td <= ta) {  // dark first on a tie: a fixed, documented order
        ++summary.channels[k].dark_counts;
        schedule_dark(c);
      } else {
        c.afterpulses.pop();
      }
      arrival(k, next);
    }
  }

  void process_all_until(std::int64_t t) {
    for (std::size_t k = 0; k < ch.size(); ++k) internal_until(k, t);
    processed_to = std::max(processed_to, t);
  }

  // Emits every pending tag that no future event can precede (or all of them).
  void release(records::TagBlock& out, bool all) {
    // Any future click has true time >= processed_to; its tag is >= that + the smallest shift,
    // minus one resolution bin for the quantization (and 1 ps for rounding).
    const long double bound = static_cast<long double>(processed_to) + global_shift_min_ps -
                              options.tagger.resolution_ps - 1.0L;
    while (!pending.empty()) {
      const PendingTag p = pending.top();
      if (!all && static_cast<long double>(p.time_ps) >= bound) break;
      pending.pop();
      ChannelCounts& n = summary.channels[p.channel];
      if (p.time_ps < start || p.time_ps >= end) {
        ++n.outside_window;
        continue;
      }
      if (min_spacing_ps > 0 && last_recorded != kNever && p.time_ps - last_recorded < min_spacing_ps) {
        ++n.lost_tagger;
        continue;
      }
      last_recorded = p.time_ps;
      ++n.recorded;
      out.push_back(p.time_ps, ch[p.channel].opt.channel.id);
    }
  }
};

DetectorChain::DetectorChain(DetectorChainOptions options, std::uint64_t seed, std::int64_t start_ps, std::int64_t end_ps)
    : impl_(std::make_unique<Impl>()) {
  if (auto p = options.problem()) throw InputError(*p);
  if (end_ps < start_ps) throw InputError("detector chain: window end before start");
  Impl& m = *impl_;
  m.options = std::move(options);
  m.start = start_ps;
  m.end = end_ps;
  m.summary.channels.resize(m.options.channels.size());
  if (m.options.tagger.max_rate_per_s) {
    m.min_spacing_ps = static_cast<std::int64_t>(std::llround(1e12 / *m.options.tagger.max_rate_per_s));
  }
  m.global_shift_min_ps = std::numeric_limits<double>::infinity();
  for (std::size_t k = 0; k < m.options.channels.size(); ++k) {
    const auto base = 8 * static_cast<std::uint64_t>(k);
    Impl::Channel c{m.options.channels[k],
                    make_stream(seed, StreamPurpose::kDetector, base + 0),
                    make_stream(seed, StreamPurpose::kDetector, base + 1),
                    make_stream(seed, StreamPurpose::kDetector, base + 2),
                    make_stream(seed, StreamPurpose::kDetector, base + 3),
                    std::nullopt, 0, 0, kNever, kInf, {}, 0, 0};
    c.dead_ps = ps_from_ns(c.opt.dead_time_ns);
    const double delay = c.opt.cable_delay_ns * 1e3;
    if (c.opt.jitter_histogram) {
      c.sampler.emplace(*c.opt.jitter_histogram);
      c.shift_min_ps = delay + c.opt.jitter_histogram->min_offset_ps();
      c.shift_max_ps = delay + c.opt.jitter_histogram->max_offset_ps();
    } else {
      c.sigma_ps = c.opt.jitter_fwhm_ps / kFwhmPerSigma;
      c.shift_min_ps = delay - kJitterCutSigma * c.sigma_ps;
      c.shift_max_ps = delay + kJitterCutSigma * c.sigma_ps;
    }
    m.global_shift_min_ps = std::min(m.global_shift_min_ps, c.shift_min_ps);
    m.ch.push_back(std::move(c));
    m.schedule_dark(m.ch.back());
  }
}

DetectorChain::~DetectorChain() = default;
DetectorChain::DetectorChain(DetectorChain&&) noexcept = default;
DetectorChain& DetectorChain::operator=(DetectorChain&&) noexcept = default;

void DetectorChain::push(std::span<const Photon> photons, records::TagBlock& out) {
  Impl& m = *impl_;
  for (const Photon& p : photons) {
    FLYBY_CHECK(p.time_ps >= m.last_photon, "detector chain: photons must arrive in time order");
    FLYBY_CHECK(p.time_ps >= m.processed_to, "detector chain: photon earlier than advance_to()");
    FLYBY_CHECK(p.channel < m.ch.size(), "detector chain: photon channel index out of range");
    m.last_photon = p.time_ps;
    const std::size_t k = p.channel;
    m.internal_until(k, p.time_ps);
    ChannelCounts& n = m.summary.channels[k];
    ++n.photons;
    Impl::Channel& c = m.ch[k];
    if (c.opt.efficiency < 1.0 && uniform_open0(c.eff) > c.opt.efficiency) continue;
    ++n.avalanches;
    m.arrival(k, p.time_ps);
  }
  if (!photons.empty()) {
    m.process_all_until(m.last_photon);
    m.release(out, false);
  }
}

void DetectorChain::advance_to(std::int64_t t_ps, records::TagBlock& out) {
  Impl& m = *impl_;
  if (t_ps <= m.processed_to) return;
  FLYBY_CHECK(t_ps >= m.last_photon, "detector chain: advance_to() before the last photon");
  m.process_all_until(t_ps);
  m.release(out, false);
}

void DetectorChain::finish(records::TagBlock& out) {
  Impl& m = *impl_;
  m.process_all_until(std::max(m.end, m.last_photon == kNever ? m.end : m.last_photon + 1));
  m.release(out, true);
}

std::vector<records::Channel> DetectorChain::record_channels() const {
  std::vector<records::Channel> v;
  for (const auto& c : impl_->options.channels) v.push_back(c.channel);
  return v;
}

const DetectorChainSummary& DetectorChain::summary() const { return impl_->summary; }

std::string DetectorChainSummary::brief_report() const {
  std::ostringstream os;
  os << "detector chain: recorded";
  for (std::size_t k = 0; k < channels.size(); ++k) os << (k ? ", " : " ") << channels[k].recorded;
  os << " tags per channel";
  return os.str();
}

std::string DetectorChainSummary::full_report() const {
  std::ostringstream os;
  for (std::size_t k = 0; k < channels.size(); ++k) {
    const ChannelCounts& n = channels[k];
    os << "channel " << k << ": photons " << n.photons << ", avalanches " << n.avalanches << ", dark " << n.dark_counts
       << ", afterpulses " << n.afterpulses << ", lost to dead time " << n.lost_dead_time << ", clicks " << n.clicks
       << ", lost in tagger " << n.lost_tagger << ", outside window " << n.outside_window << ", recorded "
       << n.recorded << "\n";
  }
  return os.str();
}

}  // namespace flyby::detectors
