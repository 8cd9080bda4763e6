// Tensor layout bookkeeping, attach (tensor product) and detach (Born-rule measurement).
#include "engine/space/layout.h"

#include <algorithm>
#include <limits>

#include "engine/common/errors.h"

namespace flyby::space {

Layout::Layout(const std::vector<Subsystem>* all, std::vector<SubsystemId> present)
    : all_(all), present_(std::move(present)) {
  recompute();
}

Layout::Layout(const std::vector<Subsystem>* all, std::vector<SubsystemId> present, std::optional<int> max_excitation)
    : all_(all), present_(std::move(present)), max_excitation_(max_excitation) {
  FLYBY_CHECK(!max_excitation || *max_excitation >= 0, "max_excitation must be >= 0");
  recompute();
}

void Layout::recompute() {
  strides_.assign(present_.size(), 1);
  total_ = 1;
  for (int k = int(present_.size()) - 1; k >= 0; --k) {
    strides_[k] = total_;
    total_ *= (*all_)[present_[k]].dimension;
  }
  kept_.clear();
  restricted_ = max_excitation_.has_value();
  for (auto id : present_) restricted_ = restricted_ || (*all_)[id].pruned();
  if (!restricted_) return;
  // Depth-first over the subsystems in tensor order (slowest first) with the remaining
  // excitation budget: visits exactly the kept states, in increasing full index.
  const int n = int(present_.size());
  std::vector<int> budget(n + 1, 0);
  auto visit = [&](auto&& self, int p, long base, int left) -> void {
    if (p == n) {
      kept_.push_back(base);
      return;
    }
    const Subsystem& sub = (*all_)[present_[p]];
    for (int a = 0; a < sub.dimension; ++a) {
      if (!sub.is_allowed(a)) continue;
      const int e = sub.excitation_of(a);
      if (e <= left) self(self, p + 1, base + a * strides_[p], left - e);
    }
  };
  visit(visit, 0, 0, max_excitation_.value_or(std::numeric_limits<int>::max()));
}

std::optional<long> Layout::index_of_full(long full) const {
  if (!restricted()) return full >= 0 && full < total_ ? std::optional<long>(full) : std::nullopt;
  auto it = std::lower_bound(kept_.begin(), kept_.end(), full);
  if (it == kept_.end() || *it != full) return std::nullopt;
  return long(it - kept_.begin());
}

int Layout::excitation_of_full(long full) const {
  int e = 0;
  for (int p = 0; p < int(present_.size()); ++p) e += (*all_)[present_[p]].excitation_of(local_index(full, p));
  return e;
}

std::optional<int> Layout::position(SubsystemId id) const {
  for (std::size_t k = 0; k < present_.size(); ++k)
    if (present_[k] == id) return int(k);
  return std::nullopt;
}

int Layout::dimension_of(SubsystemId id) const { return (*all_)[id].dimension; }

long Layout::stride_of(SubsystemId id) const {
  auto p = position(id);
  FLYBY_CHECK(p.has_value(), "subsystem not present");
  return strides_[*p];
}

Vector Layout::attach(SubsystemId id, const Vector& psi, const Vector& phi) {
  FLYBY_CHECK(!contains(id), "attach of a subsystem that is already present");
  const int d = (*all_)[id].dimension;
  FLYBY_CHECK(phi.size() == d, "attach: local state has the wrong dimension");
  last_dropped_ = 0.0;
  if (restricted_ || (*all_)[id].pruned()) {
    // New full index = old full index · d + b (the attached factor is the fastest).
    const bool old_restricted = restricted_;
    const std::vector<long> old_kept = kept_;
    present_.push_back(id);
    recompute();
    Vector out = Vector::Zero(long(kept_.size()));
    for (long j = 0; j < long(kept_.size()); ++j) {
      const long full = kept_[std::size_t(j)];
      const long old_full = full / d;
      const int b = int(full % d);
      if (!old_restricted) {
        out[j] = psi[old_full] * phi[b];
        continue;
      }
      auto it = std::lower_bound(old_kept.begin(), old_kept.end(), old_full);
      if (it != old_kept.end() && *it == old_full) out[j] = psi[it - old_kept.begin()] * phi[b];
    }
    const double before = psi.squaredNorm(), after = out.squaredNorm();
    FLYBY_CHECK(after > 0 || before == 0, "attach: the attached state lies entirely above the excitation limit");
    if (before > 0) {
      last_dropped_ = std::max(0.0, 1.0 - after / before);
      out *= std::sqrt(before / after);
    }
    return out;
  }
  Vector out(psi.size() * d);
  for (long i = 0; i < psi.size(); ++i) out.segment(i * d, d) = psi[i] * phi;
  present_.push_back(id);
  recompute();
  return out;
}

Vector Layout::detach(SubsystemId id, const Vector& psi, Rng& rng, int& outcome) {
  auto p = position(id);
  FLYBY_CHECK(p.has_value(), "detach of a subsystem that is not present");
  const int d = (*all_)[id].dimension;
  const long s = strides_[*p];
  const long block = s * d;
  const long outer = total_ / block;
  std::vector<double> prob(d, 0.0);
  if (restricted())
    for (long j = 0; j < long(kept_.size()); ++j) prob[local_index(kept_[std::size_t(j)], *p)] += std::norm(psi[j]);
  else
  for (long o = 0; o < outer; ++o)
    for (int a = 0; a < d; ++a)
      for (long i = 0; i < s; ++i) prob[a] += std::norm(psi[o * block + a * s + i]);
  double total = 0;
  for (double q : prob) total += q;
  FLYBY_CHECK(total > 0, "detach from a zero state");
  const double u = uniform_open0(rng) * total;
  double acc = 0;
  outcome = d - 1;
  for (int a = 0; a < d; ++a) {
    acc += prob[a];
    if (u <= acc && prob[a] > 0) {
      outcome = a;
      break;
    }
  }
  while (prob[outcome] <= 0) --outcome;  // guard against rounding at the top end
  if (restricted()) {
    // Kept states with this outcome map into the kept states of the reduced layout (removing a
    // factor never raises the excitation number); new full index = old one without the digit.
    const std::vector<long> old_kept = kept_;
    const int pos = *p;
    present_.erase(present_.begin() + pos);
    recompute();
    Vector out = Vector::Zero(dimension());
    for (long j = 0; j < long(old_kept.size()); ++j) {
      const long full = old_kept[std::size_t(j)];
      if ((full / s) % d != outcome) continue;
      auto k = index_of_full((full / block) * s + full % s);
      FLYBY_CHECK(k.has_value(), "detach: restricted bases do not match");
      out[*k] = psi[j];
    }
    out *= std::sqrt(total / prob[outcome]);
    return out;
  }
  Vector out(outer * s);
  for (long o = 0; o < outer; ++o) out.segment(o * s, s) = psi.segment(o * block + outcome * s, s);
  out *= std::sqrt(total / prob[outcome]);
  present_.erase(present_.begin() + *p);
  recompute();
  return out;
}

double Layout::local_population(SubsystemId id, int level, const Vector& psi) const {
  auto p = position(id);
  FLYBY_CHECK(p.has_value(), "subsystem not present");
  const int d = (*all_)[id].dimension;
  const long s = strides_[*p];
  const long block = s * d;
  double sum = 0;
  if (restricted()) {
    for (long j = 0; j < long(kept_.size()); ++j)
      if (local_index(kept_[std::size_t(j)], *p) == level) sum += std::norm(psi[j]);
    return sum;
  }
  for (long o = 0; o < total_ / block; ++o)
    for (long i = 0; i < s; ++i) sum += std::norm(psi[o * block + level * s + i]);
  return sum;
}

}  // namespace flyby::space
