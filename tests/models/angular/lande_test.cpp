// Landé g-factors (models/angular/lande.h) against closed forms and shared/REFERENCES.md.
#include <catch2/catch.hpp>

#include <cmath>

#include "models/angular/lande.h"

using flyby::angular::lande_gF;
using flyby::angular::lande_gJ;

TEST_CASE("g_J in LS coupling reduces to the textbook values", "[angular][lande]") {
  // Closed form with g_L = 1, g_S = 2: g_J(S1/2) = 2, g_J(P1/2) = 2/3, g_J(P3/2) = 4/3
  // (e.g. Steck's alkali D-line notes, Landé formula).
  const double eps = 4e-16;
  CHECK(std::abs(lande_gJ(0, 1, 1, 1.0, 2.0) - 2.0) <= eps);
  CHECK(std::abs(lande_gJ(2, 1, 1, 1.0, 2.0) - 2.0 / 3) <= eps);
  CHECK(std::abs(lande_gJ(2, 1, 3, 1.0, 2.0) - 4.0 / 3) <= eps);
  CHECK(lande_gJ(0, 0, 0) == 0.0);
}

TEST_CASE("ground-state g_F including g_I matches REFERENCES.md", "[angular][lande]") {
  // Source: shared/REFERENCES.md "[derived]" g_F values, computed from Steck's g_J and g_I
  // (Rubidium 87/85 and Cesium D Line Data [memory]); quoted to 7 decimals, so |Δ| ≤ 5e-8.
  const double tol = 5.0001e-8;
  CHECK(std::abs(lande_gF(2, 1, 3, 2.00233113, -0.0009951414) - (-0.5018267)) <= tol);
  CHECK(std::abs(lande_gF(4, 1, 3, 2.00233113, -0.0009951414) - 0.4998364) <= tol);
  CHECK(std::abs(lande_gF(4, 1, 5, 2.00233113, -0.00029364000) - (-0.3340644)) <= tol);
  CHECK(std::abs(lande_gF(6, 1, 5, 2.00233113, -0.00029364000) - 0.3334772) <= tol);
  CHECK(std::abs(lande_gF(6, 1, 7, 2.00254032, -0.00039885395) - (-0.2507663)) <= tol);
  CHECK(std::abs(lande_gF(8, 1, 7, 2.00254032, -0.00039885395) - 0.2499685) <= tol);
  CHECK(lande_gF(0, 3, 3, 1.3362, -0.0009951414) == 0.0);  // F = 0: no linear shift
}
