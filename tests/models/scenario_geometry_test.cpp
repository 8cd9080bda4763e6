// Geometry and polarization: quantization frame, spherical components, dipole pattern,
// free-space channel bookkeeping, and the circular analyzer (models/geometry, models/resonator).
#include <catch2/catch.hpp>

#include "engine/common/errors.h"
#include <cmath>
#include <numbers>

#include "models/geometry/collapse_split.h"
#include "models/geometry/dipole_emission.h"
#include "models/geometry/polarization.h"
#include "models/geometry/quantization_frame.h"
#include "models/resonator/resonator.h"

using namespace flyby::geometry;
using flyby::resonator::OutputPort;
using flyby::resonator::ResonatorSpec;

namespace {
constexpr double kTol = 1e-12;
const double kPi = std::numbers::pi;
}  // namespace

TEST_CASE("spherical basis is the Condon–Shortley one of DESIGN.md §3", "[scenario][geometry]") {
  // e₊₁ = −(x̂ + iŷ)/√2, e₀ = ẑ, e₋₁ = (x̂ − iŷ)/√2 (Edmonds (1957) eq. 5.1.1 convention).
  const double s = 1 / std::sqrt(2.0);
  const Complex i(0, 1);
  CHECK(std::abs(spherical_unit(1)(0) - Complex(-s, 0)) < kTol);
  CHECK(std::abs(spherical_unit(1)(1) - (-s * i)) < kTol);
  CHECK(std::abs(spherical_unit(-1)(0) - Complex(s, 0)) < kTol);
  CHECK(std::abs(spherical_unit(-1)(1) - (-s * i)) < kTol);
  // Orthonormal: e_q*·e_q' = δ.
  for (int q = -1; q <= 1; ++q)
    for (int p = -1; p <= 1; ++p) CHECK(std::abs(spherical_unit(q).dot(spherical_unit(p)) - Complex(q == p)) < kTol);
  // σ+ light (ε = e₊₁) drives only A₋₁† (raises m), with weight e₋₁·e₊₁ = −1.
  const SphericalWeights w = spherical_weights(spherical_unit(1));
  CHECK(std::abs(w[0] - Complex(-1, 0)) < kTol);
  CHECK(std::abs(w[1]) < kTol);
  CHECK(std::abs(w[2]) < kTol);
}

TEST_CASE("quantization frame puts B along z and conserves weights' norm", "[scenario][geometry]") {
  const Vec3 B(0.3, -1.2, 0.7);
  QuantizationFrame f(B, Vec3::UnitZ());
  const Eigen::Matrix3d R = f.rotation();
  CHECK((R * R.transpose() - Eigen::Matrix3d::Identity()).cwiseAbs().maxCoeff() < kTol);
  CHECK(std::abs(R.determinant() - 1.0) < kTol);
  CHECK((f.to_frame(B.normalized()) - Vec3::UnitZ()).norm() < kTol);
  // Light linearly polarized along B is pure π for any B direction.
  const SphericalWeights w = spherical_weights(f.to_frame(CVec3(B.normalized().cast<Complex>())));
  CHECK(std::abs(std::abs(w[1]) - 1.0) < kTol);
  // Any unit polarization has Σ|w_q|² = 1.
  PolarizationSpec p;
  p.kind = PolarizationKind::kJones;
  p.jones = {Complex(0.3, 0.1), Complex(-0.5, 0.8)};
  const CVec3 eps = polarization_vector(p, Vec3(1, 1, 0));
  const SphericalWeights v = spherical_weights(f.to_frame(eps));
  CHECK(std::abs(std::norm(v[0]) + std::norm(v[1]) + std::norm(v[2]) - 1.0) < kTol);
  // B = 0: the user axis is used.
  QuantizationFrame g(Vec3::Zero(), Vec3(0, 2, 0));
  CHECK(g.uses_fallback_axis());
  CHECK((g.axis_lab() - Vec3::UnitY()).norm() < kTol);
  CHECK_THROWS_AS(QuantizationFrame(Vec3::Zero(), Vec3::Zero()), flyby::InputError);
}

