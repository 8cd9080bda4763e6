// The built-in master-equation solver against the weak-drive closed forms for one and two atoms
// in a resonantly driven resonator (G. Rempe et al., Phys. Rev. Lett. 67, 1727 (1991); the
// formulas and [derived] check values are in shared/REFERENCES.md).
#include <catch2/catch.hpp>
#include <cmath>

#include "engine/master/master_solver.h"
#include "tests/engine/engine_test_models.h"

using namespace flyby;

namespace {

struct WeakDrive {
  double g, kappa, gamma;
  int n;
  double c1() const { return g * g / (kappa * gamma); }
  double c() const { return n * c1(); }
  double c1p() const {
    const double xi = 2 * kappa / gamma;
    return c1() * xi / (1 + xi);
  }
  double k() const { return 2 * c() * 2 * c1p() / (1 + 2 * c() - 2 * c1p()); }
  // g2(τ) = {1 − K e^{−(κ+Γ/2)τ/2}[cos Ω′τ + ((κ+Γ/2)/(2Ω′)) sin Ω′τ]}², Ω′ = √(N g² − (κ−Γ/2)²/4).
  double g2(double tau) const {
    const double s = kappa + gamma / 2;
    const double w = std::sqrt(n * g * g - (kappa - gamma / 2) * (kappa - gamma / 2) / 4);
    const double b = 1 - k() * std::exp(-s * tau / 2) * (std::cos(w * tau) + s / (2 * w) * std::sin(w * tau));
    return b * b;
  }
  double photons(double drive) const {
    const double x = drive / (kappa * (1 + 2 * c()));
    return x * x;
  }
};

double me_g2(const trajectory::Model& m, double tau) {
  master::Options o;
  o.rtol = 1e-11;
  o.atol = 1e-16;
  master::MasterSolver solver(m, o);
  return solver.g2(0, 0, {tau})[0];
}

}  // namespace

TEST_CASE("closed forms reproduce the check values of REFERENCES.md", "[resonator]") {
  // [derived] values listed in REFERENCES.md for the Rempe et al. weak-drive formulas.
  CHECK(WeakDrive{1, 1, 1, 1}.g2(0) == Approx(0.36).margin(1e-6));
  CHECK(WeakDrive{1, 1, 1, 2}.g2(0) == Approx(0.206612).margin(1e-6));
  CHECK(WeakDrive{2, 1, 1, 1}.g2(0) == Approx(113.13).margin(0.01));
  CHECK(WeakDrive{0.3, 1, 1, 1}.g2(0) == Approx(0.959661).margin(1e-6));
  const double taus[] = {0.5, 1, 2, 3, 6};
  const double values[] = {0.136712, 0.007980, 0.755881, 1.284322, 0.981018};
  for (int i = 0; i < 5; ++i) CHECK(WeakDrive{1, 1, 1, 1}.g2(taus[i]) == Approx(values[i]).margin(1e-6));
}

TEST_CASE("master equation reproduces the weak-drive resonator g2 for one and two atoms", "[resonator][master]") {
  // Weak drive E = 1e-3 κ: the closed forms hold to second order in the amplitudes; the next
  // corrections are O(⟨a†a⟩) ~ 1e-7 relative (times g2 sensitivity), far below the 1e-4 used.
  const double drive = 1e-3;
  struct Case { double g; int n; };
  for (Case c : {Case{1, 1}, Case{1, 2}, Case{2, 1}, Case{0.3, 1}}) {
    const WeakDrive w{c.g, 1, 1, c.n};
    const auto model = test::resonator(c.g, 1, 1, drive, c.n, 3, 10);
    master::MasterSolver solver(model);
    const auto rho = solver.steady_state();
    const operators::LocalMatrix a = test::annihilation(3);
    const double photons = (solver.matrix(operators::Operator::local(0, a.adjoint() * a)) * rho).trace().real();
    INFO("g " << c.g << " N " << c.n);
    REQUIRE(std::isfinite(photons));
    CHECK(photons == Approx(w.photons(drive)).epsilon(1e-5));
    const double g20 = me_g2(model, 0.0);
    REQUIRE(std::isfinite(g20));
    CHECK(g20 == Approx(w.g2(0)).epsilon(1e-4));
    if (c.g == 1.0) {
      std::vector<double> taus = {0.5, 1, 2, 3, 6};
      auto g2 = solver.g2(0, 0, taus);
      for (std::size_t i = 0; i < taus.size(); ++i) {
        INFO("tau " << taus[i]);
        CHECK(g2[i] == Approx(w.g2(taus[i])).margin(1e-4));
      }
    }
  }
}
