// Jitter histograms: loading, checks and sampling.
#include "models/detectors/jitter_histogram.h"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <sstream>

#include "engine/common/errors.h"

namespace flyby::detectors {

double JitterHistogram::bin_width_ps() const {
  return center_ps.size() >= 2 ? center_ps[1] - center_ps[0] : 1.0;
}
double JitterHistogram::min_offset_ps() const { return center_ps.front() - 0.5 * bin_width_ps(); }
double JitterHistogram::max_offset_ps() const { return center_ps.back() + 0.5 * bin_width_ps(); }

double JitterHistogram::mean_ps() const {
  double s = 0, w = 0;
  for (std::size_t i = 0; i < weight.size(); ++i) {
    s += weight[i] * center_ps[i];
    w += weight[i];
  }
  return s / w;
}

double JitterHistogram::variance_ps2() const {
  const double m = mean_ps();
  double s = 0, w = 0;
  for (std::size_t i = 0; i < weight.size(); ++i) {
    s += weight[i] * (center_ps[i] - m) * (center_ps[i] - m);
    w += weight[i];
  }
  const double bw = bin_width_ps();
  return s / w + bw * bw / 12.0;
}

std::optional<std::string> histogram_problem(const JitterHistogram& h) {
  if (h.center_ps.empty()) return "jitter histogram has no bins";
  if (h.center_ps.size() != h.weight.size()) return "jitter histogram: centres and weights differ in number";
  if (h.center_ps.size() > 1'000'000) return "jitter histogram has more than 10^6 bins";
  double sum = 0;
  for (std::size_t i = 0; i < h.weight.size(); ++i) {
    if (!std::isfinite(h.center_ps[i]) || std::abs(h.center_ps[i]) > 1e9) return "jitter histogram: offset not finite or beyond 1 ms";
    if (!std::isfinite(h.weight[i]) || h.weight[i] < 0) return "jitter histogram: weight not finite or negative";
    sum += h.weight[i];
  }
  if (!(sum > 0)) return "jitter histogram: weights sum to zero";
  if (h.center_ps.size() >= 2) {
    const double w = h.center_ps[1] - h.center_ps[0];
    if (!(w > 0)) return "jitter histogram: offsets must increase";
    for (std::size_t i = 1; i < h.center_ps.size(); ++i) {
      const double d = h.center_ps[i] - h.center_ps[i - 1];
      if (std::abs(d - w) > 1e-6 * w) return "jitter histogram: offsets must be equally spaced";
    }
  }
  return std::nullopt;
}

JitterHistogram load_jitter_histogram(const std::filesystem::path& path) {
  std::ifstream in(path);
  if (!in) throw InputError(path.string() + ": cannot open jitter histogram");
  JitterHistogram h;
  std::string line;
  int lineno = 0;
  bool header_seen = false;
  while (std::getline(in, line)) {
    ++lineno;
    if (line.size() > 4096) throw InputError(path.string() + ":" + std::to_string(lineno) + ": line longer than 4096 characters");
    std::replace(line.begin(), line.end(), ',', ' ');
    std::replace(line.begin(), line.end(), '\t', ' ');
    const auto first = line.find_first_not_of(" \r");
    if (first == std::string::npos || line[first] == '#') continue;
    if (std::isalpha(static_cast<unsigned char>(line[first])) && !header_seen && h.center_ps.empty()) {
      header_seen = true;
      continue;
    }
    std::istringstream ss(line);
    double c = 0, w = 0;
    std::string rest;
    if (!(ss >> c >> w) || (ss >> rest)) {
      throw InputError(path.string() + ":" + std::to_string(lineno) + ": expected two numbers 'offset_ps,weight'");
    }
    h.center_ps.push_back(c);
    h.weight.push_back(w);
  }
  if (auto p = histogram_problem(h)) throw InputError(path.string() + ": " + *p);
  return h;
}

JitterSampler::JitterSampler(JitterHistogram h) : h_(std::move(h)) {
  if (auto p = histogram_problem(h_)) throw InputError(*p);
  double s = 0;
  for (double w : h_.weight) cumulative_.push_back(s += w);
  for (double& c : cumulative_) c /= s;
  cumulative_.back() = 1.0;
}

double JitterSampler::draw_ps(Rng& rng) const {
  const double u = uniform_open0(rng);
  // First bin whose cumulative weight reaches u (u in (0,1], so a bin always exists; zero-weight
  // bins are never picked because their cumulative equals the previous one).
  const auto it = std::lower_bound(cumulative_.begin(), cumulative_.end(), u);
  const std::size_t i = static_cast<std::size_t>(it - cumulative_.begin());
  const double w = h_.bin_width_ps();
  return h_.center_ps[i] - 0.5 * w + w * (1.0 - uniform_open0(rng));
}

}  // namespace flyby::detectors
