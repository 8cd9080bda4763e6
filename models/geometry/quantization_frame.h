// The one place where lab-frame vectors become quantization-frame vectors (DESIGN.md §3).
// The quantization axis ẑ′ points along the magnetic field B; when |B| is below a threshold it is
// a user-given lab direction instead. Every direction and polarization of drives, resonator
// modes, detectors and atom velocities is given in the lab frame and passes through
// QuantizationFrame::to_frame before it meets the atom's A_q operators.
#pragma once

#include <Eigen/Dense>

namespace flyby::geometry {

using Vec3 = Eigen::Vector3d;
using CVec3 = Eigen::Vector3cd;

class QuantizationFrame {
 public:
  // Field below this magnitude counts as zero and the fallback axis is used, gauss.
  static constexpr double kZeroField_G = 1e-9;

  // field_G: lab-frame magnetic field vector in gauss. fallback_axis: lab direction used as the
  // quantization axis when |B| < kZeroField_G (need not be normalized, must be nonzero).
  // Throws flyby::InputError when the axis that would be used has zero length.
  QuantizationFrame(const Vec3& field_G, const Vec3& fallback_axis);

  // Rotation matrix whose rows are the frame axes x̂′, ŷ′, ẑ′ written in lab coordinates, so
  // v_frame = R v_lab. x̂′ is the lab x̂ (or ŷ when x̂ is nearly parallel to ẑ′) with its ẑ′
  // component removed; ŷ′ = ẑ′ × x̂′. The azimuth choice only changes phases of sublevels,
  // which no observable sees as long as all vectors go through the same frame.
  const Eigen::Matrix3d& rotation() const { return rotation_; }
  Vec3 axis_lab() const { return rotation_.row(2).transpose(); }
  double field_magnitude_G() const { return field_magnitude_G_; }
  bool uses_fallback_axis() const { return uses_fallback_; }

  Vec3 to_frame(const Vec3& lab) const { return rotation_ * lab; }
  CVec3 to_frame(const CVec3& lab) const { return rotation_.cast<std::complex<double>>() * lab; }

 private:
  Eigen::Matrix3d rotation_;
  double field_magnitude_G_ = 0.0;
  bool uses_fallback_ = false;
};

}  // namespace flyby::geometry
