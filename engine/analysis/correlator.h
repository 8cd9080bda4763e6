// Start–stop correlation histograms of time-tag streams and their normalization to g2(τ).
//
// Definition (docs/analysis.md): every ordered pair of distinct tags (a, b) with a in the start
// channel and b in the stop channel contributes one count at delay τ = t_b − t_a if |τ| falls
// in the histogram — all pairs, not only nearest neighbours, negative and positive delays.
// Bins are centred on k·W for k = −K..K (K = range / W), bin k holding τ ∈ [kW − W/2, kW + W/2).
// A start may be restricted to time windows and to a heralding condition (a click in another
// channel shortly before it). The normalization is g2 = counts / (N_start N_stop W / T).
//
// Cost is linear in the number of tags plus the number of counted pairs, with integer bin
// arithmetic. Plain correlations (no windows, no herald) take one pass over each chunk as it
// is: every start or stop tag looks back through the earlier tags of the stream (the chunk,
// then the kept tail of the previous chunks) while they are within the look-back span and
// counts each start–stop pair once, when the later of its two tags arrives; at lab rates few
// tags lie within the span, so this costs about one comparison per tag. With windows or a
// herald, each chunk is split by channel into start, stop and herald lanes and two-pointer
// sweeps over the sorted lanes count the pairs. Tags arrive in chunks of any size; only the
// tags within the look-back span of the newest tag are kept between chunks, so records larger
// than memory stream through. Inside a chunk the work is split over OpenMP threads with a
// histogram per thread; counts are integers, so the summed histogram is exactly the same for
// any thread count and any chunking.
#pragma once

#include <cstdint>
#include <memory>
#include <new>
#include <utility>
#include <optional>
#include <span>
#include <string>
#include <vector>

namespace flyby::analysis {

namespace detail {
// Allocator whose resize() leaves new elements uninitialized: the correlator's lanes grow by a
// whole chunk and are then filled, so zeroing them first would be wasted memory traffic.
template <class T>
struct UninitAllocator : std::allocator<T> {
  template <class U>
  struct rebind {
    using other = UninitAllocator<U>;
  };
  UninitAllocator() = default;
  template <class U>
  UninitAllocator(const UninitAllocator<U>&) noexcept {}
  template <class U>
  void construct(U* p) noexcept {
    ::new (static_cast<void*>(p)) U;
  }
  template <class U, class... A>
  void construct(U* p, A&&... a) {
    ::new (static_cast<void*>(p)) U(std::forward<A>(a)...);
  }
};
}  // namespace detail

// A half-open interval [begin_ps, end_ps) of record time.
struct TimeWindow {
  std::int64_t begin_ps = 0;  // first included time, ps
  std::int64_t end_ps = 0;    // first excluded time, ps; must exceed begin_ps
};

// Heralded three-event condition: a start tag counts only if a tag in `channel` preceded it
// by a delay d with min_delay_ps <= d <= max_delay_ps (d = t_start − t_herald).
struct HeraldCondition {
  int channel = 0;                 // herald channel id; must differ from the start channel
  std::int64_t min_delay_ps = 0;   // shortest herald→start delay, ps, >= 0
  std::int64_t max_delay_ps = 0;   // longest herald→start delay, ps, >= min_delay_ps
};

struct CorrelatorOptions {
  int start_channel = 0;              // channel id of the start tags (the "a" of t_b − t_a)
  int stop_channel = 1;               // channel id of the stop tags; equal to start: autocorrelation
  std::int64_t bin_width_ps = 1000;   // histogram bin width W, ps, >= 1
  std::int64_t range_ps = 100000;     // largest |τ| of a bin centre, ps; rounded down to a multiple of W; >= 0
  // Record duration T used in the normalization, ps. Unset: last minus first tag time seen.
  std::optional<std::int64_t> duration_ps;
  // Start tags count only inside these windows (sorted, non-overlapping). Empty: everywhere.
  std::vector<TimeWindow> start_windows;
  std::optional<HeraldCondition> herald;  // unset: no heralding condition
  int threads = 0;                        // OpenMP threads inside a chunk; 0: OpenMP default
  // A thread is given at least this many tags of a chunk (fewer threads for small chunks,
  // where starting a parallel region costs more than it saves), >= 1.
  std::size_t min_tags_per_thread = 16384;

