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
#include "tests/engine/engine_test_models.h"
#include "tests/support/scenario_text.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

namespace {

using flyby::test::ScratchDir;

// The beam of record_analysis_test.cpp: the defaults of flyby::test::BeamScenario.
const flyby::test::BeamScenario kBeam;
const double kSpeed_m_per_s = kBeam.speed_m_per_s, kWaist_um = kBeam.waist_um, kSlit_um = *kBeam.slit_width_um,
             kGamma_MHz = kBeam.gamma_MHz, kRabi_MHz = kBeam.rabi_MHz;

// That beam at another flux.
std::string config(std::uint64_t seed, double flux_per_s, double duration_s) {
  flyby::test::BeamScenario o;
  o.seed = seed;
  o.duration_s = duration_s;
  o.flux_per_s = flux_per_s;
  o.run_lines = "relative_tolerance_fraction = 1e-4\n";
  return flyby::test::beam_scenario_text(o);
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
    const auto path = (d / (name + ".h5")).string();
    const auto sum = flyby::test::simulate_text(config(seed, flux_per_s, duration_s), name, path, 0);
    REQUIRE(sum.ok);
    flyby::analysis::RecordAnalysisOptions o;
    o.bin_width_ns = 500;
    o.range_ns = 40000;
    o.tau_min_ns = 400;  // single-atom antibunching (≈ 1/Γ) left out: g2_1 = 1 beyond it
    o.model = "level+transit_gauss";
    o.threads = 1;
    const auto a = flyby::analysis::analyze_record(path, o);
    REQUIRE(a.atoms_effective);
    REQUIRE(std::isfinite(a.atoms_effective->value));
    REQUIRE(std::isfinite(a.atoms_effective->std_error));
    INFO("configured N_eff " << n_eff << ": analyze gives " << a.atoms_effective->value << " ± "
                             << a.atoms_effective->std_error << " (" << sum.atoms << " atoms, " << duration_s << " s)");
    CHECK(std::abs(a.atoms_effective->value - n_eff) < 5 * a.atoms_effective->std_error);
    CHECK(a.atoms_effective->std_error < 0.5 * n_eff);  // the run resolves N_eff at all
    std::filesystem::remove(path);
  }
}
