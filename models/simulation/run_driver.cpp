// The simulate driver (simulation.h, docs/simulate.md): plans the run (atoms, clusters,
// trajectories, empty-resonator pieces), cuts it into time blocks, computes the blocks (OpenMP
// inside a process, MPI ranks across processes), and on rank 0 merges the photons of the
// blocks in time order and streams them through the detector chain into the record writer.
//
// Why the photon stream is exactly that of one process holding every photon: every photon of an
// item (trajectory or empty piece) comes at or after the item's start, items are sorted by
// start, and a block's photons are released to the detector chain only up to the start of the
// next block's first item; everything later is held. Photons are ordered by (time in ps, item
// order, emission order) — trajectories in cluster order, then the empty pieces — the order a
// stable sort of all photons of the run gives.
#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <cstring>
#include <ctime>
#include <deque>
#include <exception>
#include <future>
#include <limits>
#include <map>
#include <mutex>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>

#include "engine/common/errors.h"
#include "engine/common/random.h"
#include "engine/ensemble/ensemble.h"
#include "engine/records/record_writer.h"
#include "engine/trajectory/integrator.h"
#include "models/detectors/detector_config.h"
#include "models/simulation/rank_link.h"
#include "models/simulation/simulation.h"

namespace flyby::simulation {

namespace {

constexpr double kTwoPi = 6.283185307179586;
constexpr std::uint64_t kFallbackBit = std::uint64_t(1) << 63;
constexpr std::uint64_t kEmptyBit = std::uint64_t(1) << 62;
// Leaked norm of the excitation truncation above which the summary warns (same level as the Fock
// monitor's warning, trajectory::Options::fock_warning_population).
constexpr double kLeakWarningFraction = 1e-3;
// An empty interval (no atom) is generated in pieces of at most this lab time, each from its own
// stream (a Poisson process restarted at fixed times is still Poisson), so a long gap does not
// put all its photons in memory at once. Piece p ≥ 1 of gap g uses index 2⁶² | p·2⁴⁰ | g.
constexpr double kGapPieceUs = 1e4;
constexpr int kGapPieceShift = 40;
// Automatic blocks under MPI: about this many blocks per rank of about equal estimated cost
// (load balance over ranks) ...
constexpr std::size_t kBlocksPerRank = 32;
// ... with at most this many items per block (bounds the photons held in memory).
constexpr std::size_t kMaxBlockItems = 1024;
// Under MPI: blocks handed out or finished but not yet merged by rank 0, per rank (bounds the
// blocks rank 0 holds while an earlier one is still being computed) ...
constexpr std::size_t kBlocksAhead = 8;
// ... and blocks a worker holds orders for (so it never waits for rank 0 between blocks, even
// while rank 0 computes a block itself).
constexpr std::size_t kOrdersPerWorker = 3;

std::int64_t to_ps(double t_us) { return std::llround(t_us * 1e6); }

// Wall-clock stopwatch for the phase times of the summary: lap() returns the seconds since the
// previous lap (or construction) and starts the next one.
class Lap {
 public:
  double lap() {
    const auto now = std::chrono::steady_clock::now();
    const double s = std::chrono::duration<double>(now - t_).count();
    t_ = now;
    return s;
  }

 private:
  std::chrono::steady_clock::time_point t_ = std::chrono::steady_clock::now();
};

// CPU seconds used by this process so far (all threads).
double process_cpu_s() {
  timespec ts{};
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
  return double(ts.tv_sec) + 1e-9 * double(ts.tv_nsec);
}

// CPU seconds used by the calling thread so far.
double thread_cpu_s() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return double(ts.tv_sec) + 1e-9 * double(ts.tv_nsec);
}

// One unit of work: a trajectory (a cluster, or one atom of a fallback cluster) or a piece of an
// empty interval with a driven resonator.
struct Item {
  double start_us = 0.0, end_us = 0.0;
  std::uint64_t stream = 0;
  std::uint64_t order = 0;            // trajectory index, or trajectories + piece index
  double cost = 0.0;                  // rough relative cost (duration × dimension), for block sizes
  bool empty_piece = false;
  std::size_t cluster = 0;            // trajectory: index into Plan::clusters
  std::optional<std::size_t> member;  // independent / uncoupled: the one member simulated
  ClusterBasis basis;                 // basis choices of the trajectory (docs/simulate.md, "Cluster methods")
};

struct ItemResult {
  std::vector<detectors::Photon> photons;  // in time order
  std::int64_t jumps = 0, steps = 0;
  double top_fock = 0.0;
  bool ok = true;
  std::string message;
  std::vector<std::string> warnings;
  double leak = 0.0, dropped = 0.0;  // excitation truncation: leaked norm, norm dropped at attach (max)
  std::int64_t pruned = 0;           // unreachable sublevels left out
};

struct Plan {
  std::vector<source::Arrival> arrivals;
  std::vector<source::Cluster> clusters;
  std::vector<Item> items;                // sorted by start_us
  std::vector<std::size_t> block_begin;   // first item of block b; back() = items.size()
  std::size_t blocks() const { return block_begin.size() - 1; }
};

// ---- byte encoding of a block's results (rank → rank 0) -----------------------------------

// kClosing: a worker's last message (answer to a stop order); nothing follows it.
enum class BlockStatus : std::uint8_t {
  kOk = 0, kInputError = 1, kIoError = 2, kInternalError = 3, kOther = 4, kClosing = 5
};

class Encoder {
 public:
  template <class T>
  void pod(const T& v) {
    const char* p = reinterpret_cast<const char*>(&v);
    bytes_.insert(bytes_.end(), p, p + sizeof(T));
  }
  void str(const std::string& s) {
    pod<std::uint64_t>(s.size());
    bytes_.insert(bytes_.end(), s.begin(), s.end());
  }
  std::vector<char>& bytes() { return bytes_; }

