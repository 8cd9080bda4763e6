// Parallel ensemble of trajectories with a deterministic merge (by trajectory index).
#include "engine/ensemble/ensemble.h"

#include <omp.h>

#include <sstream>

namespace flyby::ensemble {

int omp_default_threads() { return omp_get_max_threads(); }
int omp_thread_index() { return omp_get_thread_num(); }

std::string Summary::brief_report() const {
  std::ostringstream o;
  o << "ensemble: " << trajectories << " trajectories (" << failed << " failed), " << jumps << " jumps, " << steps
    << " steps, norm error " << norm_error_estimate << ", top Fock population " << top_fock_population_max;
  if (!first_failure.empty()) o << "; first failure: " << first_failure;
  return o.str();
}

Result run(const trajectory::Integrator& integrator, std::size_t count, std::uint64_t seed, const Options& options) {
  Result res;
  res.trajectories = map_ordered<trajectory::TrajectoryResult>(
      count, options.threads, [&](std::size_t i, trajectory::Workspace& ws) {
        Rng rng = make_stream(seed, StreamPurpose::kTrajectory, options.first_index + i);
        return integrator.run(rng, ws);
      });
  auto& s = res.summary;
  s.trajectories = count;
  for (const auto& t : res.trajectories) {
    s.jumps += t.summary.jumps;
    s.steps += t.summary.steps();
    s.norm_error_estimate = std::max(s.norm_error_estimate, t.summary.norm_error_estimate);
    s.top_fock_population_max = std::max(s.top_fock_population_max, t.summary.top_fock_population_max);
    if (!t.summary.ok()) {
      if (s.failed == 0) s.first_failure = t.summary.message;
      ++s.failed;
    }
  }
  return res;
}

}  // namespace flyby::ensemble
