// Many independent trajectories in parallel (OpenMP, dynamic scheduling). Trajectory i always
// draws from flyby::make_stream(seed, StreamPurpose::kTrajectory, first_index + i) and results
// are stored by index, so the output is bit-identical for any thread count.
#pragma once

#include <cstdint>
#include <exception>
#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "engine/trajectory/integrator.h"

namespace flyby::ensemble {

struct Options {
  int threads = 0;                  // OpenMP threads; 0 = the OpenMP default (OMP_NUM_THREADS)
  std::uint64_t first_index = 0;    // stream index of the first trajectory (for MPI blocks)
};

struct Summary {
  std::size_t trajectories = 0;
  std::size_t failed = 0;            // trajectories whose status is not success
  long jumps = 0;
  long steps = 0;
  double norm_error_estimate = 0;    // max over trajectories
  double top_fock_population_max = 0;
  std::string first_failure;         // message of the lowest-index failure, or empty
  std::string brief_report() const;
};

struct Result {
  std::vector<trajectory::TrajectoryResult> trajectories;  // by index
  Summary summary;
};

Result run(const trajectory::Integrator& integrator, std::size_t count, std::uint64_t seed,
           const Options& options = {});

// Threads OpenMP would use by default (OMP_NUM_THREADS or the core count).
int omp_default_threads();

// Number of the calling thread in its OpenMP team (0 outside a parallel region).
int omp_thread_index();

// The workspaces of a pool, one per OpenMP thread number; each is created by the thread that
// first uses it, so that its cache lives in that thread's memory (created together by one
// thread, the caches of two threads shared cache lines: the two-level ensemble at 2 threads ran
// at 0.69 of the ideal instead of ≈ 0.95, docs/performance.md).
using WorkspacePool = std::vector<std::unique_ptr<trajectory::Workspace>>;

// Generic ordered parallel map: out[i] = fn(i, workspace) for i < count, with dynamic
// scheduling and the workspace of the OpenMP thread that runs item i taken from `pool` and left
// there: its stretch cache carries over to the next call with the same pool (the time blocks of
// a run), which changes no result — a cached entry is a deterministic function of its key.
// Calls sharing a pool must not overlap. The first exception (lowest index) is rethrown after
// the loop.
template <class T>
std::vector<T> map_ordered(std::size_t count, int threads,
                           const std::function<T(std::size_t, trajectory::Workspace&)>& fn, WorkspacePool& pool) {
  const int team = threads > 0 ? threads : omp_default_threads();
  if (pool.size() < std::size_t(team)) pool.resize(std::size_t(team));
  std::vector<T> out(count);
  std::vector<std::exception_ptr> errors(count);
#pragma omp parallel num_threads(team)
  {
    auto& slot = pool[std::size_t(omp_thread_index())];
    if (!slot) slot = std::make_unique<trajectory::Workspace>();
    trajectory::Workspace& ws = *slot;
#pragma omp for schedule(dynamic, 1)
    for (long i = 0; i < long(count); ++i) {
      try {
        out[std::size_t(i)] = fn(std::size_t(i), ws);
      } catch (...) {
        errors[std::size_t(i)] = std::current_exception();
      }
    }
  }
  for (auto& e : errors)
    if (e) std::rethrow_exception(e);
  return out;
}

// The same with fresh workspaces for this call only.
template <class T>
std::vector<T> map_ordered(std::size_t count, int threads,
                           const std::function<T(std::size_t, trajectory::Workspace&)>& fn) {
  WorkspacePool pool;
  return map_ordered<T>(count, threads, fn, pool);
}

}  // namespace flyby::ensemble
