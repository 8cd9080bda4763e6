// One atom's view of a scenario: coupling along its path (Gaussian envelope, motion along the
// standing wave for a tilted beam) and the reference-frame energies (models/scenario).
#include <catch2/catch.hpp>
#include <cmath>
#include <numbers>

#include "engine/common/errors.h"
#include "engine/common/units.h"
#include "models/config/scenario_config.h"
#include "models/scenario/atom_view.h"

using namespace flyby;

namespace {
const std::string kConfig = R"([atom]
species = "Rb85"
ground_F = [2, 3]
excited_F = [3, 4]
reference_ground_F = 3
reference_excited_F = 4
[field]
B_G = [0, 0, 1e-6]
[resonator]
length_mm = 0.5
waist_um = 30
kappa_MHz = 2
[[drive]]
name = "pump"
kind = "side"
direction_dir = [1, 0, 0]
polarization_dir = [0, 0, 1]
waist_um = 40
rabi_MHz = 2
detuning_MHz = 5
[[channel]]
name = "H"
source = "resonator"
[source]
kind = "beam"
oven_temperature_K = 400
tilt_deg = 20
slit_width_um = 100
flux_per_s = 1e5
[run]
duration_s = 1e-3
)";
}  // namespace

TEST_CASE("coupling along a tilted path: Gaussian envelope and standing-wave crossings", "[scenario][atom_view]") {
  const auto s = config::check_scenario(config::parse_config(kConfig, "view.toml"));
  const double th = 20 * std::numbers::pi / 180, v = 300, b = 12;
  source::Arrival a;
  a.position_um = geometry::Vec3(0, b, 0);
  a.velocity_m_per_s = v * geometry::Vec3(std::cos(th), 0, std::sin(th));
  scenario::AtomView view(s, a);
  const double g0 = s.resonator->g0_rad_per_us;
  // At t_ref the atom is at the antinode z = 0 with impact parameter b: g = g0 exp(−b²/w0²).
  CHECK(std::abs(view.resonator_coupling(0.0) - g0 * std::exp(-b * b / 900.0)) < 1e-12 * g0);
  // Motion along the axis at v sin θ: cos(kz) crosses zero every π/(k v sinθ) (the Doppler
  // components ±k v_z of the standing wave).
  const double k = 2 * std::numbers::pi / (s.levels.wavelength_nm() * 1e-3);
  const double period = std::numbers::pi / (k * v * std::sin(th));
  auto g = [&](double t) { return view.resonator_coupling(t).real(); };
  std::vector<double> zeros;
  for (double t = 0; zeros.size() < 4; t += period / 20) {
    if (g(t) * g(t + period / 20) < 0) {
      double lo = t, hi = t + period / 20;
      for (int i = 0; i < 60; ++i) {
        const double mid = 0.5 * (lo + hi);
        (g(lo) * g(mid) <= 0 ? hi : lo) = mid;
      }
      zeros.push_back(lo);
    }
  }
  CHECK(std::abs(zeros[0] - period / 2) < 1e-9 * period);
  for (std::size_t i = 1; i < zeros.size(); ++i) CHECK(std::abs(zeros[i] - zeros[i - 1] - period) < 1e-9 * period);
  // The side drive along x sees the x velocity component: Δ − k v cosθ.
  CHECK(std::abs(view.drive_detuning_rad_per_us(0) -
                 (units::angular_from_MHz(5.0) - k * v * std::cos(th))) < 1e-9);
  // π-polarized drive (along B = ẑ): only q = 0.
  CHECK(std::abs(std::abs(view.drive_weights(0)[1]) - 1.0) < 1e-12);
  CHECK(std::abs(view.drive_rabi_rad_per_us(0, 0.0) - units::angular_from_MHz(2.0) * std::exp(-b * b / 1600.0)) < 1e-12);
}

