// One factor of the tensor-product state space: a bosonic mode with a Fock cutoff or a d-level
// system (an atom's sublevels). The engine only needs the dimension and, for modes, which basis
// state is the top kept Fock state (for the truncation monitor).
#pragma once

#include <string>
#include <vector>

namespace flyby::space {

// Index of a subsystem in a model's list of all subsystems that may ever be present. Stable
// while subsystems are attached and detached.
using SubsystemId = int;

enum class SubsystemKind {
  kMode,    // bosonic mode, basis |0⟩..|cutoff⟩; dimension = cutoff + 1
  kLevels,  // d-level system (atom sublevels), basis given by the model
};

struct Subsystem {
  std::string name;                         // for messages, e.g. "mode H", "atom 3"
  SubsystemKind kind = SubsystemKind::kLevels;
  int dimension = 2;                        // number of basis states, ≥ 1
  // Excitation number of each basis state, for layouts truncated by total excitation number
  // (layout.h). Empty: n for a mode's |n⟩, 0 for every level of a d-level system (the model sets
  // 1 on an atom's excited sublevels). Values ≥ 0.
  std::vector<int> excitation;
  // Levels that can be populated (empty: all). A level marked false is pruned: the model has
  // shown that no operator of the trajectory reaches it from the initial or attached states
  // (e.g. trajectory::prune_unreachable_levels), so layouts leave its product states out.
  std::vector<bool> allowed;

  bool is_allowed(int level) const { return allowed.empty() || allowed[std::size_t(level)]; }
  bool pruned() const {
    for (bool a : allowed)
      if (!a) return true;
    return false;
  }

  int excitation_of(int level) const {
    if (!excitation.empty()) return excitation[std::size_t(level)];
    return kind == SubsystemKind::kMode ? level : 0;
  }

  static Subsystem mode(std::string name, int fock_cutoff) {
    return {std::move(name), SubsystemKind::kMode, fock_cutoff + 1, {}, {}};
  }
  static Subsystem levels(std::string name, int dimension) {
    return {std::move(name), SubsystemKind::kLevels, dimension, {}, {}};
  }
};

}  // namespace flyby::space
