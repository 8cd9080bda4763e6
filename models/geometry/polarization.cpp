// Polarization vectors and spherical components (see polarization.h).
#include "models/geometry/polarization.h"

#include <cmath>
#include <numbers>

#include "engine/common/errors.h"

namespace flyby::geometry {

std::string to_string(PolarizationKind kind) {
  switch (kind) {
    case PolarizationKind::kLinear: return "linear";
    case PolarizationKind::kSigmaPlus: return "sigma_plus";
    case PolarizationKind::kSigmaMinus: return "sigma_minus";
    case PolarizationKind::kJones: return "jones";
  }
  return "linear";
}

std::optional<PolarizationKind> polarization_kind_from_string(const std::string& s) {
  for (auto k : {PolarizationKind::kLinear, PolarizationKind::kSigmaPlus, PolarizationKind::kSigmaMinus,
                 PolarizationKind::kJones}) {
    if (to_string(k) == s) return k;
  }
  return std::nullopt;
}

TransverseBasis transverse_basis(const Vec3& k_in, const std::optional<Vec3>& e1_hint) {
  if (!(k_in.norm() > 0.0) || !k_in.allFinite()) throw InputError("direction vector has zero length");
  const Vec3 k = k_in.normalized();
  Vec3 ref;
  if (e1_hint) {
    ref = *e1_hint;
  } else {
    ref = Vec3::UnitX();
    if (std::abs(ref.dot(k)) > 0.9) ref = Vec3::UnitZ();
  }
  const Vec3 perp = ref - ref.dot(k) * k;
  if (perp.norm() < 1e-9 * std::max(1.0, ref.norm())) {
    throw InputError("the Jones basis vector e1 is parallel to the propagation direction");
  }
  TransverseBasis b;
  b.e1 = perp.normalized();
  b.e2 = k.cross(b.e1);
  return b;
}

CVec3 polarization_vector(const PolarizationSpec& spec, const Vec3& k) {
  const TransverseBasis b = transverse_basis(k, spec.e1_dir);
  const CVec3 e1 = b.e1.cast<Complex>();
  const CVec3 e2 = b.e2.cast<Complex>();
  const Complex i(0.0, 1.0);
  const double s = 1.0 / std::numbers::sqrt2;
  switch (spec.kind) {
    case PolarizationKind::kLinear: {
      if (spec.linear_dir) {
        const Vec3& d = *spec.linear_dir;
        if (!(d.norm() > 0.0)) throw InputError("linear polarization direction has zero length");
        const Vec3 dn = d.normalized();
        if (std::abs(dn.dot(k.normalized())) > 1e-6) {
          throw InputError("linear polarization direction is not perpendicular to the propagation direction");
        }
        return dn.cast<Complex>();
      }
      const double a = spec.linear_angle_deg * std::numbers::pi / 180.0;
      return std::cos(a) * e1 + std::sin(a) * e2;
    }
    case PolarizationKind::kSigmaPlus: return -s * (e1 + i * e2);
    case PolarizationKind::kSigmaMinus: return s * (e1 - i * e2);
    case PolarizationKind::kJones: {
      const double n = std::sqrt(std::norm(spec.jones[0]) + std::norm(spec.jones[1]));
      if (!(n > 0.0) || !std::isfinite(n)) throw InputError("Jones vector is zero");
      return (spec.jones[0] * e1 + spec.jones[1] * e2) / n;
    }
  }
  return e1;
}

std::array<Complex, 2> jones_components(const CVec3& p, const TransverseBasis& b) {
  return {b.e1.cast<Complex>().dot(p), b.e2.cast<Complex>().dot(p)};  // Eigen dot conjugates the left
}

CVec3 spherical_unit(int q) {
  const Complex i(0.0, 1.0);
  const double s = 1.0 / std::numbers::sqrt2;
  switch (q) {
    case 1: return CVec3(-s, -s * i, 0.0);
    case 0: return CVec3(0.0, 0.0, 1.0);
    case -1: return CVec3(s, -s * i, 0.0);
    default: throw InternalError("spherical_unit: q must be -1, 0 or +1");
  }
}

SphericalWeights spherical_weights(const CVec3& eps) {
  SphericalWeights w;
  for (int q = -1; q <= 1; ++q) {
    // e_q · ε without conjugation: Eigen's dot() conjugates its left argument, so use a sum.
    w[q + 1] = (spherical_unit(q).array() * eps.array()).sum();
  }
  return w;
}

double polarization_overlap(const CVec3& a, const CVec3& b) {
  const double na = a.squaredNorm(), nb = b.squaredNorm();
  if (!(na > 0.0) || !(nb > 0.0)) return 0.0;
  return std::norm(a.dot(b)) / (na * nb);
}

}  // namespace flyby::geometry
