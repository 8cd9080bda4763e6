// The built-in master-equation solver against an independent numpy/scipy computation
// (tests/reference/multilevel_master.py, Clebsch–Gordan coefficients from SymPy) for an
// F = 1 → F′ = 2 atom in a magnetic field tilted from the drive polarization; plus the
// Clebsch–Gordan helper of the tests against Edmonds/REFERENCES.md values and the sum rule.
#include <catch2/catch.hpp>
#include <cmath>
#include <cstdio>
#include <nlohmann/json.hpp>
#include <sstream>

#include "engine/master/master_solver.h"
#include "tests/engine/engine_test_models.h"

using namespace flyby;

namespace {

nlohmann::json run_reference(const test::MultilevelParams& p, const std::vector<double>& taus) {
  std::ostringstream cmd;
  cmd.precision(17);
  cmd << FLYBY_TEST_PYTHON << " " << FLYBY_SOURCE_DIR << "/tests/reference/multilevel_master.py " << p.gamma << " "
      << p.omega << " " << p.delta << " " << p.theta << " " << p.zeeman_g << " " << p.zeeman_e;
  for (double t : taus) cmd << " " << t;
  FILE* f = popen(cmd.str().c_str(), "r");
  REQUIRE(f != nullptr);
  std::string out;
  char buf[4096];
  while (std::size_t n = fread(buf, 1, sizeof buf, f)) out.append(buf, n);
  REQUIRE(pclose(f) == 0);
  return nlohmann::json::parse(out);
}

}  // namespace

TEST_CASE("Clebsch-Gordan helper matches Edmonds and the sum rule", "[multilevel]") {
  // Values from REFERENCES.md ([derived, exact], Condon–Shortley; Edmonds 1957).
  CHECK(test::clebsch_gordan(1, -1, 1, 1, 0, 0) == Approx(-std::sqrt(0.5)).margin(1e-14));
  CHECK(test::clebsch_gordan(2, 0, 1, 1, 1, 1) == Approx(-std::sqrt(1.0 / 3)).margin(1e-14));
  CHECK(test::clebsch_gordan(2, 2, 2, -2, 4, 0) == Approx(std::sqrt(1.0 / 6)).margin(1e-14));
  CHECK(test::clebsch_gordan(2, 0, 2, 0, 2, 0) == Approx(0.0).margin(1e-14));
  CHECK(test::clebsch_gordan(3, -1, 2, 2, 3, 1) == Approx(-std::sqrt(8.0 / 15)).margin(1e-14));
  CHECK(test::clebsch_gordan(3, 1, 2, 0, 5, 1) == Approx(std::sqrt(3.0 / 5)).margin(1e-14));
  // Σ_q A_q†A_q = projector on the excited level (CG orthonormality) for F=1→2 and F=2→3.
  for (auto [f, fp] : {std::pair{2, 4}, std::pair{4, 6}}) {
    auto a = test::dipole_lowering(f, fp);
    operators::LocalMatrix s = operators::LocalMatrix::Zero(a[0].rows(), a[0].cols());
    for (const auto& m : a) s += m.adjoint() * m;
    operators::LocalMatrix pe = operators::LocalMatrix::Zero(s.rows(), s.cols());
    for (int j = f + 1; j < s.rows(); ++j) pe(j, j) = 1;
    CHECK((s - pe).norm() < 1e-13);
  }
}

TEST_CASE("master equation of a multilevel atom in a tilted field matches numpy/scipy", "[multilevel][master]") {
  const test::MultilevelParams p;
  const std::vector<double> taus = {0.0, 0.3, 1.0, 2.5, 5.0};
  const auto ref = run_reference(p, taus);
  const auto model = test::multilevel(p, 10);
  master::Options o;
  o.rtol = 1e-11;
  o.atol = 1e-13;
  master::MasterSolver solver(model, o);
  const auto rho = solver.steady_state();
  const int d = int(rho.rows());
  REQUIRE(d == 8);
  double max_diff = 0;
  for (int i = 0; i < d; ++i)
    for (int j = 0; j < d; ++j) {
      const operators::Complex r(ref["rho_re"][i * d + j].get<double>(), ref["rho_im"][i * d + j].get<double>());
      REQUIRE(std::isfinite(std::abs(rho(i, j))));
      max_diff = std::max(max_diff, std::abs(rho(i, j) - r));
    }
  INFO("max |rho - rho_scipy| = " << max_diff);
  CHECK(max_diff < 1e-10);  // both are direct linear solves: agreement near rounding level
  for (int a = 0; a < 3; ++a) {
    CHECK(solver.rate(a) == Approx(ref["rates"][a].get<double>()).epsilon(1e-9));
    for (int b = 0; b < 3; ++b) {
      const auto g2 = solver.g2(a, b, taus);
      const auto& r = ref["g2"][std::to_string(a) + std::to_string(b)];
      for (std::size_t k = 0; k < taus.size(); ++k) {
        INFO("channels " << a << " -> " << b << " tau " << taus[k]);
        // ODE with rtol 1e-11 against scipy's expm: agreement to ~1e-8.
        CHECK(g2[k] == Approx(r[k].get<double>()).margin(1e-7));
      }
    }
  }
}
