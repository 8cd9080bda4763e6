// One factor of the tensor-product state space: a bosonic mode with a Fock cutoff or a d-level
// system (an atom's sublevels). The engine only needs the dimension and, for modes, which basis
// state is the top kept Fock state (for the truncation monitor).
#pragma once

#include <string>

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

  static Subsystem mode(std::string name, int fock_cutoff) {
    return {std::move(name), SubsystemKind::kMode, fock_cutoff + 1};
  }
  static Subsystem levels(std::string name, int dimension) {
    return {std::move(name), SubsystemKind::kLevels, dimension};
  }
};

}  // namespace flyby::space