TEST_CASE("polarization vectors: linear, circular about k, Jones; transversality enforced", "[scenario][geometry]") {
  const Vec3 k = Vec3::UnitZ();
  PolarizationSpec lin;
  lin.linear_angle_deg = 90;
  CHECK((polarization_vector(lin, k) - CVec3(0, 1, 0)).norm() < kTol);
  PolarizationSpec sp;
  sp.kind = PolarizationKind::kSigmaPlus;
  // About +ẑ, sigma_plus is exactly e₊₁.
  CHECK((polarization_vector(sp, k) - spherical_unit(1)).norm() < kTol);
  PolarizationSpec bad;
  bad.linear_dir = Vec3(0, 0, 1);
  CHECK_THROWS_AS(polarization_vector(bad, k), flyby::InputError);
  PolarizationSpec zero;
  zero.kind = PolarizationKind::kJones;
  zero.jones = {Complex(0, 0), Complex(0, 0)};
  CHECK_THROWS_AS(polarization_vector(zero, k), flyby::InputError);
}

TEST_CASE("dipole pattern: sin²θ for π, (1+cos²θ)/2 for σ, normalized over the sphere", "[scenario][geometry]") {
  // Classical dipole radiation patterns (e.g. J. D. Jackson, "Classical Electrodynamics", §9.2)
  // [memory]: dP/dΩ ∝ sin²θ for a linear dipole, ∝ (1 + cos²θ)/2 for a rotating one; with
  // prefactor 3/8π each integrates to 1 over the sphere.
  const double th = 0.7;
  const Vec3 n(std::sin(th), 0, std::cos(th));
  CHECK(std::abs(dipole_pattern_unpolarized(0, n) - 3 / (8 * kPi) * std::pow(std::sin(th), 2)) < kTol);
  CHECK(std::abs(dipole_pattern_unpolarized(1, n) - 3 / (8 * kPi) * (1 + std::pow(std::cos(th), 2)) / 2) < kTol);
  // Sphere integral by Gauss–Legendre-free midpoint rule in cos θ and φ (smooth integrand:
  // 400×400 points give < 1e-5).
  for (int q = -1; q <= 1; ++q) {
    double sum = 0;
    const int nc = 400, np = 400;
    for (int a = 0; a < nc; ++a) {
      const double c = -1 + (a + 0.5) * 2.0 / nc, s = std::sqrt(1 - c * c);
      for (int b = 0; b < np; ++b) {
        const double ph = (b + 0.5) * 2 * kPi / np;
        const Vec3 dir(s * std::cos(ph), s * std::sin(ph), c);
        // Sum of two transverse polarizations equals the unpolarized pattern.
        const TransverseBasis tb = transverse_basis(dir);
        const double pol = dipole_pattern(q, dir, tb.e1.cast<Complex>()) + dipole_pattern(q, dir, tb.e2.cast<Complex>());
        REQUIRE(std::abs(pol - dipole_pattern_unpolarized(q, dir)) < 1e-12);
        sum += pol;
      }
    }
    sum *= (2.0 / nc) * (2 * kPi / np);
    CHECK(std::abs(sum - 1.0) < 1e-5);
  }
}

TEST_CASE("free-space detectors plus undetected remainder reproduce Γ Σ A_q†A_q", "[scenario][geometry]") {
  const double gamma = 2 * kPi * 6.0666;
  QuantizationFrame f(Vec3(0.2, 0, 1), Vec3::UnitZ());
  std::vector<LinearCollapse> det;
  PolarizationSpec sp;
  sp.kind = PolarizationKind::kSigmaPlus;
  det.push_back(free_space_channel("a", gamma, 0.4, 0.6, f.to_frame(polarization_vector(sp, Vec3::UnitX()))));
  PolarizationSpec lin;
  lin.linear_angle_deg = 20;
  det.push_back(free_space_channel("b", gamma, 1.1, 0.9, f.to_frame(polarization_vector(lin, Vec3(0, 1, 1)))));
  auto rest = undetected_remainder(det, 3, gamma, "u", "test");
  auto all = det;
  all.insert(all.end(), rest.begin(), rest.end());
  CHECK(completeness_error(all, 3, gamma) < 1e-12 * gamma);
  // Collecting more than everything is refused.
  std::vector<LinearCollapse> greedy;
  for (int i = 0; i < 40; ++i) greedy.push_back(free_space_channel("g", gamma, 1.0, 1.0, f.to_frame(CVec3(0, 0, 1))));
  CHECK_THROWS_AS(undetected_remainder(greedy, 3, gamma, "u", "test"), flyby::InputError);
}