 private:
  std::vector<char> bytes_;
};

class Decoder {
 public:
  explicit Decoder(const std::vector<char>& b) : b_(b) {}
  template <class T>
  T pod() {
    FLYBY_CHECK(pos_ + sizeof(T) <= b_.size(), "truncated block message from an MPI rank");
    T v;
    std::memcpy(&v, b_.data() + pos_, sizeof(T));
    pos_ += sizeof(T);
    return v;
  }
  std::string str() {
    const auto n = pod<std::uint64_t>();
    FLYBY_CHECK(pos_ + n <= b_.size(), "truncated block message from an MPI rank");
    std::string s(b_.data() + pos_, n);
    pos_ += n;
    return s;
  }

 private:
  const std::vector<char>& b_;
  std::size_t pos_ = 0;
};

std::vector<char> encode_results(std::uint64_t block, const std::vector<ItemResult>& results, double cpu_s) {
  Encoder e;
  e.pod(BlockStatus::kOk);
  e.pod(block);
  e.pod(cpu_s);
  e.pod<std::uint64_t>(results.size());
  for (const auto& r : results) {
    e.pod(r.jumps);
    e.pod(r.steps);
    e.pod(r.top_fock);
    e.pod<std::uint8_t>(r.ok);
    e.str(r.message);
    e.pod<std::uint64_t>(r.warnings.size());
    for (const auto& w : r.warnings) e.str(w);
    e.pod(r.leak);
    e.pod(r.dropped);
    e.pod(r.pruned);
    e.pod<std::uint64_t>(r.photons.size());
    for (const auto& p : r.photons) {
      e.pod(p.time_ps);
      e.pod(p.channel);
    }
  }
  return std::move(e.bytes());
}

std::vector<char> encode_error(BlockStatus status, const std::string& message) {
  Encoder e;
  e.pod(status);
  e.str(message);
  return std::move(e.bytes());
}

std::vector<char> encode_closing() {
  Encoder e;
  e.pod(BlockStatus::kClosing);
  return std::move(e.bytes());
}

// Decodes block `block`; an error block is rethrown here as the exception type it was on its rank.
std::vector<ItemResult> decode_results(const std::vector<char>& bytes, int rank, std::uint64_t block, double& cpu_s) {
  Decoder d(bytes);
  const auto status = d.pod<BlockStatus>();
  FLYBY_CHECK(status != BlockStatus::kClosing, "MPI rank sent its closing message before its last block");
  if (status != BlockStatus::kOk) {
    const std::string msg = d.str();
    switch (status) {
      case BlockStatus::kInputError: throw InputError(msg);
      case BlockStatus::kIoError: throw IoError(msg);
      case BlockStatus::kInternalError: throw InternalError(msg);
      default: throw std::runtime_error(msg + " (on MPI rank " + std::to_string(rank) + ")");
    }
  }
  FLYBY_CHECK(d.pod<std::uint64_t>() == block, "MPI rank sent a block out of order");
  cpu_s = d.pod<double>();
  std::vector<ItemResult> out(d.pod<std::uint64_t>());
  for (auto& r : out) {
    r.jumps = d.pod<std::int64_t>();
    r.steps = d.pod<std::int64_t>();
    r.top_fock = d.pod<double>();
    r.ok = d.pod<std::uint8_t>() != 0;
    r.message = d.str();
    r.warnings.resize(d.pod<std::uint64_t>());
    for (auto& w : r.warnings) w = d.str();
    r.leak = d.pod<double>();
    r.dropped = d.pod<double>();
    r.pruned = d.pod<std::int64_t>();
    r.photons.resize(d.pod<std::uint64_t>());
    for (auto& p : r.photons) {
      p.time_ps = d.pod<std::int64_t>();
      p.channel = d.pod<std::uint32_t>();
    }
  }
  return out;
}

// ---- planning (identical on every rank) ---------------------------------------------------

Plan make_plan(const config::CheckedScenario& s, const ClusterModelBuilder& builder, double D, Summary& sum,
               std::size_t block_items, int ranks) {
  Plan plan;
  // Atoms of the run and their clusters.
  if (s.config.source.kind == config::SourceKind::kBeam) {
    source::BeamArrivals beam(s.config.source.beam, *s.arrival_rate_per_us, s.interaction_elements,
                              s.ground_populations, sum.seed,
                              {s.config.run.arrival_block_us, s.config.run.interaction_cutoff});
    plan.arrivals = beam.window(0.0, D);
  } else {
    plan.arrivals = source::stationary_arrivals(s.config.source.positions_um, s.ground_populations, sum.seed, D);
  }
  std::vector<std::optional<source::Interval>> intervals;
  for (auto& a : plan.arrivals) {
    if (a.interval) {
      if (!std::isfinite(a.interval->begin_us)) a.interval->begin_us = 0.0;
      if (!std::isfinite(a.interval->end_us)) a.interval->end_us = D;
      if (a.interval->begin_us >= D || a.interval->end_us <= 0.0) a.interval.reset();
    }
    intervals.push_back(a.interval);
    if (a.interval) ++sum.atoms;
  }
  plan.clusters = source::make_clusters(intervals);
  sum.clusters = plan.clusters.size();

  // Trajectories: one per cluster (exact or excitation-truncated basis), or one per atom
  // (uncoupled atoms: exact; independent atoms above the dimension cap: approximation).
  std::vector<Item> traj;
  for (std::size_t ci = 0; ci < plan.clusters.size(); ++ci) {
    const auto& c = plan.clusters[ci];
    const int k = source::max_simultaneous(c);
    sum.max_simultaneous_atoms = std::max(sum.max_simultaneous_atoms, k);
    const ClusterPlan p = builder.plan(k);
    if (p.basis.max_excitation) sum.max_excitation = p.basis.max_excitation;
    const bool joint = p.method == ClusterMethod::kExact || p.method == ClusterMethod::kTruncated ||
                       p.method == ClusterMethod::kEliminated;
    if (joint) {
      if (p.method == ClusterMethod::kEliminated) {
        ++sum.eliminated_clusters;
        sum.elimination_ratio_max = std::max(sum.elimination_ratio_max.value_or(0.0), p.validity_ratio.value_or(0.0));
      } else {
        ++(p.method == ClusterMethod::kExact ? sum.exact_clusters : sum.truncated_clusters);
      }
      Item t;
      t.start_us = c.span.begin_us;
      t.end_us = std::min(c.span.end_us, D);
      t.cluster = ci;
      t.basis = p.basis;
      t.stream = plan.arrivals[c.members.front().atom].id;
      t.cost = std::max(0.0, t.end_us - t.start_us) * p.dimension;
      traj.push_back(t);
    } else {
      // Every atom alone (with its own copy of the resonator modes, if any) over its own interval.
      ++(p.method == ClusterMethod::kUncoupled ? sum.uncoupled_clusters : sum.fallback_clusters);
      for (std::size_t m = 0; m < c.members.size(); ++m) {
        Item t;
        t.start_us = c.members[m].interval.begin_us;
        t.end_us = std::min(c.members[m].interval.end_us, D);
        t.cluster = ci;
        t.member = m;
        t.basis = p.basis;
        t.stream = kFallbackBit | plan.arrivals[c.members[m].atom].id;
        t.cost = std::max(0.0, t.end_us - t.start_us) * p.dimension;
        traj.push_back(t);
      }
    }
  }
  // Members of split clusters start in member order, not time order: keep items by start.
  std::stable_sort(traj.begin(), traj.end(), [](const Item& x, const Item& y) { return x.start_us < y.start_us; });
  if (sum.fallback_clusters > 0)
    sum.warnings.push_back(std::to_string(sum.fallback_clusters) +
                           " cluster(s) above run.max_cluster_dimension_count even with the excitation truncation were "
                           "simulated as independent single-atom sub-clusters (no collective effects between their atoms)");
  if (sum.elimination_ratio_max && *sum.elimination_ratio_max > kEliminationMaxRatio)
    sum.warnings.push_back("resonator modes eliminated outside their validity: ratio " +
                           std::to_string(*sum.elimination_ratio_max) + " > " + std::to_string(kEliminationMaxRatio) +
                           " (N g^2/(kappa^2 + Delta^2) or an atomic rate/kappa; docs/simulate.md, Cluster methods)");
  sum.trajectories = traj.size();
  for (std::size_t i = 0; i < traj.size(); ++i) traj[i].order = i;

  // Empty intervals with a driven resonator, in pieces.
  std::vector<Item> pieces;
  double rate_total = 0.0;
  for (double r : empty_resonator_rates_per_us(s)) rate_total += r;
  if (rate_total > 0.0) {
    std::vector<std::pair<double, double>> gaps;
    double t = 0.0;
    for (const auto& c : plan.clusters) {
      if (c.span.begin_us > t) gaps.push_back({t, std::min(c.span.begin_us, D)});
      t = std::max(t, c.span.end_us);
      if (t >= D) break;
    }
    if (t < D) gaps.push_back({t, D});
    FLYBY_CHECK(gaps.size() < (std::uint64_t(1) << kGapPieceShift), "too many empty intervals");
    for (std::uint64_t g = 0; g < gaps.size(); ++g) {
      for (std::uint64_t p = 0;; ++p) {
        const double a = gaps[g].first + double(p) * kGapPieceUs;
        if (a >= gaps[g].second) break;
        FLYBY_CHECK(p < (std::uint64_t(1) << (62 - kGapPieceShift)), "empty interval too long");
        Item it;
        it.empty_piece = true;
        it.start_us = a;
        it.end_us = std::min(a + kGapPieceUs, gaps[g].second);
        it.stream = kEmptyBit | (p << kGapPieceShift) | g;
        it.order = traj.size() + pieces.size();
        it.cost = 1e-3 * (it.end_us - it.start_us);  // Poisson clicks: far cheaper than a trajectory
        pieces.push_back(it);
      }
    }
  }

  // All items by start (trajectories already are; stable keeps trajectories before pieces).
  plan.items.reserve(traj.size() + pieces.size());
  std::merge(traj.begin(), traj.end(), pieces.begin(), pieces.end(), std::back_inserter(plan.items),
             [](const Item& x, const Item& y) { return x.start_us < y.start_us; });
  FLYBY_CHECK(std::is_sorted(plan.items.begin(), plan.items.end(),
                             [](const Item& x, const Item& y) { return x.start_us < y.start_us; }),
              "trajectories are not in order of their start time");

  // Blocks: consecutive runs of items — `block_items` each when given; else at most
  // kMaxBlockItems, and under MPI also cut at about 1/(ranks·kBlocksPerRank) of the estimated
  // cost (a trajectory's cost grows with its duration and dimension), so that the round-robin
  // blocks give the ranks similar work. The cut never changes the result.
  const std::size_t n = plan.items.size();
  if (block_items > 0) {
    for (std::size_t i = 0; i < n; i += block_items) plan.block_begin.push_back(i);
  } else {
    double total_cost = 0.0;
    for (const auto& it : plan.items) total_cost += it.cost;
    const double target = ranks > 1 && total_cost > 0.0 ? total_cost / double(std::size_t(ranks) * kBlocksPerRank)
                                                        : std::numeric_limits<double>::infinity();
    double acc = 0.0;
    std::size_t count = 0;
    for (std::size_t i = 0; i < n; ++i) {
      if (count == 0) plan.block_begin.push_back(i);
      acc += plan.items[i].cost;
      ++count;
      if (count >= kMaxBlockItems || acc >= target) {
        acc = 0.0;
        count = 0;
      }
    }
  }
  plan.block_begin.push_back(n);
  if (plan.block_begin.size() == 1) plan.block_begin.insert(plan.block_begin.begin(), 0);  // one empty block
  sum.blocks = plan.blocks();
  return plan;
}

// ---- computing one block (any rank) ---------------------------------------------------------

struct BlockContext {
  const config::CheckedScenario& s;
  const ClusterModelBuilder& builder;
  const Plan& plan;
  trajectory::Options topt;
  std::uint64_t seed = 0;
  double D = 0.0;
  std::vector<double> rates;  // empty-resonator rate per detector channel, 1/µs
  double rate_total = 0.0;
  int threads = 0;
  // The OpenMP threads' workspaces, kept from block to block so that the stretch caches carry
  // over (each process computes one block at a time). Fresh ones per block cost the 2-rank run
  // of thermal_beam_resonator.toml (59 blocks, against 3 in one process) 28 % more CPU
  // (docs/performance.md, "MPI").
  mutable ensemble::WorkspacePool workspaces;
};

ItemResult run_item(const BlockContext& c, const Item& it, trajectory::Workspace& ws) {
  ItemResult r;
  if (it.empty_piece) {
    // A coherent state stays coherent under the no-jump evolution and under a jump of a (it is
    // an eigenstate of a), so each output channel clicks as an independent Poisson process of
    // rate |c·α|² — generated directly, once per piece.
    Rng rng = make_stream(c.seed, StreamPurpose::kTrajectory, it.stream);
    double x = it.start_us;
    while (true) {
      x += -std::log(uniform_open0(rng)) / c.rate_total;
      if (x >= it.end_us) break;
      double u = uniform_open0(rng) * c.rate_total;
      std::size_t ch = 0;
      while (ch + 1 < c.rates.size() && (u > c.rates[ch] || c.rates[ch] == 0.0)) u -= c.rates[ch++];
      r.photons.push_back({to_ps(x), std::uint32_t(ch)});
    }
    return r;
  }
  if (!(it.end_us > it.start_us)) return r;
  const auto& cl = c.plan.clusters[it.cluster];
  std::vector<ClusterAtom> atoms;
  if (it.member) {
    const auto& m = cl.members[*it.member];
    atoms.push_back({c.plan.arrivals[m.atom], m.interval});
  } else {
    for (const auto& m : cl.members) atoms.push_back({c.plan.arrivals[m.atom], m.interval});
  }
  std::vector<int> channel_of;
  trajectory::Model model = c.builder.build(atoms, it.start_us, it.end_us, channel_of, it.basis);
  for (const auto& sub : model.subsystems)
    for (bool a : sub.allowed) r.pruned += !a;
  trajectory::Integrator integ(std::move(model), c.topt);  // not used below: no copy of the model
  Rng rng = make_stream(c.seed, StreamPurpose::kTrajectory, it.stream);
  const auto tr = integ.run(rng, ws);
  r.jumps = tr.summary.jumps;
  r.steps = tr.summary.steps();
  r.top_fock = tr.summary.top_fock_population_max;
  r.ok = tr.summary.ok();
  r.message = tr.summary.message;
  r.warnings = tr.summary.warnings;
  r.leak = tr.summary.excitation_leak_max;
  r.dropped = tr.summary.attach_dropped_max;
  for (const auto& j : tr.jumps) {
    const int det = channel_of[std::size_t(j.channel)];
    if (det < 0 || j.time_us < 0.0 || j.time_us >= c.D) continue;
    r.photons.push_back({to_ps(j.time_us), std::uint32_t(det)});
  }
  return r;
}

// `on_item(is_trajectory)` is called after each item, from any thread.
//
// The threads take the items of a block longest first (by the estimated cost, duration ×
// dimension), not in time order: with time order, one long cluster near the end of a block
// leaves the other threads idle at the block's end (measured: 0.93 and 0.96 of the ideal
// 2-thread time for the weak-drive and thermal-beam examples from their item times, against
// 0.999 and 1.0 longest first; docs/performance.md). Results are stored by item index, so the
// order of work never changes the output.
std::vector<ItemResult> run_block(const BlockContext& c, std::size_t b, const std::function<void(bool)>& on_item) {
  const std::size_t first = c.plan.block_begin[b], count = c.plan.block_begin[b + 1] - first;
  std::vector<std::size_t> order(count);
  for (std::size_t i = 0; i < count; ++i) order[i] = i;
  std::stable_sort(order.begin(), order.end(), [&](std::size_t x, std::size_t y) {
    return c.plan.items[first + x].cost > c.plan.items[first + y].cost;
  });
  auto done = ensemble::map_ordered<ItemResult>(count, c.threads, [&](std::size_t k, trajectory::Workspace& ws) {
    const Item& it = c.plan.items[first + order[k]];
    ItemResult r = run_item(c, it, ws);
    if (on_item) on_item(!it.empty_piece);
    return r;
  }, c.workspaces);
  std::vector<ItemResult> out(count);
  for (std::size_t k = 0; k < count; ++k) out[order[k]] = std::move(done[k]);
  return out;
}

BlockStatus status_of(const std::exception_ptr& e) {
  try {
    std::rethrow_exception(e);
  } catch (const InputError&) {
    return BlockStatus::kInputError;
  } catch (const IoError&) {
    return BlockStatus::kIoError;
  } catch (const InternalError&) {
    return BlockStatus::kInternalError;
  } catch (...) {
    return BlockStatus::kOther;
  }
}

std::string message_of(const std::exception_ptr& e) {
  try {
    std::rethrow_exception(e);
  } catch (const std::exception& x) {
    return x.what();
  } catch (...) {
    return "unknown error";
  }
}

// Worker rank: computes the blocks rank 0 orders, first in, first out, and sends each when done
// (rank_link.h). Returns false when rank 0 stopped the run after an error. After an error of
// its own it sends the error in place of the block and rethrows it (computing nothing more).
bool worker_loop(const BlockContext& c) {
  std::deque<std::uint64_t> todo;
  std::optional<Order::Kind> stop;
  while (true) {
    // Take every order that has arrived; wait for one when there is nothing to do.
    while (!stop && (todo.empty() || order_waiting())) {
      const Order o = receive_order();
      if (o.kind == Order::Kind::kCompute) {
        FLYBY_CHECK(o.block < c.plan.blocks(), "MPI rank 0 ordered a block that does not exist");
        todo.push_back(o.block);
      } else {
        stop = o.kind;
      }
    }
    if (stop) {
      send_block(encode_closing());
      finish_sends();
      return *stop == Order::Kind::kStop;
    }
    const std::uint64_t b = todo.front();
    todo.pop_front();
    try {
      const double cpu0 = process_cpu_s();
      auto results = run_block(c, std::size_t(b), {});
      send_block(encode_results(b, results, process_cpu_s() - cpu0));
    } catch (...) {
      const std::exception_ptr error = std::current_exception();
      send_block(encode_error(status_of(error), message_of(error)));
      finish_sends();
      throw;
    }
  }
}

// Rank 0: when it leaves the run (finished, or its own error or one a worker reported), sends
// every worker still running a stop order and takes that worker's remaining messages off the
// wire up to its closing message (a worker may be sending a large block; nothing may be left
// unreceived), so no rank waits forever.
class StopWorkersOnExit {
 public:
  explicit StopWorkersOnExit(RankInfo rk) : rk_(rk), left_(std::size_t(rk.size), false) {}
  ~StopWorkersOnExit() {
    try {
      stop_all(false);
    } catch (...) {
      // Already unwinding an error; the MPI runtime tears the job down if this fails.
    }
  }
  // The worker has sent an error (and left).
  void left(int rank) { left_[std::size_t(rank)] = true; }
  // Normal end: every block was received.
  void finish() { stop_all(true); }

