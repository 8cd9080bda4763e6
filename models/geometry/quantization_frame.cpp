// Lab → quantization frame rotation (see quantization_frame.h).
#include "models/geometry/quantization_frame.h"

#include <cmath>

#include "engine/common/errors.h"

namespace flyby::geometry {

QuantizationFrame::QuantizationFrame(const Vec3& field_G, const Vec3& fallback_axis) {
  field_magnitude_G_ = field_G.norm();
  Vec3 z;
  if (field_magnitude_G_ >= kZeroField_G) {
    z = field_G / field_magnitude_G_;
  } else {
    if (!(fallback_axis.norm() > 0.0) || !fallback_axis.allFinite()) {
      throw InputError("field: B is zero and the quantization axis (field.axis_when_zero_dir) has zero length");
    }
    z = fallback_axis.normalized();
    uses_fallback_ = true;
  }
  Vec3 ref = Vec3::UnitX();
  if (std::abs(ref.dot(z)) > 0.9) ref = Vec3::UnitY();
  const Vec3 x = (ref - ref.dot(z) * z).normalized();
  const Vec3 y = z.cross(x);
  rotation_.row(0) = x.transpose();
  rotation_.row(1) = y.transpose();
  rotation_.row(2) = z.transpose();
}

}  // namespace flyby::geometry
