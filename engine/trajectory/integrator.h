// The quantum-jump integrator by the waiting-time method (Dalibard, Castin & Mølmer, Phys. Rev.
// Lett. 68, 580 (1992); Plenio & Knight, Rev. Mod. Phys. 70, 101 (1998)):
//   H_eff = H − (i/2) Σ_c C_c†C_c; draw r uniform in (0, 1]; evolve the unnormalized state with
//   H_eff until ‖ψ‖² = r (located by bracketed root finding to Options::jump_time_tolerance_us);
//   pick channel c with probability ∝ ‖C_c ψ‖²; ψ ← C_c ψ/‖C_c ψ‖; record (t, c); repeat.
// Time is cut into *stretches* between events (attach, detach, control change, sample time). In
// a stretch whose coefficients do not depend on time, ψ(t) = V e^{−iΛt} V⁻¹ ψ0 from an
// eigendecomposition of H_eff (cached per layout and control values); otherwise Dormand–Prince
// 5(4) with dense output (Boost.Odeint) integrates, and the root is found on the interpolant.
#pragma once

#include <cstdint>
#include <memory>

#include "engine/common/random.h"
#include "engine/trajectory/model.h"
#include "engine/trajectory/options.h"
#include "engine/trajectory/result.h"

namespace flyby::trajectory {

class Integrator;
struct StretchCache;

// Per-thread reusable cache of stretch propagators (sparse H_eff, eigendecompositions). Reusing
// one across trajectories of the same Integrator saves the decompositions; results do not
// depend on the cache (a cached entry is a deterministic function of its key).
class Workspace {
 public:
  Workspace();
  ~Workspace();
  Workspace(Workspace&&) noexcept;
  Workspace& operator=(Workspace&&) noexcept;

 private:
  friend class Integrator;
  std::unique_ptr<StretchCache> cache_;
};

class Integrator {
 public:
  // Validates the options and the model (throws flyby::InputError with one line naming the
  // problem): Hermitian H at start, channel completeness against model.physical_decay, event
  // consistency (no attach of a present or detach of an absent subsystem).
  Integrator(Model model, Options options = {});

  // One trajectory drawing from `rng` (make it with flyby::make_stream(seed,
  // StreamPurpose::kTrajectory, index)). Thread-safe: several threads may call run() on one
  // Integrator, each with its own rng and workspace.
  TrajectoryResult run(Rng& rng, Workspace& workspace) const;
  TrajectoryResult run(Rng& rng) const;

  const Model& model() const { return *model_; }
  const Options& options() const { return options_; }

 private:
  std::shared_ptr<const Model> model_;
  Options options_;
  std::uint64_t id_;  // unique per Integrator, keys the Workspace cache (addresses can repeat)
};

}  // namespace flyby::trajectory
