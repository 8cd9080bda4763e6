// Streaming start–stop correlator (see correlator.h for the definition and the chunking rule).
#include "engine/analysis/correlator.h"

#include <omp.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <sstream>
#include <type_traits>

#include "engine/common/errors.h"

namespace flyby::analysis {
namespace {
// Spare bins past the histogram (bin 2K+1 on) that take the counts that do not apply. The fast
// walk below writes two counts per tag whether or not they apply; spreading the dummy ones over
// a ring of bins keeps consecutive increments of the same memory word (a store-to-load chain)
// out of the loop.
constexpr std::size_t kSpareBins = 16;
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
  autocorr_ = opt_.start_channel == opt_.stop_channel;
  conditions_ = !opt_.start_windows.empty() || opt_.herald.has_value();
  threads_ = std::max(1, opt_.threads > 0 ? opt_.threads : omp_get_max_threads());
  // 2K+1 bins and spare bins for counts that do not apply (count_pair, kSpareBins).
  hist_.assign(static_cast<std::size_t>(threads_), std::vector<std::uint64_t>(2 * static_cast<std::size_t>(half_bins_) + 1 + kSpareBins, 0));
}

namespace {

// a - b modulo 2^64: the same as a - b whenever that fits, and defined when it does not — the
// plain walk checks the order on the way, so it may meet an unsorted chunk (refused afterwards)
// whose differences overflow.
inline std::int64_t wrap_sub(std::int64_t a, std::int64_t b) {
  return static_cast<std::int64_t>(static_cast<std::uint64_t>(a) - static_cast<std::uint64_t>(b));
}

// a - b, clamped to the int64 range (look-back limits near the ends of the time axis).
inline std::int64_t sat_sub(std::int64_t a, std::int64_t b) {
  std::int64_t r;
  if (__builtin_sub_overflow(a, b, &r)) return b > 0 ? std::numeric_limits<std::int64_t>::min()
                                                      : std::numeric_limits<std::int64_t>::max();
  return r;
}

// Integer binning of a delay τ, |τ| <= L: bin k = floor((2τ + W) / 2W) + K, computed as
// u / 2W with u = 2τ + W + 2WK >= -1 (u = -1 only just below the lowest bin). Division by the
// constant 2W uses a precomputed reciprocal when every valid u fits in 32 bits (Lemire, Kaser
// & Kurz, "Faster remainder by direct computation", Softw. Pract. Exp. 49 (2019) 953: for
// 32-bit n and divisor d >= 2, floor(n/d) = high 64 bits of n·(⌊(2^64−1)/d⌋ + 1)); otherwise it
// falls back to a 64-bit division. Either way the result is exact.
struct Binner {
  std::int64_t offset;  // W + 2WK
  std::uint64_t limit;  // 2W(2K+1): valid u are [0, limit)
  std::uint64_t divisor;
  std::uint64_t magic;  // 0 if the 64-bit division is needed
  Binner(std::int64_t W, std::int64_t K)
      : offset(W + 2 * W * K),
        limit(static_cast<std::uint64_t>(2 * W * (2 * K + 1))),
        divisor(static_cast<std::uint64_t>(2 * W)),
        magic(limit <= (std::uint64_t{1} << 32) ? ~std::uint64_t{0} / divisor + 1 : 0) {}
  template <bool kFast>
  void add(std::uint64_t* h, std::int64_t two_tau) const {
    const auto u = static_cast<std::uint64_t>(two_tau + offset);
    if (u >= limit) return;  // also catches u = -1
    if constexpr (kFast) {
      __extension__ using u128 = unsigned __int128;
      ++h[static_cast<std::uint64_t>((static_cast<u128>(magic) * u) >> 64)];
    } else {
      ++h[u / divisor];
    }
  }
};

// Number of sentinels (INT64_MAX) behind each lane during a sweep, so the pointer steps below
// may look ahead without bounds checks.
constexpr std::size_t kSentinels = 4;

// The two pointers of a sweep move forward by a small random number of places per tag (about
// the rate ratio of the lanes): a `while` loop mispredicts almost every time. Instead four
// comparisons are evaluated independently and summed (the elements that pass form a prefix,
// the lane being sorted); only a run longer than four falls through to the loop.
inline std::size_t advance_le(const std::int64_t* v, std::size_t i, std::int64_t t) {
  std::size_t c = static_cast<std::size_t>(v[i] <= t) + static_cast<std::size_t>(v[i + 1] <= t) +
                  static_cast<std::size_t>(v[i + 2] <= t) + static_cast<std::size_t>(v[i + 3] <= t);
  i += c;
  while (c == 4) {
    c = static_cast<std::size_t>(v[i] <= t) + static_cast<std::size_t>(v[i + 1] <= t) +
        static_cast<std::size_t>(v[i + 2] <= t) + static_cast<std::size_t>(v[i + 3] <= t);
    i += c;
  }
  return i;
}
inline std::size_t advance_lt(const std::int64_t* v, std::size_t i, std::int64_t t) {
  std::size_t c = static_cast<std::size_t>(v[i] < t) + static_cast<std::size_t>(v[i + 1] < t) +
                  static_cast<std::size_t>(v[i + 2] < t) + static_cast<std::size_t>(v[i + 3] < t);
  i += c;
  while (c == 4) {
    c = static_cast<std::size_t>(v[i] < t) + static_cast<std::size_t>(v[i + 1] < t) +
        static_cast<std::size_t>(v[i + 2] < t) + static_cast<std::size_t>(v[i + 3] < t);
    i += c;
  }
  return i;
}

// Stop sweep of a cross-correlation: every new stop x pairs with the starts y at
// t_x − L <= t_y <= t_x (τ = t_x − t_y >= 0).
template <bool kCond, bool kFast>
void sweep_stops(const std::int64_t* pt, std::size_t a, std::size_t b, const std::int64_t* st,
                 const std::uint8_t* su, std::size_t ns, std::int64_t L, const Binner& bin, std::uint64_t* h) {
  if (a >= b) return;
  std::size_t lo = static_cast<std::size_t>(std::lower_bound(st, st + ns, sat_sub(pt[a], L)) - st);
  std::size_t hi = static_cast<std::size_t>(std::upper_bound(st, st + ns, pt[a]) - st);
  for (std::size_t x = a; x < b; ++x) {
    const std::int64_t t = pt[x];
    const std::int64_t lim = sat_sub(t, L);
    hi = advance_le(st, hi, t);    // sentinels stop it at ns
    lo = advance_lt(st, lo, lim);  // st[hi] > t >= lim stops it at hi
    for (std::size_t y = lo; y < hi; ++y) {
      if (kCond && !su[y]) continue;
      bin.template add<kFast>(h, 2 * (t - st[y]));
    }
  }
}

// Start sweep of a cross-correlation: every new start x that passed the conditions pairs with
// the stops y at t_x − L <= t_y < t_x (τ = t_y − t_x < 0).
template <bool kCond, bool kFast>
void sweep_starts(const std::int64_t* st, const std::uint8_t* su, std::size_t a, std::size_t b,
                  const std::int64_t* pt, std::size_t np, std::int64_t L, const Binner& bin, std::uint64_t* h) {
  if (a >= b) return;
  std::size_t lo = static_cast<std::size_t>(std::lower_bound(pt, pt + np, sat_sub(st[a], L)) - pt);
  std::size_t hi = static_cast<std::size_t>(std::lower_bound(pt, pt + np, st[a]) - pt);
  for (std::size_t x = a; x < b; ++x) {
    const std::int64_t t = st[x];
    const std::int64_t lim = sat_sub(t, L);
    hi = advance_lt(pt, hi, t);
    lo = advance_lt(pt, lo, lim);
    if (kCond && !su[x]) continue;
    for (std::size_t y = lo; y < hi; ++y) bin.template add<kFast>(h, 2 * (pt[y] - t));
  }
}

// Autocorrelation: every new tag x pairs with the earlier tags y (stream order) at
// t_y >= t_x − L; (start y, stop x) counts at +d if y passed the conditions, (start x, stop y)
// at −d if x did.
template <bool kCond, bool kFast>
void sweep_auto(const std::int64_t* st, const std::uint8_t* su, std::size_t a, std::size_t b, std::int64_t L,
                const Binner& bin, std::uint64_t* h) {
  if (a >= b) return;
  std::size_t lo = static_cast<std::size_t>(std::lower_bound(st, st + a, sat_sub(st[a], L)) - st);
  for (std::size_t x = a; x < b; ++x) {
    const std::int64_t t = st[x];
    const std::int64_t lim = sat_sub(t, L);
    lo = advance_lt(st, lo, lim);  // st[x] = t > lim (L >= 1) stops it at x
    for (std::size_t y = lo; y < x; ++y) {
      const std::int64_t d2 = 2 * (t - st[y]);
      if (!kCond || su[y]) bin.template add<kFast>(h, d2);
      if (!kCond || su[x]) bin.template add<kFast>(h, -d2);
    }
  }
}

// Role bits of a channel for a plain correlation: bit 0 start, bit 1 stop (both: autocorrelation).
template <class Ch>
inline unsigned role_of(Ch c, int cs, int cp) {
  const int ci = static_cast<int>(c);
  return static_cast<unsigned>(ci == cs) | (static_cast<unsigned>(ci == cp) << 1);
}

// A pair of the later tag (role r) with an earlier one (role rj) d >= 0 before it: (start
// earlier, stop later) at τ = +d, (start later, stop earlier) at τ = −d. Without branches on
// the roles or the range (tags of the two channels alternate at random, so a branch would
// mispredict about every other time): a count that does not apply goes to the spare bins
// h[trash] and h[trash + 8] past the histogram (trash + 8 < 2K+1 + kSpareBins).
template <bool kFast>
inline void count_pair(unsigned r, unsigned rj, std::int64_t d, const Binner& bin, std::uint64_t* h,
                       std::uint64_t trash) {
  // In unsigned arithmetic (same bits as 2d + offset for the delays of a sorted stream).
  const auto ud = static_cast<std::uint64_t>(d), off = static_cast<std::uint64_t>(bin.offset);
  const std::uint64_t u1 = 2 * ud + off;
  const std::uint64_t u2 = off - 2 * ud;
  // Bitwise, not &&/?: — the compiler turns those into branches on the roles.
  const std::uint64_t ok1 = ((r >> 1) & rj & 1u) & static_cast<std::uint64_t>(u1 < bin.limit);
  const std::uint64_t ok2 = (r & (rj >> 1) & 1u) & static_cast<std::uint64_t>(u2 < bin.limit);
  std::uint64_t k1, k2;
  if constexpr (kFast) {
    __extension__ using u128 = unsigned __int128;
    k1 = static_cast<std::uint64_t>((static_cast<u128>(bin.magic) * u1) >> 64);
    k2 = static_cast<std::uint64_t>((static_cast<u128>(bin.magic) * u2) >> 64);
  } else {
    k1 = u1 / bin.divisor;
    k2 = u2 / bin.divisor;
  }
  ++h[trash + ((k1 - trash) & (0 - ok1))];
  ++h[trash + 8 + ((k2 - trash - 8) & (0 - ok2))];
}

// The general walk for one tag i of a chunk: pairs with the earlier tags of the chunk from
// index j_from − 1 down, then of the kept tail (tt/tr, tn entries), while within L of t[i].
template <bool kFast, class Ch>
inline void walk_back(const std::int64_t* t, const Ch* c, std::size_t i, std::size_t j_from, unsigned r,
                      std::int64_t lim, const std::int64_t* tt, const std::uint8_t* tr, std::size_t tn, int cs,
                      int cp, const Binner& bin, std::uint64_t* h, std::uint64_t trash) {
  const std::int64_t ti = t[i];
  std::size_t j = j_from;
  while (j > 0 && t[j - 1] >= lim) {
    --j;
    count_pair<kFast>(r, role_of(c[j], cs, cp), wrap_sub(ti, t[j]), bin, h, trash);
  }
  if (j == 0) {
    for (std::size_t k = tn; k > 0 && tt[k - 1] >= lim;) {
      --k;
      count_pair<kFast>(r, tr[k], wrap_sub(ti, tt[k]), bin, h, trash);
    }
  }
}

// The pair of a later tag (role r) with the tag just before it (role rj) d >= 0 earlier, for a
// cross-correlation (a channel is start or stop, not both, so at most one of τ = +d and τ = −d
// applies): one count, without branches, into a bin or the spare bin h[trash].
inline void count_cross(unsigned r, unsigned rj, std::int64_t d, const Binner& bin, std::uint64_t* h,
                        std::uint64_t trash) {
  const std::uint64_t plus = (r >> 1) & rj & 1u;   // earlier start, later stop: τ = +d
  const std::uint64_t minus = r & (rj >> 1) & 1u;  // earlier stop, later start: τ = −d
  const std::uint64_t m = 0 - minus;  // all ones for τ = −d: conditional negation
  const std::uint64_t u = ((2 * static_cast<std::uint64_t>(d)) ^ m) - m + static_cast<std::uint64_t>(bin.offset);
  const std::uint64_t ok = (plus | minus) & static_cast<std::uint64_t>(u < bin.limit);
  __extension__ using u128 = unsigned __int128;
  const auto k = static_cast<std::uint64_t>((static_cast<u128>(bin.magic) * u) >> 64);
  ++h[trash + ((k - trash) & (0 - ok))];
}

// Stream walk over tags [a, b) of a chunk (see correlator.h): each tag pairs with the earlier
// tags of the chunk and then of the kept tail (tt/tr, tn entries) within L. Tags of other
// channels walk too (role 0 counts nothing): cheaper than a branch on the channel. Returns the
// start and stop tags of [a, b).
//
// Whether a tag has an earlier tag within L is random (at ±100 ns and 1 MHz in all: one tag in
// ten; at ±1 µs, two in three), so a loop that asks it tag by tag mispredicts often. Two ways
// around it, chosen per chunk by the mean number of tags within L before a tag (`dense`):
// * sparse: the question is answered for 64 tags at a time into a bit mask, without branches,
//   and only the tags whose bit is set walk back (one mispredicted loop exit per 64 tags, not
//   one per pair);
// * dense: every tag is paired with the one before it without branches (a pair out of range or
//   of the wrong roles counts into a spare bin), and only a second earlier tag within L takes
//   the branch into the general walk.
// Same pairs, same bins either way: only the order of the increments differs, and the counts are
// integers. kSafe: no time difference in the chunk and no t − L overflows if the chunk is sorted
// (checked per chunk by the caller), so the saturating subtractions are not needed (wrapping
// ones keep an unsorted chunk, refused afterwards, free of undefined behaviour).
template <bool kFast, bool kAuto, bool kSafe, class Ch>
std::pair<std::size_t, std::size_t> walk_range(const std::int64_t* t, const Ch* c, std::size_t a, std::size_t b,
                                               const std::int64_t* tt, const std::uint8_t* tr, std::size_t tn, int cs,
                                               int cp, std::int64_t L, bool dense, const Binner& bin,
                                               std::uint64_t* h, std::uint64_t trash, std::int64_t prev0,
                                               bool& unsorted) {
  // Role counts in a loop of their own (vectorized), not in the walk's registers.
  std::size_t ns = 0, np = 0;
  for (std::size_t i = a; i < b; ++i) {
    ns += static_cast<std::size_t>(static_cast<int>(c[i]) == cs);
    np += static_cast<std::size_t>(static_cast<int>(c[i]) == cp);
  }
  // The order check rides along (the loops load t[i] and t[i − 1] anyway); prev0 is the newest
  // time of the earlier chunks.
  bool uns = false;
  std::size_t i = a;
  // The first two tags of the chunk look back into the tail: general walk.
  for (const std::size_t a2 = std::min(b, std::max<std::size_t>(a, 2)); i < a2; ++i) {
    uns |= t[i] < (i > 0 ? t[i - 1] : prev0);
    walk_back<kFast>(t, c, i, i, role_of(c[i], cs, cp), sat_sub(t[i], L), tt, tr, tn, cs, cp, bin, h, trash);
  }
  if (i >= b) {
    unsorted = uns;
    return {ns, np};
  }
  if (!kFast || !dense) {  // (the dense loop would need a 64-bit division for every tag)
    for (std::size_t base = i; base < b; base += 64) {
      const std::size_t m = std::min<std::size_t>(64, b - base);
      std::uint64_t near = 0;  // bit j: tag base + j has an earlier tag within L
      for (std::size_t j = 0; j < m; ++j) {
        const std::int64_t lim = kSafe ? wrap_sub(t[base + j], L) : sat_sub(t[base + j], L);
        near |= static_cast<std::uint64_t>(t[base + j - 1] >= lim) << j;
        uns |= t[base + j] < t[base + j - 1];
      }
      while (near != 0) {
        const std::size_t k = base + static_cast<std::size_t>(__builtin_ctzll(near));
        near &= near - 1;
        walk_back<kFast>(t, c, k, k, role_of(c[k], cs, cp), kSafe ? wrap_sub(t[k], L) : sat_sub(t[k], L), tt, tr, tn, cs, cp,
                         bin, h, trash);
      }
    }
    unsorted = uns;
    return {ns, np};
  }
  if constexpr (kFast) {
    unsigned r_prev = role_of(c[i - 1], cs, cp);
    std::int64_t t_prev = t[i - 1];
    const std::int64_t d_out = L + 1;  // a delay past every bin (L <= INT64_MAX / 8: 2·d_out fits)
    for (; i < b; ++i) {
      const unsigned r = role_of(c[i], cs, cp);
      const std::int64_t ti = t[i];
      const std::int64_t lim = kSafe ? wrap_sub(ti, L) : sat_sub(ti, L);
      uns |= ti < t_prev;
      const std::int64_t d = std::min(kSafe ? wrap_sub(ti, t_prev) : sat_sub(ti, t_prev), d_out);
      if constexpr (kAuto) count_pair<true>(r, r_prev, d, bin, h, trash + (i & 7u));
      else count_cross(r, r_prev, d, bin, h, trash + (i & 15u));
      if (t[i - 2] >= lim) [[unlikely]]
        walk_back<true>(t, c, i, i - 1, r, lim, tt, tr, tn, cs, cp, bin, h, trash);
      r_prev = r;
      t_prev = ti;
    }
  }
  unsorted = uns;
  return {ns, np};
}

}  // namespace

template <class Ch>
void Correlator::walk(const std::int64_t* t, const Ch* c, std::size_t n) {
  const int cs = opt_.start_channel, cp = opt_.stop_channel;
  const std::int64_t L = lookback_ps_;
  const Binner bin(opt_.bin_width_ps, half_bins_);
  const int nt = static_cast<int>(
      std::min<std::size_t>(static_cast<std::size_t>(threads_), std::max<std::size_t>(1, n / opt_.min_tags_per_thread)));
  const std::int64_t* tt = tail_time_.data();
  const std::uint8_t* tr = tail_role_.data();
  const std::size_t tn = tail_time_.size();
  std::vector<std::pair<std::size_t, std::size_t>> roles(static_cast<std::size_t>(nt));  // per thread
  std::vector<char> unsorted(static_cast<std::size_t>(nt), 0);
  const std::int64_t prev0 = last_time_ ? *last_time_ : std::numeric_limits<std::int64_t>::min();
  // No t − L and no difference of two times in the chunk can overflow: plain subtractions.
  std::int64_t span = 0, scratch;
  const bool safe = !__builtin_sub_overflow(t[0], L + 1, &scratch) && !__builtin_sub_overflow(t[n - 1], t[0], &span);
  // Mean number of tags within L before a tag: above ~0.55 the branch-free pairing with the
  // previous tag is cheaper than the masked walk (bench/bench_correlator, two Poisson channels,
  // ranges ±0.1 to ±1 µs at 10^6 tags/s: the two cross between ±0.55 and ±0.7 µs).
  const bool dense = safe && static_cast<double>(n - 1) * static_cast<double>(L) > 0.55 * static_cast<double>(span);
  auto run = [&](auto fast, auto autoc, auto safe_sub) {
    constexpr bool kF = decltype(fast)::value, kA = decltype(autoc)::value, kS = decltype(safe_sub)::value;
#pragma omp parallel num_threads(nt) if (nt > 1)
    {
      // Each thread takes a contiguous share of the chunk; it looks back into the shares
      // before it (read only), so the split does not change the pairs.
      const auto tid = static_cast<std::size_t>(omp_get_thread_num());
      const auto nth = static_cast<std::size_t>(omp_get_num_threads());
      bool uns = false;
      roles[tid] = walk_range<kF, kA, kS>(t, c, n * tid / nth, n * (tid + 1) / nth, tt, tr, tn, cs, cp, L, dense, bin,
                                          hist_[tid].data(), 2 * static_cast<std::uint64_t>(half_bins_) + 1, prev0, uns);
      unsorted[tid] = uns;
    }
  };
  auto run2 = [&](auto fast, auto autoc) {
    if (safe) run(fast, autoc, std::true_type{});
    else run(fast, autoc, std::false_type{});
  };
  if (!bin.magic) run2(std::false_type{}, std::false_type{});
  else if (autocorr_) run2(std::true_type{}, std::true_type{});
  else run2(std::true_type{}, std::false_type{});
  if (std::find(unsorted.begin(), unsorted.end(), 1) != unsorted.end()) {
    failed_ = true;  // the histograms hold part of the bad chunk
    throw_unsorted(t, n, prev0);
  }
  std::size_t ns = 0, np = 0;
  for (const auto& [s, p] : roles) {
    ns += s;
    np += p;
  }
  n_start_seen_ += ns;
  n_start_used_ += ns;
  n_stop_ += np;
  if (!first_time_) first_time_ = t[0];
  last_time_ = t[n - 1];
  n_tags_ += n;
  peak_buffered_ = std::max(peak_buffered_, tail_time_.size() + ns + (autocorr_ ? 0 : np));

  // Keep the start/stop tags that a later tag (at or after t[n−1]) can still reach.
  const std::int64_t keep = sat_sub(t[n - 1], L);
  const std::size_t from = static_cast<std::size_t>(std::lower_bound(t, t + n, keep) - t);
  if (from == 0) {
    const std::size_t drop =
        static_cast<std::size_t>(std::lower_bound(tail_time_.begin(), tail_time_.end(), keep) - tail_time_.begin());
    tail_time_.erase(tail_time_.begin(), tail_time_.begin() + static_cast<std::ptrdiff_t>(drop));
    tail_role_.erase(tail_role_.begin(), tail_role_.begin() + static_cast<std::ptrdiff_t>(drop));
  } else {
    tail_time_.clear();
    tail_role_.clear();
  }
  for (std::size_t i = from; i < n; ++i) {
    const unsigned r = role_of(c[i], cs, cp);
    if (r == 0) continue;
    tail_time_.push_back(t[i]);
    tail_role_.push_back(static_cast<std::uint8_t>(r));
  }
}

void Correlator::throw_unsorted(const std::int64_t* t, std::size_t n, std::int64_t prev) const {
  for (std::size_t i = 0; i < n; prev = t[i], ++i)
    if (t[i] < prev)
      throw InputError("correlator: tags not sorted in time: tag " + std::to_string(n_tags_ + i) + " at " +
                       std::to_string(t[i]) + " ps follows " + std::to_string(prev) + " ps");
  throw InputError("correlator: tags not sorted in time");  // not reached: the caller saw a decrease
}

template <class Ch>
void Correlator::ingest(std::span<const std::int64_t> time_ps, std::span<const Ch> channel) {
  FLYBY_CHECK(!finished_, "Correlator::add_chunk after finish()");
  if (failed_) throw InputError("correlator: an earlier chunk was refused (tags not sorted in time)");
  if (time_ps.size() != channel.size())
    throw InputError("correlator: chunk has " + std::to_string(time_ps.size()) + " times but " +
                     std::to_string(channel.size()) + " channels");
  const std::size_t n = time_ps.size();
  if (n == 0) return;
  const std::int64_t* t = time_ps.data();
  const Ch* c = channel.data();

  if (!conditions_) {
    walk(t, c, n);  // checks the order on the way
    return;
  }

  // Order check without branches in the loop; the failing tag is located only on failure.
  const std::int64_t prev0 = last_time_ ? *last_time_ : std::numeric_limits<std::int64_t>::min();
  bool unsorted = t[0] < prev0;
  for (std::size_t i = 1; i < n; ++i) unsorted |= t[i] < t[i - 1];
  if (unsorted) throw_unsorted(t, n, prev0);

  // Split by channel into the lanes: every tag is written to each lane's next slot and the
  // slot advances only if the channel matches (no data-dependent branches).
  const int cs = opt_.start_channel, cp = opt_.stop_channel, ch = opt_.herald ? opt_.herald->channel : -1;
  const std::size_t s0 = start_.time.size(), p0 = stop_.time.size(), h0 = herald_.time.size();
  start_.time.resize(s0 + n);
  std::int64_t* st = start_.time.data() + s0;
  std::size_t ns = 0, np = 0, nh = 0;
  if (autocorr_ && !opt_.herald) {
    for (std::size_t i = 0; i < n; ++i) {
      st[ns] = t[i];
      ns += static_cast<int>(c[i]) == cs;
    }
  } else if (!opt_.herald) {
    stop_.time.resize(p0 + n);
    std::int64_t* pt = stop_.time.data() + p0;
    for (std::size_t i = 0; i < n; ++i) {
      const int ci = static_cast<int>(c[i]);
      st[ns] = t[i];
      pt[np] = t[i];
      ns += ci == cs;
      np += ci == cp;
    }
  } else {
    if (!autocorr_) stop_.time.resize(p0 + n);
    herald_.time.resize(h0 + n);
    std::int64_t* pt = autocorr_ ? nullptr : stop_.time.data() + p0;
    std::int64_t* ht = herald_.time.data() + h0;
    for (std::size_t i = 0; i < n; ++i) {
      const int ci = static_cast<int>(c[i]);
      st[ns] = t[i];
      ns += ci == cs;
      if (pt) {
        pt[np] = t[i];
        np += ci == cp;
      }
      ht[nh] = t[i];
      nh += ci == ch;
    }
  }
  start_.time.resize(s0 + ns);
  if (!autocorr_) stop_.time.resize(p0 + np);
  if (opt_.herald) herald_.time.resize(h0 + nh);
  if (conditions_) start_.used.resize(start_.time.size(), 0);
  n_start_seen_ += ns;
  n_stop_ += autocorr_ ? ns : np;
  n_herald_ += nh;
  if (!first_time_) first_time_ = t[0];
  last_time_ = t[n - 1];
  n_tags_ += n;
  peak_buffered_ = std::max(peak_buffered_, start_.time.size() + stop_.time.size() + herald_.time.size());

  // Tags at the newest time stamp are held back: a later chunk may hold more tags of that
  // instant, and ties must be processed together (pairs at τ = 0, heralds with zero delay).
  process(t[n - 1]);
  trim(t[n - 1]);
}

void Correlator::add_chunk(std::span<const std::int64_t> t, std::span<const int> c) { ingest(t, c); }
void Correlator::add_chunk(std::span<const std::int64_t> t, std::span<const std::uint8_t> c) { ingest(t, c); }
void Correlator::add_chunk(std::span<const std::int64_t> t, std::span<const std::uint16_t> c) { ingest(t, c); }

void Correlator::apply_conditions(std::size_t s_end) {
  const auto& win = opt_.start_windows;
  const auto& ht = herald_.time;
  for (std::size_t i = start_.done; i < s_end; ++i) {
    const std::int64_t t = start_.time[i];
    bool ok = true;
    if (!win.empty()) {
      while (window_idx_ < win.size() && win[window_idx_].end_ps <= t) ++window_idx_;
      ok = window_idx_ < win.size() && win[window_idx_].begin_ps <= t;
    }
    if (opt_.herald) {
      // Delays t − h compared as unsigned differences (exact for h <= t, no overflow).
      const auto delay = [t](std::int64_t h) { return static_cast<std::uint64_t>(t) - static_cast<std::uint64_t>(h); };
      const auto max_d = static_cast<std::uint64_t>(opt_.herald->max_delay_ps);
      const auto min_d = static_cast<std::uint64_t>(opt_.herald->min_delay_ps);
      while (herald_lo_ < ht.size() && ht[herald_lo_] < t && delay(ht[herald_lo_]) > max_d) ++herald_lo_;
      const bool found = herald_lo_ < ht.size() && ht[herald_lo_] <= t && delay(ht[herald_lo_]) >= min_d;
      ok = ok && found;
    }
    start_.used[i] = ok ? 1 : 0;
    n_start_used_ += ok ? 1 : 0;
  }
}

void Correlator::process(std::int64_t t_cut) {
  // Tags before t_cut are final: all later tags come at or after it.
  auto ready = [t_cut, this](const Lane& l) {
    if (finished_) return l.time.size();
    return static_cast<std::size_t>(
        std::lower_bound(l.time.begin() + static_cast<std::ptrdiff_t>(l.done), l.time.end(), t_cut) - l.time.begin());
  };
  const std::size_t s_end = ready(start_);
  const std::size_t p_end = autocorr_ ? 0 : ready(stop_);
  if (conditions_) apply_conditions(s_end);
  else n_start_used_ += s_end - start_.done;

  const std::int64_t L = lookback_ps_;
  const Binner bin(opt_.bin_width_ps, half_bins_);
  const std::size_t ns = start_.time.size();
  const std::size_t np = stop_.time.size();
  start_.time.resize(ns + kSentinels, std::numeric_limits<std::int64_t>::max());
  stop_.time.resize(np + kSentinels, std::numeric_limits<std::int64_t>::max());
  const std::int64_t* st = start_.time.data();
  const std::uint8_t* su = start_.used.data();
  const std::int64_t* pt = stop_.time.data();
  const std::size_t s_new = s_end - start_.done;
  const std::size_t p_new = autocorr_ ? 0 : p_end - stop_.done;
  const std::size_t work = s_new + p_new;
  if (work > 0) {
    const int nt = static_cast<int>(std::min<std::size_t>(
        static_cast<std::size_t>(threads_), std::max<std::size_t>(1, work / opt_.min_tags_per_thread)));
    const std::size_t sa = start_.done, pa = stop_.done;
    auto run = [&](auto cond, auto fast) {
      constexpr bool kC = decltype(cond)::value, kF = decltype(fast)::value;
#pragma omp parallel num_threads(nt) if (nt > 1)
      {
        // Each thread takes a contiguous share of the new tags of each lane.
        const auto tid = static_cast<std::size_t>(omp_get_thread_num());
        const auto nth = static_cast<std::size_t>(omp_get_num_threads());
        std::uint64_t* h = hist_[tid].data();
        const std::size_t s_a = sa + s_new * tid / nth, s_b = sa + s_new * (tid + 1) / nth;
        if (autocorr_) {
          sweep_auto<kC, kF>(st, su, s_a, s_b, L, bin, h);
        } else {
          const std::size_t p_a = pa + p_new * tid / nth, p_b = pa + p_new * (tid + 1) / nth;
          sweep_stops<kC, kF>(pt, p_a, p_b, st, su, ns, L, bin, h);
          sweep_starts<kC, kF>(st, su, s_a, s_b, pt, np, L, bin, h);
        }
      }
    };
    using T = std::true_type;
    using F = std::false_type;
    if (conditions_) bin.magic ? run(T{}, T{}) : run(T{}, F{});
    else bin.magic ? run(F{}, T{}) : run(F{}, F{});
  }
  start_.time.resize(ns);
  stop_.time.resize(np);
  start_.done = s_end;
  if (!autocorr_) stop_.done = p_end;
}

void Correlator::trim(std::int64_t t_cut) {
  // Later tags are at or after t_cut; they reach back at most the look-back span.
  auto drop_before = [](Lane& l, std::int64_t keep_from, bool has_used) {
    const auto drop = static_cast<std::size_t>(
        std::lower_bound(l.time.begin(), l.time.begin() + static_cast<std::ptrdiff_t>(l.done), keep_from) -
        l.time.begin());
    if (drop == 0) return drop;
    l.time.erase(l.time.begin(), l.time.begin() + static_cast<std::ptrdiff_t>(drop));
    if (has_used) l.used.erase(l.used.begin(), l.used.begin() + static_cast<std::ptrdiff_t>(drop));
    l.done -= drop;
    return drop;
  };
  const std::int64_t keep = sat_sub(t_cut, lookback_ps_);
  drop_before(start_, keep, conditions_);
  if (!autocorr_) drop_before(stop_, keep, false);
  if (opt_.herald) {
    herald_.done = herald_.time.size();
    const std::size_t d = drop_before(herald_, sat_sub(t_cut, herald_lookback_ps_), false);
    herald_lo_ = std::max(herald_lo_, d) - d;
  }
}

CorrelationHistogram Correlator::finish() {
  FLYBY_CHECK(!finished_, "Correlator::finish() called twice");
  if (failed_) throw InputError("correlator: an earlier chunk was refused (tags not sorted in time)");
  finished_ = true;
  process(0);

  CorrelationHistogram r;
  r.options = opt_;
  r.half_bins = half_bins_;
  r.counts.assign(2 * static_cast<std::size_t>(half_bins_) + 1, 0);  // without the spare bin
  for (const auto& h : hist_)
    for (std::size_t b = 0; b < r.counts.size(); ++b) r.counts[b] += h[b];
  r.peak_buffered_tags = peak_buffered_;
  r.n_start_seen = n_start_seen_;
  r.n_start_used = n_start_used_;
  r.n_stop = n_stop_;
  r.n_herald = n_herald_;
  r.n_tags = n_tags_;
  if (opt_.duration_ps) r.duration_ps = *opt_.duration_ps;
  else if (first_time_) r.duration_ps = *last_time_ - *first_time_;
  const std::size_t nb = r.counts.size();
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
    const double c = static_cast<double>(r.counts[b]);
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
  o << "  at most " << peak_buffered_tags << " tags buffered at once\n";
  return o.str();
}

CorrelationHistogram correlate(std::span<const std::int64_t> time_ps, std::span<const int> channel,
                               const CorrelatorOptions& options) {
  Correlator c(options);
  c.add_chunk(time_ps, channel);
  return c.finish();
}

}  // namespace flyby::analysis
