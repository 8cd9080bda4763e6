// `flyby analyze` (analysis::analyze_record) on simulated Poisson beams recovers the configured
// mean atom number from N_eff = 0.1 to 5. Expected values: g2(τ) = 1 + env(τ)/N_eff beyond the
// single-atom dynamics (H. J. Kimble, M. Dagenais and L. Mandel, Phys. Rev. A 18, 201 (1978)
// [memory, via shared/REFERENCES.md]); for areal density n of atoms crossing a weak Gaussian
// drive of 1/e² intensity radius w with peak saturation s0, N_eff = n π w² (1 + s0/3) (first order
// in s0, derived in docs/analysis.md from the two-level ρee of REFERENCES.md). Same scenario as
// record_analysis_test.cpp's beam runs, with the flux scaled.
#include <catch2/catch.hpp>
#include <cmath>
#include <filesystem>
#include <numbers>
#include <string>

#include "models/analysis/record_analysis.h"
#include "models/config/scenario_config.h"
#include "models/simulation/simulation.h"
#include "tests/engine/engine_test_models.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

namespace {

using flyby::test::ScratchDir;

constexpr double kSpeed_m_per_s = 2.0, kWaist_um = 20.0, kSlit_um = 200.0, kGamma_MHz = 6.0, kRabi_MHz = 0.6;

std::string config(std::uint64_t seed, double flux_per_s, double duration_s) {
  return R"(
[atom]
species = "custom"
ground_F = 0
excited_F = 1
gamma_MHz = 6.0
wavelength_nm = 780.0
mass_u = 87.0
ground_gF = 0.0
excited_gF = 0.0
[field]
axis_when_zero_dir = [0, 1, 0]
[[drive]]
name = "probe"
kind = "side"
direction_dir = [0, 0, 1]
polarization = "linear"
polarization_dir = [0, 1, 0]
waist_um = 20.0
rabi_MHz = 0.6
[[channel]]
name = "det"
source = "free_space"
direction_dir = [1, 0, 0]
polarization = "unpolarized"
solid_angle_sr = 4.0
efficiency_fraction = 1.0
[source]
kind = "beam"
speed_distribution = "monochromatic"
speed_m_per_s = 2.0
transverse_profile = "slit"
slit_width_um = 200
axial_extent_um = 100
flux_per_s = )" + std::to_string(flux_per_s) + R"(
[run]
duration_s = )" + std::to_string(duration_s) + "\nseed_id = " + std::to_string(seed) + R"(
relative_tolerance_fraction = 1e-4
)";
}

}  // namespace

TEST_CASE("flyby analyze recovers the configured mean atom number of Poisson beams from 0.1 to 5", "[analyze][atoms]") {
  const auto seed = flyby::test::seed("analyze atom number range");
  ScratchDir d("analyze-atom-number");
  const double s0 = 2 * (kRabi_MHz / kGamma_MHz) * (kRabi_MHz / kGamma_MHz);
  for (double n_eff : {0.1, 0.5, 2.0, 5.0}) {
    // flux = n v W with n from N_eff = n π w² (1 + s0/3).
    const double n_per_um2 = n_eff / (std::numbers::pi * kWaist_um * kWaist_um * (1 + s0 / 3));
    const double flux_per_s = n_per_um2 * kSpeed_m_per_s * 1e6 * kSlit_um;
    // Cost ∝ N_eff × duration; the relative error of N_eff is roughly constant at fixed
    // N_eff × duration for N_eff ≳ 1 and needs more pairs below.
    const double duration_s = 0.003 * std::max(1.0, 1.5 / n_eff) * (n_eff < 1 ? 2.0 : 1.0);
    const std::string name = "beam" + std::to_string(int(n_eff * 10));
    const auto s = flyby::config::check_scenario(flyby::config::parse_config(config(seed, flux_per_s, duration_s), name));
    flyby::simulation::Options so;
    so.output_path = (d / (name + ".h5")).string();
    const auto sum = flyby::simulation::simulate(s, so);
    REQUIRE(sum.ok);
    flyby::analysis::RecordAnalysisOptions o;
    o.bin_width_ns = 500;
    o.range_ns = 40000;
    o.tau_min_ns = 400;  // single-atom antibunching (≈ 1/Γ) left out: g2_1 = 1 beyond it
    o.model = "level+transit_gauss";
    o.threads = 1;
    const auto a = flyby::analysis::analyze_record(so.output_path, o);
    REQUIRE(a.atoms_effective);
    REQUIRE(std::isfinite(a.atoms_effective->value));
    REQUIRE(std::isfinite(a.atoms_effective->std_error));
    INFO("configured N_eff " << n_eff << ": analyze gives " << a.atoms_effective->value << " ± "
                             << a.atoms_effective->std_error << " (" << sum.atoms << " atoms, " << duration_s << " s)");
    CHECK(std::abs(a.atoms_effective->value - n_eff) < 5 * a.atoms_effective->std_error);
    CHECK(a.atoms_effective->std_error < 0.5 * n_eff);  // the run resolves N_eff at all
    std::filesystem::remove(so.output_path);
  }
}
