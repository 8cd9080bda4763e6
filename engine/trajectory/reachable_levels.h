// Pruning of the levels a trajectory can never populate. A level of a subsystem is reachable if a
// chain of non-zero entries of the local matrices acting on that subsystem (in any Hamiltonian
// term or channel) leads to it from a level populated in the subsystem's initial or attached
// states. Every operator of the model maps the span of the reachable product states into itself,
// so leaving the other levels out (space::Subsystem::allowed) changes no amplitude: the pruning
// is exact. Typical gain: an atom optically pumped into a stretched state and driven with one
// circular polarization keeps its two cycling levels (plus whatever decay reaches).
#pragma once

#include "engine/trajectory/model.h"

namespace flyby::trajectory {

// Marks unreachable levels in model.subsystems[*].allowed; returns the number of levels pruned.
long prune_unreachable_levels(Model& model);

}  // namespace flyby::trajectory
