// Initial sublevel populations (see initial_populations.h).
#include "models/source/initial_populations.h"

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <sstream>

#include "engine/common/errors.h"

namespace flyby::source {

namespace {
std::string half(int two_x) {
  std::ostringstream os;
  if (two_x % 2 == 0) os << two_x / 2; else os << two_x << "/2";
  return os.str();
}
}  // namespace

std::vector<double> resolve_populations(const PopulationSpec& spec, const std::vector<int>& ground_2F) {
  std::vector<int> sorted = ground_2F;
  std::sort(sorted.begin(), sorted.end());
  std::vector<int> offset;
  int n = 0;
  for (int f : sorted) {
    offset.push_back(n);
    n += f + 1;
  }
  std::vector<double> p(n, 0.0);
  if (spec.sublevels.empty()) {
    for (auto& x : p) x = 1.0 / n;
    return p;
  }
  std::vector<bool> seen(n, false);
  double sum = 0.0;
  for (const auto& s : spec.sublevels) {
    const auto it = std::find(sorted.begin(), sorted.end(), s.two_F);
    if (it == sorted.end()) {
      throw InputError("population for F = " + half(s.two_F) + ", which is not an included ground level");
    }
    if (std::abs(s.two_m) > s.two_F || (s.two_m - s.two_F) % 2 != 0) {
      throw InputError("population for m = " + half(s.two_m) + ", which is not a sublevel of F = " + half(s.two_F));
    }
    if (!(s.probability >= 0.0 && s.probability <= 1.0)) {
      throw InputError("population of F = " + half(s.two_F) + ", m = " + half(s.two_m) + " is outside [0, 1]");
    }
    const int idx = offset[it - sorted.begin()] + (s.two_m + s.two_F) / 2;
    if (seen[idx]) throw InputError("sublevel F = " + half(s.two_F) + ", m = " + half(s.two_m) + " is listed twice");
    seen[idx] = true;
    p[idx] = s.probability;
    sum += s.probability;
  }
  if (std::abs(sum - 1.0) > 1e-6) {
    std::ostringstream os;
    os << "initial populations sum to " << sum << ", not 1";
    throw InputError(os.str());
  }
  for (auto& x : p) x /= sum;
  return p;
}

int sample_sublevel(const std::vector<double>& p, Rng& rng) {
  const double u = uniform_open0(rng);
  double acc = 0.0;
  int last_nonzero = 0;
  for (std::size_t i = 0; i < p.size(); ++i) {
    if (p[i] > 0.0) last_nonzero = static_cast<int>(i);
    acc += p[i];
    if (u <= acc && p[i] > 0.0) return static_cast<int>(i);
  }
  return last_nonzero;  // u within rounding of 1
}

}  // namespace flyby::source
