// Layouts restricted by total excitation number: the kept states are exactly those with ≤ K
// excitations (counted against a brute-force enumeration and the stars-and-bars count), operators
// assembled on them equal the projection P·O·P of the full matrix, and attach/detach agree with
// the full-space operations followed by the projection.
#include <catch2/catch.hpp>

#include "engine/operators/operator.h"
#include "tests/engine/engine_test_models.h"
#include "tests/support/test_seed.h"

using namespace flyby;
using operators::Complex;

namespace {

// Projection from the full space onto the kept states of `r` (rows: kept, columns: full).
Eigen::MatrixXcd projector(const space::Layout& r) {
  Eigen::MatrixXcd p = Eigen::MatrixXcd::Zero(r.dimension(), r.full_dimension());
  for (long i = 0; i < r.dimension(); ++i) p(i, r.full_index(i)) = 1.0;
  return p;
}

}  // namespace

TEST_CASE("restricted layout keeps exactly the states with at most K excitations", "[space][restricted]") {
  // Two modes (cutoff 4) and three two-level atoms (excited = 1 excitation).
  std::vector<space::Subsystem> subs = {space::Subsystem::mode("m1", 4), space::Subsystem::mode("m2", 4)};
  for (int j = 0; j < 3; ++j) {
    subs.push_back(space::Subsystem::levels("atom", 2));
    subs.back().excitation = {0, 1};
  }
  for (int K = 0; K <= 6; ++K) {
    space::Layout r(&subs, {0, 1, 2, 3, 4}, K);
    long brute = 0;
    for (long f = 0; f < r.full_dimension(); ++f)
      if (r.excitation_of_full(f) <= K) {
        ++brute;
        REQUIRE(r.index_of_full(f).has_value());
      } else {
        REQUIRE_FALSE(r.index_of_full(f).has_value());
      }
    CHECK(r.dimension() == brute);
    CHECK(std::is_sorted(r.kept().begin(), r.kept().end()));
    if (K <= 4) {
      // Below every cutoff the count is Σ_{j=0..3} C(3, j)·#{(n1, n2): n1 + n2 ≤ K − j}
      // = Σ_j C(3, j)·C(K − j + 2, 2) (stars and bars; common practice, no source).
      auto c2 = [](long n) { return n < 2 ? 0L : n * (n - 1) / 2; };
      const long binom3[4] = {1, 3, 3, 1};
      long expect = 0;
      for (int j = 0; j <= std::min(K, 3); ++j) expect += binom3[j] * c2(K - j + 2);
      CHECK(r.dimension() == expect);
    }
  }
}

TEST_CASE("operators on a restricted layout are the projected full operators", "[space][restricted]") {
  auto rng = make_stream(test::seed("restricted operators"), StreamPurpose::kTest, 0);
  auto random_mat = [&](int n) {
    operators::LocalMatrix m(n, n);
    for (int i = 0; i < n * n; ++i) m.data()[i] = Complex(uniform_open0(rng) - 0.5, uniform_open0(rng) - 0.5);
    return m;
  };
  auto random_vec = [&](long n) {
    space::Vector v(n);
    for (auto& x : v) x = Complex(uniform_open0(rng) - 0.5, uniform_open0(rng) - 0.5);
    return v;
  };
  std::vector<space::Subsystem> subs = {space::Subsystem::mode("m", 3), space::Subsystem::levels("a", 3),
                                        space::Subsystem::levels("b", 4)};
  subs[1].excitation = {0, 1, 1};
  subs[2].excitation = {0, 0, 1, 2};
  const operators::Operator op = operators::Operator::product({{0, random_mat(4)}, {2, random_mat(4)}}, 0.7) +
                                 operators::Operator::local(1, random_mat(3), Complex(0.2, 0.1)) +
                                 operators::Operator::identity(0.3);
  for (int K = 0; K <= 4; ++K) {
    space::Layout full(&subs, {0, 1, 2}), r(&subs, {0, 1, 2}, K);
    const Eigen::MatrixXcd P = projector(r);
    const Eigen::MatrixXcd expect = P * Eigen::MatrixXcd(operators::to_sparse(op, full)) * P.transpose();
    const Eigen::MatrixXcd got = Eigen::MatrixXcd(operators::to_sparse(op, r));
    // Exact up to rounding of a few products of O(1) entries.
    CHECK((got - expect).norm() <= 1e-13 * std::max(1.0, expect.norm()));
    const space::Vector psi = random_vec(r.dimension());
    space::Vector out;
    operators::apply(op, r, psi, out);
    CHECK((out - got * psi).norm() <= 1e-13 * std::max(1.0, out.norm()));
    // Between two restrictions: rows of the K + 1 layout.
    space::Layout r1(&subs, {0, 1, 2}, K + 1);
    const Eigen::MatrixXcd between = Eigen::MatrixXcd(operators::to_sparse_between(op, r, r1));
    const Eigen::MatrixXcd expect_b = projector(r1) * Eigen::MatrixXcd(operators::to_sparse(op, full)) * P.transpose();
    CHECK((between - expect_b).norm() <= 1e-13 * std::max(1.0, expect_b.norm()));
  }
}