namespace {
// Amplitude with which a photon emitted by the atom's A_q transition into the two modes is seen
// by an output channel: the atom creates Σ_i conj(w_iq) a_i†|0⟩, the channel is Σ_i c_i a_i.
Complex seen(const flyby::resonator::ResonatorModel& m, const QuantizationFrame& f, int q, int channel) {
  const auto w = m.mode_weights(f);
  Complex amp = 0;
  for (int i = 0; i < 2; ++i) amp += m.channels[channel].coefficients(i) * std::conj(w[i][q + 1]);
  return amp;
}
}  // namespace

TEST_CASE("a σ+ analyzer is blind to a pure σ− transition through both birefringent modes", "[scenario][geometry]") {
  // Physics (issue 4, item 10): with B along the resonator axis, the A₊₁ transition (m_e → m_e+1,
  // σ− light) emits e₋₁ into the resonator; a σ+ analyzer (Jones ∝ e₊₁) has zero overlap with it,
  // although each linear mode alone would be seen — the two modes interfere to zero.
  for (double angle : {0.0, 30.0, 77.0}) {
    ResonatorSpec s;
    s.length_mm = 0.5;
    s.waist_um = 30;
    s.kappa_MHz = 2.5;
    s.g0_MHz = 5;
    s.mode1_angle_deg = angle;
    PolarizationSpec plus, minus;
    plus.kind = PolarizationKind::kSigmaPlus;
    minus.kind = PolarizationKind::kSigmaMinus;
    // Designated initializers: assigning literals to the members trips a GCC 12 false warning.
    const OutputPort p{.channel = "sp", .analyzer = "circ", .polarization = plus, .efficiency = 1.0};
    const OutputPort m{.channel = "sm", .analyzer = "circ", .polarization = minus, .efficiency = 1.0};
    s.outputs.push_back(p);
    s.outputs.push_back(m);
    const auto model = flyby::resonator::build_resonator(s, 780.0, 1e-29);
    QuantizationFrame up(Vec3(0, 0, 1), Vec3::UnitZ());
    CHECK(std::abs(seen(model, up, +1, 0)) < 1e-12);   // σ− light, σ+ port: dark
    CHECK(std::abs(seen(model, up, +1, 1)) > 0.5);     // σ− port sees it
    CHECK(std::abs(seen(model, up, -1, 1)) < 1e-12);   // σ+ light, σ− port: dark
    CHECK(std::abs(seen(model, up, -1, 0)) > 0.5);
    // Each linear mode alone does carry the σ− photon (what the analyzer cancels is interference).
    const auto w = model.mode_weights(up);
    CHECK(std::abs(w[0][2]) > 0.5);
    CHECK(std::abs(w[1][2]) > 0.5);
    // B reversed: the same atomic transition now emits the other helicity.
    QuantizationFrame down(Vec3(0, 0, -1), Vec3::UnitZ());
    CHECK(std::abs(seen(model, down, +1, 1)) < 1e-12);
    CHECK(std::abs(seen(model, down, +1, 0)) > 0.5);
  }
}

TEST_CASE("an unpolarized free-space detector sees the unpolarized dipole pattern", "[scenario][geometry]") {
  // Two orthogonal transverse polarizations under one channel: the diagonal of Σ C†C is
  // η Γ ΔΩ (3/8π)(1 − |n·e_q|²) for each q (sin²θ for π, (1+cos²θ)/2 for σ).
  const double gamma = 2 * kPi * 5.0, dOmega = 0.2, eta = 0.7, th = 1.1;
  const Vec3 n(std::sin(th), 0, std::cos(th));
  const TransverseBasis tb = transverse_basis(n);
  std::vector<LinearCollapse> ch = {free_space_channel("u", gamma, dOmega, eta, tb.e1.cast<Complex>()),
                                    free_space_channel("u", gamma, dOmega, eta, tb.e2.cast<Complex>())};
  const Eigen::MatrixXcd m = decay_matrix(ch, 3);
  for (int q = -1; q <= 1; ++q) {
    CHECK(std::abs(m(q + 1, q + 1).real() - eta * gamma * dOmega * dipole_pattern_unpolarized(q, n)) < 1e-12);
  }
}
