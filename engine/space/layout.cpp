// Tensor layout bookkeeping, attach (tensor product) and detach (Born-rule measurement).
#include "engine/space/layout.h"

#include "engine/common/errors.h"

namespace flyby::space {

Layout::Layout(const std::vector<Subsystem>* all, std::vector<SubsystemId> present)
    : all_(all), present_(std::move(present)) {
  recompute();
}

void Layout::recompute() {
  strides_.assign(present_.size(), 1);
  total_ = 1;
  for (int k = int(present_.size()) - 1; k >= 0; --k) {
    strides_[k] = total_;
    total_ *= (*all_)[present_[k]].dimension;
  }
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
  for (long o = 0; o < total_ / block; ++o)
    for (long i = 0; i < s; ++i) sum += std::norm(psi[o * block + level * s + i]);
  return sum;
}

}  // namespace flyby::space