TEST_CASE("attach and detach on a restricted layout equal the projected full operations", "[space][restricted]") {
  auto rng = make_stream(test::seed("restricted attach"), StreamPurpose::kTest, 0);
  auto random_vec = [&](long n) {
    space::Vector v(n);
    for (auto& x : v) x = Complex(uniform_open0(rng) - 0.5, uniform_open0(rng) - 0.5);
    return v;
  };
  std::vector<space::Subsystem> subs = {space::Subsystem::mode("m", 3), space::Subsystem::levels("a", 3),
                                        space::Subsystem::levels("b", 2)};
  subs[1].excitation = {0, 1, 1};
  subs[2].excitation = {0, 1};
  const int K = 2;
  space::Layout full(&subs, {}), r(&subs, {}, K);
  space::Vector pf = space::Vector::Ones(1), pr = space::Vector::Ones(1);
  for (int id = 0; id < 3; ++id) {
    const space::Vector phi = random_vec(subs[id].dimension).normalized();
    pf = full.attach(id, pf, phi);
    pr = r.attach(id, pr, phi);
    // The restricted state is the projected product state rescaled to the previous norm.
    const space::Vector proj = projector(r) * pf;
    const double norm_before = 1.0;  // all factors normalized
    CHECK((pr - proj * std::sqrt(norm_before / proj.squaredNorm())).norm() <= 1e-13);
    CHECK(r.last_attach_dropped_fraction() == Approx(1.0 - proj.squaredNorm() / pf.squaredNorm()).margin(1e-13));
    pf = proj;                                   // continue from the projected state
    pf = projector(r).transpose() * pf;          // (embedded back into the full space)
    pf *= std::sqrt(pr.squaredNorm() / pf.squaredNorm());
  }
  // Detach the atom "a" (middle factor) from both with the same stream: same outcome, and the
  // reduced restricted state is the projection of the reduced full state.
  for (int trial = 0; trial < 20; ++trial) {
    space::Layout f2 = full, r2 = r;
    Rng ra = make_stream(test::seed("restricted attach"), StreamPurpose::kTest, 1 + trial);
    Rng rb = ra;
    int of = -1, orr = -1;
    const space::Vector df = f2.detach(1, pf, ra, of);
    const space::Vector dr = r2.detach(1, pr, rb, orr);
    REQUIRE(of == orr);
    CHECK((dr - projector(r2) * df).norm() <= 1e-12);
    CHECK(dr.squaredNorm() == Approx(pr.squaredNorm()).epsilon(1e-12));
    CHECK(r2.local_population(2, 1, dr) == Approx(f2.local_population(2, 1, df)).margin(1e-13));
  }
}
