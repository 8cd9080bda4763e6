// Reachability closure over the local matrices of the model (see reachable_levels.h).
#include "engine/trajectory/reachable_levels.h"

namespace flyby::trajectory {

long prune_unreachable_levels(Model& m) {
  const std::size_t n = m.subsystems.size();
  std::vector<std::vector<bool>> reach(n);
  std::vector<std::vector<std::vector<int>>> next(n);  // next[id][b] = levels a with a factor entry (a, b) ≠ 0
  for (std::size_t id = 0; id < n; ++id) {
    reach[id].assign(std::size_t(m.subsystems[id].dimension), false);
    next[id].assign(std::size_t(m.subsystems[id].dimension), {});
  }
  auto seed = [&](SubsystemId id, const Vector& state) {
    for (long k = 0; k < state.size(); ++k)
      if (state[k] != Complex(0.0)) reach[std::size_t(id)][std::size_t(k)] = true;
  };
  for (const auto& f : m.initial) seed(f.subsystem, f.state);
  for (const auto& e : m.events)
    if (auto* a = std::get_if<Attach>(&e.action)) seed(a->subsystem, a->state);
  auto edges = [&](const operators::Operator& op) {
    for (const auto& t : op.terms())
      for (const auto& f : t.factors)
        for (long b = 0; b < f.matrix.cols(); ++b)
          for (long a = 0; a < f.matrix.rows(); ++a)
            if (a != b && f.matrix(a, b) != Complex(0.0)) next[std::size_t(f.target)][std::size_t(b)].push_back(int(a));
  };
  for (const auto& t : m.hamiltonian.terms()) edges(t.op);
  for (const auto& c : m.channels) {
    edges(c.op);
    if (!c.time_dependent()) continue;
    // A time-dependent channel may hold a c-number (an eliminated driven mode, α + ℓ): then its
    // −(i/2) C†C also connects levels through ℓ†, so the products of its parts count too.
    std::vector<operators::Operator> parts{c.op};
    for (const auto& t : c.timed.terms()) parts.push_back(t.op);
    for (const auto& a : parts) {
      edges(a.adjoint());
      for (const auto& b : parts) edges(a.adjoint() * b);
    }
  }
  long pruned = 0;
  for (std::size_t id = 0; id < n; ++id) {
    std::vector<int> stack;
    for (std::size_t k = 0; k < reach[id].size(); ++k)
      if (reach[id][k]) stack.push_back(int(k));
    while (!stack.empty()) {
      const int b = stack.back();
      stack.pop_back();
      for (int a : next[id][std::size_t(b)])
        if (!reach[id][std::size_t(a)]) {
          reach[id][std::size_t(a)] = true;
          stack.push_back(a);
        }
    }
    long off = 0;
    for (bool r : reach[id]) off += !r;
    // A subsystem never present (no seed) keeps all levels: nothing to prune.
    if (off > 0 && off < long(reach[id].size())) {
      m.subsystems[id].allowed = reach[id];
      pruned += off;
    }
  }
  return pruned;
}

}  // namespace flyby::trajectory