 private:
  void stop_all(bool success) {
    if (done_) return;
    done_ = true;
    for (int w = 1; w < rk_.size; ++w)
      if (!left_[std::size_t(w)])
        send_order(w, {success ? Order::Kind::kStop : Order::Kind::kStopAfterError, 0});
    for (int w = 1; w < rk_.size; ++w) {
      while (!left_[std::size_t(w)]) {
        const std::vector<char> bytes = receive_block(w);
        // The closing message, or an error report (that worker has left too).
        if (bytes.empty() || bytes[0] != char(BlockStatus::kOk)) left_[std::size_t(w)] = true;
      }
    }
  }
  RankInfo rk_;
  std::vector<bool> left_;
  bool done_ = false;
};

// Rank 0: a worker whose message has arrived (never without workers: one process needs no MPI).
std::optional<int> message_waiting_any(RankInfo rk) {
  if (rk.size <= 1) return std::nullopt;
  return message_waiting();
}

// A photon waiting for its turn: ordered by (time, item order, emission order).
struct Pending {
  std::int64_t time_ps;
  std::uint64_t order;
  std::uint32_t seq;
  std::uint32_t channel;
  bool operator<(const Pending& o) const {
    if (time_ps != o.time_ps) return time_ps < o.time_ps;
    if (order != o.order) return order < o.order;
    return seq < o.seq;
  }
};

}  // namespace

