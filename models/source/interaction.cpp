// Interaction intervals and clusters (see interaction.h).
#include "models/source/interaction.h"

#include <algorithm>
#include <cmath>
#include <numeric>

#include "engine/common/errors.h"

namespace flyby::source {

double cutoff_radius_um(double waist_um, double cutoff) {
  FLYBY_CHECK(cutoff > 0.0 && cutoff < 1.0, "interaction cutoff must be in (0, 1)");
  return waist_um * std::sqrt(std::log(1.0 / cutoff));
}

std::optional<Interval> interaction_interval(const std::vector<GaussianTube>& elements, const Vec3& r0,
                                             const Vec3& v, double t_ref, double cutoff) {
  std::optional<Interval> hull;
  for (const auto& e : elements) {
    const Vec3 k = e.direction.normalized();
    const double rc = cutoff_radius_um(e.waist_um, cutoff);
    // Perpendicular offset p(t) = a + b (t − t_ref); inside while |p|² < rc².
    const Vec3 rel = r0 - e.point_um;
    const Vec3 a = rel - rel.dot(k) * k;
    const Vec3 b = v - v.dot(k) * k;
    const double bb = b.squaredNorm();
    Interval iv;
    if (bb <= 1e-300) {
      if (a.squaredNorm() >= rc * rc) continue;  // at rest (relative to the tube) outside
    } else {
      const double tmin = -a.dot(b) / bb;
      const double d2 = a.squaredNorm() - bb * tmin * tmin;
      if (d2 >= rc * rc) continue;
      const double half = std::sqrt((rc * rc - d2) / bb);
      iv.begin_us = t_ref + tmin - half;
      iv.end_us = t_ref + tmin + half;
    }
    if (!hull) {
      hull = iv;
    } else {
      hull->begin_us = std::min(hull->begin_us, iv.begin_us);
      hull->end_us = std::max(hull->end_us, iv.end_us);
    }
  }
  return hull;
}

int max_simultaneous(const Cluster& c) {
  std::vector<std::pair<double, int>> events;  // (time, +1 entry / −1 exit)
  for (const auto& m : c.members) {
    events.emplace_back(m.interval.begin_us, +1);
    events.emplace_back(m.interval.end_us, -1);
  }
  std::sort(events.begin(), events.end());  // at equal times −1 sorts before +1
  int now = 0, best = 0;
  for (const auto& e : events) {
    now += e.second;
    best = std::max(best, now);
  }
  return best;
}

std::vector<Cluster> make_clusters(const std::vector<std::optional<Interval>>& intervals) {
  std::vector<std::size_t> order;
  for (std::size_t i = 0; i < intervals.size(); ++i) {
    if (intervals[i]) order.push_back(i);
  }
  std::stable_sort(order.begin(), order.end(), [&](std::size_t x, std::size_t y) {
    return intervals[x]->begin_us < intervals[y]->begin_us;
  });
  std::vector<Cluster> out;
  for (std::size_t i : order) {
    const Interval& iv = *intervals[i];
    if (out.empty() || !(iv.begin_us < out.back().span.end_us)) {
      Cluster c;
      c.span = iv;
      out.push_back(std::move(c));
    }
    Cluster& c = out.back();
    c.span.end_us = std::max(c.span.end_us, iv.end_us);
    c.members.push_back({i, iv});
  }
  return out;
}

}  // namespace flyby::source
