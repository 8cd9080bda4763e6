// Tensor layout and operators: attach equals the Kronecker product, matrix-free application
// equals the sparse matrix, detach follows the Born rule and keeps the norm.
#include <catch2/catch.hpp>
#include <unsupported/Eigen/KroneckerProduct>

#include "engine/operators/operator.h"
#include "tests/engine/engine_test_models.h"
#include "tests/support/test_seed.h"

using namespace flyby;
using operators::Complex;

TEST_CASE("attach, apply and to_sparse agree with Kronecker products", "[space]") {
  auto rng = make_stream(test::seed("layout"), StreamPurpose::kTest, 0);
  auto random_vec = [&](int n) {
    space::Vector v(n);
    for (auto& x : v) x = Complex(uniform_open0(rng) - 0.5, uniform_open0(rng) - 0.5);
    return v;
  };
  auto random_mat = [&](int n) {
    operators::LocalMatrix m(n, n);
    for (int i = 0; i < n * n; ++i) m.data()[i] = Complex(uniform_open0(rng) - 0.5, uniform_open0(rng) - 0.5);
    return m;
  };
  std::vector<space::Subsystem> subs = {space::Subsystem::levels("a", 2), space::Subsystem::mode("m", 2),
                                        space::Subsystem::levels("b", 4)};
  space::Layout layout(&subs, {});
  space::Vector pa = random_vec(2).normalized(), pm = random_vec(3).normalized(), pb = random_vec(4).normalized();
  space::Vector psi = space::Vector::Ones(1);
  psi = layout.attach(0, psi, pa);
  psi = layout.attach(2, psi, pb);
  psi = layout.attach(1, psi, pm);  // tensor order a, b, m
  space::Vector kron = Eigen::kroneckerProduct(pa, Eigen::kroneckerProduct(pb, pm).eval()).eval();
  CHECK((psi - kron).norm() < 1e-14);
  // A product term on a and m and a local term on b.
  const auto ma = random_mat(2), mm = random_mat(3), mb = random_mat(4);
  const auto op = operators::Operator::product({{0, ma}, {1, mm}}, Complex(0.3, 0.2)) + operators::Operator::local(2, mb);
  Eigen::MatrixXcd full = Complex(0.3, 0.2) * Eigen::kroneckerProduct(ma, Eigen::kroneckerProduct(Eigen::MatrixXcd::Identity(4, 4), mm).eval()).eval() +
                          Eigen::kroneckerProduct(Eigen::MatrixXcd::Identity(2, 2), Eigen::kroneckerProduct(mb, Eigen::MatrixXcd::Identity(3, 3)).eval()).eval();
  space::Vector out;
  operators::apply(op, layout, psi, out);
  CHECK((out - full * psi).norm() < 1e-13);
  CHECK((Eigen::MatrixXcd(operators::to_sparse(op, layout)) - full).norm() < 1e-13);
  // Adjoint and product algebra.
  CHECK((Eigen::MatrixXcd(operators::to_sparse(op.adjoint() * op, layout)) - full.adjoint() * full).norm() < 1e-12);
}

TEST_CASE("detach measures with Born probabilities and keeps the norm", "[space]") {
  std::vector<space::Subsystem> subs = {space::Subsystem::levels("a", 3), space::Subsystem::levels("b", 2)};
  // |ψ⟩ = √0.2 |0⟩|0⟩ + √0.5 |1⟩|1⟩ + √0.3 |2⟩|0⟩, scaled by 0.5 (an unnormalized no-jump state).
  space::Vector psi = space::Vector::Zero(6);
  psi[0] = std::sqrt(0.2);
  psi[3] = std::sqrt(0.5);
  psi[4] = std::sqrt(0.3);
  psi *= 0.5;
  const long n = 20000;
  auto rng = make_stream(test::seed("detach"), StreamPurpose::kTest, 0);
  double counts[3] = {0, 0, 0};
  for (long k = 0; k < n; ++k) {
    space::Layout layout(&subs, {0, 1});
    int outcome = -1;
    space::Vector rest = layout.detach(0, psi, rng, outcome);
    REQUIRE(rest.size() == 2);
    REQUIRE(std::abs(rest.squaredNorm() - 0.25) < 1e-14);
    counts[outcome] += 1;
  }
  const double p[3] = {0.2, 0.5, 0.3};
  for (int a = 0; a < 3; ++a) {
    const double se = std::sqrt(p[a] * (1 - p[a]) / n);  // binomial standard error
    CHECK(std::abs(counts[a] / n - p[a]) <= 5 * se);
  }
}
