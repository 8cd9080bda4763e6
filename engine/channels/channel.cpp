// Channel completeness: Σ C†C against the model's physical decay, per coupled group.
#include "engine/channels/channel.h"

#include <numeric>
#include <sstream>

#include "engine/common/errors.h"

namespace flyby::channels {

namespace {

int find(std::vector<int>& parent, int i) {
  while (parent[i] != i) i = parent[i] = parent[parent[i]];
  return i;
}

void unite(std::vector<int>& parent, const std::vector<space::SubsystemId>& ids) {
  for (std::size_t k = 1; k < ids.size(); ++k) parent[find(parent, ids[k])] = find(parent, ids[0]);
}

bool subset_of(const std::vector<space::SubsystemId>& s, const std::vector<space::SubsystemId>& group) {
  for (auto id : s)
    if (std::find(group.begin(), group.end(), id) == group.end()) return false;
  return true;
}

}  // namespace

operators::Operator Channel::at(double t_us, const std::vector<operators::Complex>& controls) const {
  operators::Operator c = op;
  for (const auto& term : timed.terms()) c += term.coefficient.value(t_us, controls) * term.op;
  return c;
}

void check_channel_completeness(const std::vector<space::Subsystem>& subsystems,
                                const std::vector<Channel>& channels,
                                const operators::Operator& physical_decay,
                                double relative_tolerance) {
  using operators::Operator;
  const int n = int(subsystems.size());
  std::vector<int> parent(n);
  std::iota(parent.begin(), parent.end(), 0);
  std::vector<Operator> ctc;
  for (const auto& c : channels) {
    if (c.time_dependent()) {  // not checked here (channel.h)
      ctc.emplace_back();
      continue;
    }
    for (auto id : c.op.support())
      if (id < 0 || id >= n) throw InputError("channel '" + c.label + "' acts on an unknown subsystem");
    ctc.push_back(c.op.adjoint() * c.op);
    unite(parent, c.op.support());
  }
  // Split the decay operator into its terms so each group sees only its own part.
  std::vector<Operator> decay_terms;
  for (const auto& t : physical_decay.terms()) {
    Operator o;
    std::vector<operators::LocalFactor> f = t.factors;
    o = Operator::product(std::move(f), t.weight);
    unite(parent, o.support());
    decay_terms.push_back(std::move(o));
  }
  std::vector<std::vector<space::SubsystemId>> groups(n);
  for (int i = 0; i < n; ++i) groups[find(parent, i)].push_back(i);
  for (const auto& group : groups) {
    if (group.empty()) continue;
    space::Layout layout(&subsystems, group);
    Operator sum_ctc, decay;
    for (std::size_t k = 0; k < ctc.size(); ++k)
      if (!channels[k].time_dependent() && !channels[k].op.support().empty() && subset_of(channels[k].op.support(), group)) sum_ctc += ctc[k];
    for (const auto& d : decay_terms)
      if (!d.support().empty() && subset_of(d.support(), group)) decay += d;
    if (sum_ctc.empty() && decay.empty()) continue;
    double diff = 0, scale = 0;
    if (layout.dimension() <= 4096) {
      operators::SparseMatrix a = operators::to_sparse(sum_ctc, layout);
      operators::SparseMatrix b = operators::to_sparse(decay, layout);
      diff = operators::SparseMatrix(a - b).norm();
      scale = std::max(b.norm(), a.norm());
    } else {
      // Large group: compare the actions on a few fixed pseudo-random vectors.
      Rng rng = make_stream(0, StreamPurpose::kTest, 0);
      for (int r = 0; r < 3; ++r) {
        space::Vector v(layout.dimension());
        for (auto& x : v) x = {uniform_open0(rng) - 0.5, uniform_open0(rng) - 0.5};
        space::Vector va, vb;
        operators::apply(sum_ctc, layout, v, va);
        operators::apply(decay, layout, v, vb);
        diff = std::max(diff, (va - vb).norm());
        scale = std::max(scale, std::max(va.norm(), vb.norm()));
      }
    }
    if (!(diff <= relative_tolerance * std::max(scale, 1e-300))) {
      std::ostringstream msg;
      msg << "decay channels are incomplete: sum of C^dagger C differs from the physical decay on {";
      for (std::size_t k = 0; k < group.size(); ++k) msg << (k ? ", " : "") << subsystems[group[k]].name;
      msg << "} by " << diff << " (norm of the decay " << scale
          << "); add the missing (e.g. undetected) channel or fix the channel rates";
      throw InputError(msg.str());
    }
  }
}

}  // namespace flyby::channels