Summary simulate(const config::CheckedScenario& s, const Options& o) {
  const auto wall0 = std::chrono::steady_clock::now();
  const RankInfo rk = current_ranks();
  Summary sum;
  sum.seed = o.seed.value_or(s.config.run.seed);
  sum.duration_s = o.duration_s.value_or(s.config.run.duration_s);
  if (!(sum.duration_s > 0.0) || !std::isfinite(sum.duration_s))
    throw InputError("--duration-s must be a positive number of seconds");
  if (sum.duration_s > 1e5) throw InputError("--duration-s is larger than 1e5 s");
  sum.threads = o.threads > 0 ? o.threads : ensemble::omp_default_threads();
  sum.ranks = rk.size;
  const double D = sum.duration_s * 1e6;  // µs
  const double frame = frame_detuning_rad_per_us(s);
  {
    std::ostringstream f;
    f << "fields rotate at the reference transition + " << frame / kTwoPi << " MHz ("
      << (!s.config.resonator_drives.empty() ? "first resonator drive"
          : !s.config.side_drives.empty()    ? "first side drive"
                                             : "reference transition")
      << ")";
    sum.frame_description = f.str();
  }

  Lap lap;
  auto& ph = sum.phase_wall_s;
  const ClusterModelBuilder builder = cluster_model_builder(s);
  ph.setup_s += lap.lap();
  const Plan plan = make_plan(s, builder, D, sum, o.block_items, rk.size);
  ph.plan_s += lap.lap();

  BlockContext ctx{s, builder, plan, {}, sum.seed, D, empty_resonator_rates_per_us(s), 0.0, o.threads, {}};
  for (double r : ctx.rates) ctx.rate_total += r;
  ctx.topt.rtol = s.config.run.relative_tolerance;
  ctx.topt.atol = std::min(1e-8, ctx.topt.rtol * 1e-2);
  ctx.topt.fock_cutoff_setting = "resonator.fock_cutoff_count";

  if (rk.rank != 0) {
    const bool go_on = worker_loop(ctx);
    ph.compute_s += lap.lap();
    if (!go_on) {
      sum.ok = false;
      sum.message = "stopped by rank 0";
    }
    sum.wall_time_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - wall0).count();
    return sum;
  }

  StopWorkersOnExit stop_guard(rk);

  // Detector chain and record. One detector channel per [[channel]] in file order
  // (models/detectors/detector_config.h); channels that trigger a feedback rule are heralds.
  detectors::DetectorChainOptions dopt = detectors::detector_chain_options(s.config);
  std::set<std::string> heralds;
  for (const auto& r : s.config.feedback) heralds.insert(r.trigger_channel);
  for (auto& d : dopt.channels)
    if (heralds.count(d.channel.name)) d.channel.role = records::ChannelRole::kHerald;
  const std::int64_t end_ps = to_ps(D);
  detectors::DetectorChain chain(dopt, sum.seed, 0, end_ps);
  records::RecordHeader header;
  header.channels = chain.record_channels();
  header.resolution_ps = s.config.run.tagger_resolution_ps;
  header.start_ps = 0;
  header.duration_ps = end_ps;
  header.provenance = records::current_record_provenance("simulation", s.config.text, sum.seed);
  records::RecordWriter writer(o.output_path, header);
  ph.setup_s += lap.lap();

  std::mutex progress_mutex;
  std::atomic<std::size_t> done{0};
  const std::size_t total = sum.trajectories;
  auto report = [&](std::size_t n) {
    if (!o.progress) return;
    std::lock_guard<std::mutex> lock(progress_mutex);
    o.progress(n, total);
  };
  const std::function<void(bool)> on_item = [&](bool trajectory) {
    if (trajectory) report(++done);
  };

  // Blocks are handed out dynamically (rank_link.h): up to kOrdersPerWorker to each worker,
  // refilled as each returns one, and one at a time to a thread of rank 0 that computes it in
  // the background (with the OpenMP threads), while this thread answers the workers and merges
  // finished blocks through the detector chain into the record — so rank 0 stays responsive
  // and its serial work overlaps the computation. Only the blocks of a window of
  // kBlocksAhead × ranks blocks from the next one to merge are handed out (bounds the blocks
  // held), costliest first by the estimated cost: a costly block near the end of the run would
  // otherwise keep one rank busy while the others idle (docs/performance.md). The blocks are
  // merged in time order whoever computed them, so the record does not depend on this.
  // One process: in time order, the next block computed while the previous one is merged.
  const std::size_t nblocks = plan.blocks();
  const std::size_t window = rk.size > 1 ? kBlocksAhead * std::size_t(rk.size) : 2;
  std::vector<double> block_cost(nblocks, 0.0);
  for (std::size_t k = 0; k < nblocks; ++k)
    for (std::size_t i = plan.block_begin[k]; i < plan.block_begin[k + 1]; ++i) block_cost[k] += plan.items[i].cost;
  std::set<std::pair<double, std::size_t>> available;  // (−cost, block) in the window, not handed out
  std::size_t window_end = 0;                          // blocks below it have entered the window
  std::map<std::size_t, std::vector<ItemResult>> finished;  // computed, not merged yet
  std::vector<std::deque<std::size_t>> orders(std::size_t(rk.size));  // per worker, in order given
  sum.rank_compute_cpu_s.assign(std::size_t(rk.size), 0.0);
  // The next block to hand out while `merged` blocks are merged, if any.
  auto hand_out = [&](std::size_t merged) -> std::optional<std::size_t> {
    for (; window_end < std::min(nblocks, merged + window); ++window_end) available.insert({-block_cost[window_end], window_end});
    if (available.empty()) return std::nullopt;
    const std::size_t k = available.begin()->second;
    available.erase(available.begin());
    return k;
  };
  auto refill = [&](std::size_t merged) {
    for (int w = 1; w < rk.size; ++w)
      while (orders[std::size_t(w)].size() < kOrdersPerWorker) {
        const auto k = hand_out(merged);
        if (!k) return;
        send_order(w, {Order::Kind::kCompute, *k});
        orders[std::size_t(w)].push_back(*k);
      }
  };
  auto receive_from = [&](int w) {  // the time since the last lap counts as waiting for ranks
    const std::vector<char> bytes = receive_block(w);
    auto& q = orders[std::size_t(w)];
    FLYBY_CHECK(!q.empty(), "MPI rank sent a block it was not asked for");
    const std::size_t blk = q.front();
    q.pop_front();
    double cpu_s = 0.0;
    std::vector<ItemResult> res;
    try {
      res = decode_results(bytes, w, blk, cpu_s);
    } catch (...) {
      stop_guard.left(w);  // the worker reported an error and left
      throw;
    }
    sum.rank_compute_cpu_s[std::size_t(w)] += cpu_s;
    std::size_t n = 0;
    for (std::size_t i = plan.block_begin[blk]; i < plan.block_begin[blk + 1]; ++i) n += !plan.items[i].empty_piece;
    report(done += n);
    finished.emplace(blk, std::move(res));
  };

  // Rank 0's own block in the background: its index, result, and CPU clocks at its start.
  struct Own {
    std::size_t block = 0;
    std::future<std::vector<ItemResult>> result;
    double process_cpu0 = 0.0, thread_cpu0 = 0.0, wall0 = 0.0;
  };
  std::optional<Own> own;
  const auto t_start = std::chrono::steady_clock::now();
  auto wall_now = [&] { return std::chrono::duration<double>(std::chrono::steady_clock::now() - t_start).count(); };
  auto collect_own = [&] {
    auto res = own->result.get();  // rethrows an error of the block
    // CPU of the computing threads: the process's minus this (main) thread's meanwhile.
    sum.rank_compute_cpu_s[0] += (process_cpu_s() - own->process_cpu0) - (thread_cpu_s() - own->thread_cpu0);
    ph.compute_s += wall_now() - own->wall0;
    finished.emplace(own->block, std::move(res));
    own.reset();
  };

  std::vector<Pending> pending;
  std::vector<detectors::Photon> ready;
  records::TagBlock tags;
  constexpr std::size_t kChunk = 1 << 16;
  for (std::size_t b = 0; b < nblocks; ++b) {
    // Until block b is here: hand out blocks, take what workers sent, keep rank 0's own
    // computation going; wait (a short while, to notice workers' messages) when nothing moved.
    lap.lap();
    while (true) {
      bool moved = false;
      refill(b);
      while (const auto w = message_waiting_any(rk)) {
        receive_from(*w);
        moved = true;
      }
      if (own && own->result.wait_for(std::chrono::seconds(0)) == std::future_status::ready) {
        collect_own();
        moved = true;
      }
      if (!own) {
        if (const auto k = hand_out(b)) {
          own = Own{*k, {}, process_cpu_s(), thread_cpu_s(), wall_now()};
          own->result = std::async(std::launch::async, [&ctx, &on_item, k = *k] { return run_block(ctx, k, on_item); });
          moved = true;
        }
      }
      if (finished.count(b)) break;
      if (!moved) {
        FLYBY_CHECK(own || rk.size > 1, "simulate: block not computed and nothing running");
        if (rk.size == 1) own->result.wait();  // nothing else can arrive
        else if (own) own->result.wait_for(std::chrono::microseconds(500));
        else receive_from(wait_for_message());  // block b is out at a worker
      }
    }
    ph.wait_s += lap.lap();
    std::vector<ItemResult> results = std::move(finished.at(b));
    finished.erase(b);

    // Statistics in item order (the order a one-process run uses).
    lap.lap();
    const std::size_t old = pending.size();
    for (std::size_t i = 0; i < results.size(); ++i) {
      const Item& it = plan.items[plan.block_begin[b] + i];
      ItemResult& r = results[i];
      if (it.empty_piece) {
        sum.empty_interval_photons += r.photons.size();
      } else {
        sum.jumps += r.jumps;
        sum.steps += r.steps;
        sum.top_fock_population_max = std::max(sum.top_fock_population_max, r.top_fock);
        sum.excitation_leak_max = std::max(sum.excitation_leak_max, r.leak);
        sum.attach_dropped_max = std::max(sum.attach_dropped_max, r.dropped);
        sum.pruned_levels += r.pruned;
        if (!r.ok && sum.ok) {
          sum.ok = false;
          sum.message = r.message;
        }
        for (auto& w : r.warnings)
          if (std::find(sum.warnings.begin(), sum.warnings.end(), w) == sum.warnings.end()) sum.warnings.push_back(w);
      }
      for (std::size_t k = 0; k < r.photons.size(); ++k)
        pending.push_back({r.photons[k].time_ps, it.order, std::uint32_t(k), r.photons[k].channel});
      r.photons = {};
    }
    std::sort(pending.begin() + std::ptrdiff_t(old), pending.end());
    std::inplace_merge(pending.begin(), pending.begin() + std::ptrdiff_t(old), pending.end());

    // Photons before the next block's first item can no longer be preceded by any other.
    const std::int64_t bound = b + 1 < plan.blocks() ? to_ps(plan.items[plan.block_begin[b + 1]].start_us)
                                                     : std::numeric_limits<std::int64_t>::max();
    const auto cut = std::lower_bound(pending.begin(), pending.end(), bound,
                                      [](const Pending& p, std::int64_t t) { return p.time_ps < t; });
    ph.merge_s += lap.lap();
    for (auto p = pending.begin(); p != cut;) {
      ready.clear();
      for (; p != cut && ready.size() < kChunk; ++p) ready.push_back({p->time_ps, p->channel});
      chain.push(std::span<const detectors::Photon>(ready), tags);
      ph.detect_s += lap.lap();
      writer.append(tags);
      tags.clear();
      ph.write_s += lap.lap();
    }
    pending.erase(pending.begin(), cut);
    ph.merge_s += lap.lap();
  }
  chain.finish(tags);
  ph.detect_s += lap.lap();
  writer.append(tags);
  writer.commit();
  ph.write_s += lap.lap();
  stop_guard.finish();

  if (sum.max_excitation && std::max(sum.excitation_leak_max, sum.attach_dropped_max) > kLeakWarningFraction)
    sum.warnings.push_back("excitation truncation: estimated leaked norm " +
                           std::to_string(std::max(sum.excitation_leak_max, sum.attach_dropped_max)) + " (warning level " +
                           std::to_string(kLeakWarningFraction) + "); raise run.max_excitation_count");

  const auto& cs = chain.summary();
  for (std::size_t c = 0; c < s.config.detectors.size(); ++c)
    sum.channels.push_back({s.config.detectors[c].channel, cs.channels[c].photons, cs.channels[c].recorded});
  sum.wall_time_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - wall0).count();
  return sum;
}