  // Empty if the options are usable, else one line naming the first problem.
  std::optional<std::string> validate() const;
};

enum class CorrelatorStatus {
  kSuccess,
  kNoStarts,   // no start tag passed the conditions: g2 is undefined (NaN)
  kNoStops,    // no stop tag: g2 is undefined (NaN)
  kNoDuration, // duration unknown or zero: g2 is undefined (NaN)
};
const char* to_string(CorrelatorStatus s);

struct CorrelationHistogram {
  CorrelatorStatus status = CorrelatorStatus::kSuccess;
  std::string message;                 // why the status is not kSuccess; empty on success
  CorrelatorOptions options;           // the options used (range rounded to a multiple of W)
  int half_bins = 0;                   // K: bins are k = −K..K
  std::vector<std::int64_t> tau_ps;    // bin centres k·W, ps
  std::vector<std::uint64_t> counts;   // pair counts per bin
  std::vector<double> g2;              // counts / expected_counts_per_bin
  std::vector<double> g2_err;          // √counts / expected_counts_per_bin (Poisson)
  std::uint64_t n_start_seen = 0;      // start-channel tags in the stream
  std::uint64_t n_start_used = 0;      // start tags that passed windows and herald: N_start
  std::uint64_t n_stop = 0;            // stop-channel tags: N_stop
  std::uint64_t n_herald = 0;          // herald-channel tags (0 without a herald condition)
  std::uint64_t n_tags = 0;            // all tags seen, any channel
  std::int64_t duration_ps = 0;        // T used in the normalization
  std::size_t peak_buffered_tags = 0;  // see Correlator::peak_buffered_tags()
  double expected_counts_per_bin = 0;  // N_start N_stop W / T

  std::string brief_report() const;
  std::string full_report() const;
};

// Streaming correlator: feed time-ordered chunks, then call finish() once.
class Correlator {
 public:
  // Throws flyby::InputError if options.validate() reports a problem.
  explicit Correlator(CorrelatorOptions options);

  // Appends a chunk of tags. Times must not decrease within or across chunks (InputError
  // naming the tag otherwise; the correlator is then spent: later calls throw InputError too).
  // Channels other than start, stop and herald are only counted.
  void add_chunk(std::span<const std::int64_t> time_ps, std::span<const int> channel);
  void add_chunk(std::span<const std::int64_t> time_ps, std::span<const std::uint8_t> channel);
  void add_chunk(std::span<const std::int64_t> time_ps, std::span<const std::uint16_t> channel);

  // Processes what is left and returns the histogram. The correlator is spent afterwards.
  CorrelationHistogram finish();

  // Largest number of tags held in the correlator's buffers at any time so far (start, stop
  // and herald tags within the look-back span plus the newest chunk's relevant tags). It does
  // not grow with the record length, only with the chunk size and the rate × look-back span.
  std::size_t peak_buffered_tags() const { return peak_buffered_; }

 private:
  // Tags of one channel role kept between chunks: times in stream order, and for starts
  // whether they passed the window/herald conditions. [0, done) are processed.
  struct Lane {
    std::vector<std::int64_t, detail::UninitAllocator<std::int64_t>> time;
    std::vector<std::uint8_t> used;  // starts only, and only when conditions exist
    std::size_t done = 0;
  };
  template <class Ch>
  void ingest(std::span<const std::int64_t> time_ps, std::span<const Ch> channel);
  template <class Ch>
  void walk(const std::int64_t* t, const Ch* c, std::size_t n);
  void process(std::int64_t t_cut);
  void apply_conditions(std::size_t s_end);
  void trim(std::int64_t t_cut);
  // Throws the InputError naming the first tag of t[0..n) earlier than its predecessor (prev
  // before t[0]).
  [[noreturn]] void throw_unsorted(const std::int64_t* t, std::size_t n, std::int64_t prev) const;

  CorrelatorOptions opt_;
  int half_bins_ = 0;
  std::int64_t lookback_ps_ = 0;        // largest |τ| that can fall in a bin
  std::int64_t herald_lookback_ps_ = 0; // largest herald delay kept
  bool autocorr_ = false;
  bool conditions_ = false;             // windows or herald restrict the starts
  Lane start_, stop_, herald_;          // stop_ unused for an autocorrelation (lane method only)
  // Plain correlations: start/stop tags within the look-back span of the newest tag, in stream
  // order, with their roles (bit 0 start, bit 1 stop).
  std::vector<std::int64_t> tail_time_;
  std::vector<std::uint8_t> tail_role_;
  std::size_t herald_lo_ = 0;           // herald two-pointer (first herald not too old)
  std::size_t window_idx_ = 0;          // first window that does not end before the newest start
  int threads_ = 1;
  std::vector<std::vector<std::uint64_t>> hist_;  // per-thread histograms, summed in finish()
  std::uint64_t n_start_seen_ = 0, n_start_used_ = 0, n_stop_ = 0, n_herald_ = 0, n_tags_ = 0;
  std::optional<std::int64_t> first_time_, last_time_;
  std::size_t peak_buffered_ = 0;
  bool finished_ = false;
  bool failed_ = false;  // a chunk was refused after it had been partly counted: spent
};

// One-shot convenience for tags already in memory.
CorrelationHistogram correlate(std::span<const std::int64_t> time_ps, std::span<const int> channel,
                               const CorrelatorOptions& options);

}  // namespace flyby::analysis
