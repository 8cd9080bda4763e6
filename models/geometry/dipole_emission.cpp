// Dipole radiation pattern and free-space detector channels (see dipole_emission.h).
#include "models/geometry/dipole_emission.h"

#include <cmath>
#include <numbers>

namespace flyby::geometry {

namespace {
constexpr double kPatternNorm = 3.0 / (8.0 * std::numbers::pi);
}

double dipole_pattern(int q, const Vec3& n_frame, const CVec3& eps_frame) {
  // Project the polarizer onto the plane transverse to n (a detector only sees transverse field).
  const CVec3 n = n_frame.normalized().cast<Complex>();
  const CVec3 eps_t = eps_frame - n * (n.transpose() * eps_frame)(0);
  const SphericalWeights w = spherical_weights(eps_t);
  return kPatternNorm * std::norm(w[q + 1]);
}

double dipole_pattern_unpolarized(int q, const Vec3& n_frame) {
  const CVec3 n = n_frame.normalized().cast<Complex>();
  const CVec3 e = spherical_unit(q);
  return kPatternNorm * (1.0 - std::norm(n.dot(e)));
}

LinearCollapse free_space_channel(const std::string& name, double gamma, double solid_angle_sr, double efficiency,
                                  const CVec3& eps_frame) {
  const SphericalWeights w = spherical_weights(eps_frame);
  const double amp = std::sqrt(efficiency * gamma * kPatternNorm * solid_angle_sr);
  LinearCollapse c;
  c.channel = name;
  c.detected = true;
  c.coefficients.resize(3);
  for (int q = -1; q <= 1; ++q) c.coefficients(q + 1) = amp * std::conj(w[q + 1]);
  return c;
}

}  // namespace flyby::geometry
