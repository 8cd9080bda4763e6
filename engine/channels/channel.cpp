// Channel completeness: Σ C†C against the model's physical decay, per coupled group.
#include "engine/channels/channel.h"

#include <algorithm>
#include <numeric>
#include <sstream>

#include "engine/common/errors.h"
#include "engine/operators/content_key.h"

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

namespace {

// Per-thread memory of groups that passed the check, keyed by everything the check of a group
// reads (see group_key); most recently passed last. A beam builds one model per atom whose groups
// (the atom alone, the modes together) repeat exactly, up to the subsystem ids, so each distinct
// group is checked once per thread instead of once per atom (docs/performance.md, thermal-beam
// reference). Only passes are remembered; the outcome for a key is a deterministic function of
// the key, so the cache changes no result, only the time.
struct PassedGroups {
  std::vector<std::vector<double>> keys;
  std::size_t hits = 0;
  static constexpr std::size_t kCapacity = 32;
};

PassedGroups& passed_groups() {
  thread_local PassedGroups p;
  return p;
}

// Exact description (no hashing) of what the check of one group depends on: the tolerance, the
// group's subsystems (dimension, allowed levels, excitation numbers — not their names or ids)
// and every channel and decay term on the group, with targets as positions in the group.
std::vector<double> group_key(const std::vector<space::Subsystem>& subsystems, const std::vector<space::SubsystemId>& group,
                              const std::vector<const operators::Operator*>& channel_ops,
                              const std::vector<const operators::Operator*>& decay_terms, double relative_tolerance) {
  std::vector<double> key;
  const auto position_in_group = [&](space::SubsystemId id) {
    return double(std::find(group.begin(), group.end(), id) - group.begin());
  };
  auto op_key = [&](const operators::Operator& op) { operators::append_content_key(op, position_in_group, key); };
  key.push_back(relative_tolerance);
  key.push_back(double(group.size()));
  for (auto id : group) {
    const auto& sub = subsystems[std::size_t(id)];
    key.push_back(double(sub.dimension));
    for (int k = 0; k < sub.dimension; ++k) key.push_back(double(sub.excitation_of(k)) + (sub.is_allowed(k) ? 0.0 : 0.5));
  }
  key.push_back(double(channel_ops.size()));
  for (const auto* op : channel_ops) op_key(*op);
  key.push_back(double(decay_terms.size()));
  for (const auto* op : decay_terms) op_key(*op);
  return key;
}

}  // namespace

std::size_t channel_completeness_cache_hits() { return passed_groups().hits; }

void check_channel_completeness(const std::vector<space::Subsystem>& subsystems,
                                const std::vector<Channel>& channels,
                                const operators::Operator& physical_decay,
                                double relative_tolerance) {
  using operators::Operator;
  const int n = int(subsystems.size());
  std::vector<int> parent(n);
  std::iota(parent.begin(), parent.end(), 0);
  for (const auto& c : channels) {
    if (c.time_dependent()) continue;  // not checked here (channel.h)
    for (auto id : c.op.support())
      if (id < 0 || id >= n) throw InputError("channel '" + c.label + "' acts on an unknown subsystem");
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
  PassedGroups& passed = passed_groups();
  for (const auto& group : groups) {
    if (group.empty()) continue;
    std::vector<const Operator*> group_channels, group_decay;
    for (const auto& c : channels)
      if (!c.time_dependent() && !c.op.support().empty() && subset_of(c.op.support(), group)) group_channels.push_back(&c.op);
    for (const auto& d : decay_terms)
      if (!d.support().empty() && subset_of(d.support(), group)) group_decay.push_back(&d);
    if (group_channels.empty() && group_decay.empty()) continue;
    std::vector<double> key = group_key(subsystems, group, group_channels, group_decay, relative_tolerance);
    const auto seen = std::find(passed.keys.begin(), passed.keys.end(), key);
    if (seen != passed.keys.end()) {
      std::rotate(seen, seen + 1, passed.keys.end());
      ++passed.hits;
      continue;
    }
    space::Layout layout(&subsystems, group);
    Operator sum_ctc, decay;
    for (const auto* c : group_channels) sum_ctc += c->adjoint() * *c;
    for (const auto* d : group_decay) decay += *d;
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
    if (passed.keys.size() >= PassedGroups::kCapacity) passed.keys.erase(passed.keys.begin());
    passed.keys.push_back(std::move(key));
  }
}

}  // namespace flyby::channels