std::string Summary::brief_report() const {
  std::ostringstream os;
  os << (ok ? "simulated " : "simulation stopped early: ") << duration_s << " s lab time in " << wall_time_s
     << " s wall (" << threads << " thread(s)";
  if (ranks > 1) os << " x " << ranks << " MPI ranks";
  os << "): " << atoms << " atoms, " << clusters << " clusters (" << fallback_clusters << " fallback), " << jumps
     << " jumps";
  for (const auto& c : channels) os << ", " << c.name << " " << c.recorded;
  os << " tags";
  return os.str();
}

std::string Summary::full_report() const {
  std::ostringstream os;
  os << brief_report() << "\n";
  if (!ok) os << "  error: " << message << "\n";
  os << "  seed " << seed << "; " << frame_description << "\n";
  os << "  trajectories " << trajectories << " in " << blocks << " time block(s), most atoms together "
     << max_simultaneous_atoms << ", steps " << steps << ", empty-resonator photons " << empty_interval_photons
     << "\n";
  os << "  top-Fock population (max) " << top_fock_population_max << "\n";
  os << "  cluster methods: " << exact_clusters << " exact, " << truncated_clusters << " truncated";
  if (max_excitation) os << " (<= " << *max_excitation << " excitations)";
  os << ", " << eliminated_clusters << " eliminated modes (approximation";
  if (elimination_ratio_max) os << ", validity ratio max " << *elimination_ratio_max;
  os << ")";
  os << ", " << fallback_clusters << " independent atoms (approximation), " << uncoupled_clusters
     << " uncoupled (exact); " << pruned_levels << " unreachable sublevels pruned\n";
  if (max_excitation)
    os << "  excitation truncation: leaked norm (max estimate) " << excitation_leak_max << ", dropped at attach (max) "
       << attach_dropped_max << "\n";
  for (const auto& c : channels)
    os << "  channel " << c.name << ": " << c.photons << " photons at the detector, " << c.recorded
       << " tags recorded (" << double(c.recorded) / duration_s << " /s)\n";
  const double core_s = wall_time_s * threads * ranks;
  if (core_s > 0) os << "  lab seconds per core-second " << duration_s / core_s << "\n";
  if (ranks > 1 && !rank_compute_cpu_s.empty()) {
    os << "  CPU seconds in blocks per rank:";
    double total = 0.0, most = 0.0;
    for (double c : rank_compute_cpu_s) {
      os << " " << c;
      total += c;
      most = std::max(most, c);
    }
    if (most > 0) os << " (balance " << total / (double(ranks) * most) << ")";
    os << "\n";
  }
  {
    const auto& p = phase_wall_s;
    const double other = wall_time_s - (p.setup_s + p.plan_s + p.wait_s + p.merge_s + p.detect_s + p.write_s);
    os << "  wall s per phase: set-up " << p.setup_s << ", planning " << p.plan_s << ", waiting for blocks "
       << p.wait_s << ", merge " << p.merge_s << ", detector chain " << p.detect_s << ", record " << p.write_s
       << ", other " << std::max(0.0, other) << "; own blocks computing (overlaps the rest) " << p.compute_s << "\n";
  }
  for (const auto& w : warnings) os << "  warning: " << w << "\n";
  return os.str();
}