TEST_CASE("reference-frame energies put the reference transition at zero", "[scenario][atom_view]") {
  const auto s = config::check_scenario(config::parse_config(kConfig, "view.toml"));
  const auto e = scenario::reference_frame_energies_rad_per_us(s);
  const auto& sl = s.levels.sublevels();
  auto energy = [&](bool excited, int two_F, int two_m) {
    for (std::size_t i = 0; i < sl.size(); ++i)
      if (sl[i].excited == excited && sl[i].two_F == two_F && sl[i].two_m == two_m) return e[i];
    FAIL("sublevel not found");
    return 0.0;
  };
  // B ≈ 0: F = 3, m = 0 and F′ = 4, m = 0 both at zero.
  CHECK(std::abs(energy(false, 6, 0)) < 1e-6);
  CHECK(std::abs(energy(true, 8, 0)) < 1e-6);
  // 85Rb F′ = 4 − 3 splitting 120.640 MHz (Steck, "Rubidium 85 D Line Data" [memory],
  // REFERENCES.md); the levels helper computes it from A and B, agreement to 0.01 MHz.
  CHECK(std::abs(units::MHz_from_angular(energy(true, 6, 0)) + 120.640) < 0.01);
  // Ground F = 2 lies 3035.7 MHz below F = 3: 3A(S1/2) = 3 × 1011.9108130 MHz (Steck [memory]).
  CHECK(std::abs(units::MHz_from_angular(energy(false, 4, 0)) + 3 * 1011.9108130) < 1e-3);
}

TEST_CASE("field gradient: local field along B sets the ground Zeeman splitting", "[scenario][atom_view]") {
  std::string text = kConfig;
  text.replace(text.find("B_G = [0, 0, 1e-6]"), 18,
               "B_G = [0, 0, 1.0]\ngradient_G_per_mm = [[-0.5, 0, 0], [0, -0.5, 0], [0, 0, 1.0]]");
  const auto s = config::check_scenario(config::parse_config(text, "grad.toml"));
  source::Arrival a;
  a.position_um = geometry::Vec3(0, 0, 200);  // 0.2 mm along B: B∥ = 1 + 1.0 × 0.2 = 1.2 G
  scenario::AtomView view(s, a);
  CHECK(std::abs(view.field_along_axis_G(0.0) - 1.2) < 1e-12);
  const auto e = view.energies_at_rad_per_us(0.0);
  const auto& sl = s.levels.sublevels();
  double ep = 0, em = 0;
  for (std::size_t i = 0; i < sl.size(); ++i) {
    if (!sl[i].excited && sl[i].two_F == 6 && sl[i].two_m == 2) ep = e[i];
    if (!sl[i].excited && sl[i].two_F == 6 && sl[i].two_m == -2) em = e[i];
  }
  // Beat between m = ±1 of 85Rb F = 3: 2 g_F μB B/h with g_F = +0.3334772 (REFERENCES.md
  // [derived]) and μB/h = 1.39962449361 MHz/G (CODATA 2018).
  const double expected_MHz = 2 * 0.3334772 * 1.39962449361 * 1.2;
  CHECK(std::abs(units::MHz_from_angular(ep - em) / expected_MHz - 1.0) < 2e-6);
  // Off the axis in the transverse plane the field along B is unchanged (∂Bz/∂x = 0 here).
  a.position_um = geometry::Vec3(300, 0, 0);
  CHECK(std::abs(scenario::AtomView(s, a).field_along_axis_G(0.0) - 1.0) < 1e-12);
}

TEST_CASE("field gradient must satisfy Maxwell's equations and needs B ≠ 0", "[scenario][atom_view][config]") {
  auto err = [](const std::string& grad, const std::string& b) {
    std::string text = kConfig;
    text.replace(text.find("B_G = [0, 0, 1e-6]"), 18, "B_G = " + b + "\ngradient_G_per_mm = " + grad);
    try {
      config::parse_config(text, "grad.toml");
    } catch (const InputError& e) {
      return std::string(e.what());
    }
    return std::string();
  };
  CHECK_THAT(err("[[0, 1, 0], [0, 0, 0], [0, 0, 0]]", "[0, 0, 1]"), Catch::Contains("curl B = 0"));
  CHECK_THAT(err("[[1, 0, 0], [0, 1, 0], [0, 0, 1]]", "[0, 0, 1]"), Catch::Contains("div B = 0"));
  CHECK_THAT(err("[[1, 0, 0], [0, 1, 0], [0, 0, -2]]", "[0, 0, 0]"), Catch::Contains("nonzero field.B_G"));
  CHECK_THAT(err("[[1, 0, 0], [0, 1, 0], [0, 0, -2]]", "[0, 0, 0]"), Catch::Contains("grad.toml:9"));
  CHECK(err("[[1, 0, 0], [0, 1, 0], [0, 0, -2]]", "[0, 0, 1]").empty());
}
