// Cross-check of the engine tests' own Clebsch–Gordan dipole operators (GSL 3j symbols) against
// the independent implementation in models/levels (flyby::levels::LevelStructure, built for a
// custom F = 1 → F′ = 2 atom and for 87Rb F = 2 → F′ = 3 restricted to that pair). The label q
// differs by sign between the two (see engine_test_models.h); matrix elements must agree in
// magnitude, and Σ_q A_q†A_q must agree exactly (it is convention free).
#include <catch2/catch.hpp>

#include "models/levels/level_structure.h"
#include "tests/engine/engine_test_models.h"

using namespace flyby;

TEST_CASE("test dipole operators agree with LevelStructure for a closed F=1 to F'=2 atom", "[multilevel]") {
  levels::CustomAtom atom;
  atom.ground_2F = 2;
  atom.excited_2F = 4;
  const auto ls = levels::LevelStructure::from_custom(atom);
  REQUIRE(ls.dimension() == 8);
  const auto mine = test::dipole_lowering(2, 4);
  operators::LocalMatrix sum_mine = operators::LocalMatrix::Zero(8, 8), sum_theirs = sum_mine;
  for (int k = 0; k < 3; ++k) {
    const int q = k - 1;
    const Eigen::MatrixXd& theirs = ls.lowering(-q);
    CHECK((mine[k].cwiseAbs() - theirs.cwiseAbs()).norm() < 1e-12);
    sum_mine += mine[k].adjoint() * mine[k];
    sum_theirs += (theirs.transpose() * theirs).cast<operators::Complex>();
  }
  CHECK((sum_mine - sum_theirs).norm() < 1e-12);
}