std::string Summary::to_json() const {
  nlohmann::json j;
  j["ok"] = ok;
  j["message"] = message;
  j["seed"] = seed;
  j["duration_s"] = duration_s;
  j["atoms_count"] = atoms;
  j["clusters_count"] = clusters;
  j["fallback_clusters_count"] = fallback_clusters;
  j["exact_clusters_count"] = exact_clusters;
  j["truncated_clusters_count"] = truncated_clusters;
  j["independent_clusters_count"] = fallback_clusters;
  j["uncoupled_clusters_count"] = uncoupled_clusters;
  j["eliminated_clusters_count"] = eliminated_clusters;
  if (elimination_ratio_max) j["elimination_validity_ratio"] = *elimination_ratio_max; else j["elimination_validity_ratio"] = nullptr;
  if (max_excitation) j["max_excitation_count"] = *max_excitation; else j["max_excitation_count"] = nullptr;
  j["excitation_leak_fraction"] = excitation_leak_max;
  j["attach_dropped_fraction"] = attach_dropped_max;
  j["pruned_levels_count"] = pruned_levels;
  j["trajectories_count"] = trajectories;
  j["max_simultaneous_atoms_count"] = max_simultaneous_atoms;
  j["jumps_count"] = jumps;
  j["steps_count"] = steps;
  j["empty_interval_photons_count"] = empty_interval_photons;
  j["top_fock_population_fraction"] = top_fock_population_max;
  j["frame"] = frame_description;
  j["wall_time_s"] = wall_time_s;
  j["threads_count"] = threads;
  j["ranks_count"] = ranks;
  j["blocks_count"] = blocks;
  j["rank_compute_cpu_s"] = rank_compute_cpu_s;
  j["phase_wall_s"] = {{"setup_s", phase_wall_s.setup_s},   {"plan_s", phase_wall_s.plan_s},
                       {"compute_s", phase_wall_s.compute_s}, {"wait_s", phase_wall_s.wait_s},
                       {"merge_s", phase_wall_s.merge_s},   {"detect_s", phase_wall_s.detect_s},
                       {"write_s", phase_wall_s.write_s}};
  j["warnings"] = warnings;
  auto& ch = j["channels"] = nlohmann::json::array();
  for (const auto& c : channels)
    ch.push_back({{"name", c.name}, {"photons_count", c.photons}, {"recorded_count", c.recorded},
                  {"rate_per_s", double(c.recorded) / duration_s}});
  return j.dump(2, ' ', false, nlohmann::json::error_handler_t::replace);
}

}  // namespace flyby::simulation
