// Wigner 3j/6j symbols and Clebsch–Gordan coefficients (models/angular/wigner.h) against two
// independent reference implementations — GSL (gsl_sf_coupling_3j/6j, Debian libgsl-dev) and
// SymPy (sympy.physics.wigner, exact arithmetic, Debian python3-sympy, via
// tests/reference/wigner_sympy.py) — against exact values of Edmonds (1957) listed in
// shared/REFERENCES.md, and against the orthogonality/completeness relations.
#include <catch2/catch.hpp>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_sf_coupling.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <random>
#include <sstream>
#include <string>
#include <unistd.h>
#include <vector>

#include "engine/common/errors.h"
#include "engine/common/random.h"
#include "models/angular/wigner.h"
#include "tests/support/test_seed.h"

using flyby::angular::clebsch_gordan;
using flyby::angular::triangle;
using flyby::angular::wigner_3j;
using flyby::angular::wigner_6j;

namespace {

// The accuracy the header promises up to j = 10 (values are ≤ 1 in magnitude, so absolute).
constexpr double kTol = 1e-13;

struct GslOff {
  GslOff() { gsl_set_error_handler_off(); }
};
const GslOff kGslOff;

double gsl_3j(int a, int b, int c, int d, int e, int f) {
  gsl_sf_result r;
  if (gsl_sf_coupling_3j_e(a, b, c, d, e, f, &r) != GSL_SUCCESS) return std::nan("");
  return r.val;
}
double gsl_6j(int a, int b, int c, int d, int e, int f) {
  gsl_sf_result r;
  if (gsl_sf_coupling_6j_e(a, b, c, d, e, f, &r) != GSL_SUCCESS) return std::nan("");
  return r.val;
}

// Runs the SymPy reference script on `requests` (one per line) and returns its values.
std::vector<double> sympy_values(const std::vector<std::string>& requests) {
  char path[] = "/tmp/flyby_wigner_XXXXXX";
  const int fd = mkstemp(path);
  REQUIRE(fd >= 0);
  {
    std::ofstream f(path);
    for (const auto& r : requests) f << r << "\n";
  }
  close(fd);
  const std::string cmd = std::string(FLYBY_TEST_PYTHON) + " " + FLYBY_SOURCE_DIR +
                          "/tests/reference/wigner_sympy.py < " + path;
  FILE* p = popen(cmd.c_str(), "r");
  REQUIRE(p != nullptr);
  std::vector<double> out;
  char buf[256];
  while (std::fgets(buf, sizeof buf, p)) out.push_back(std::strtod(buf, nullptr));
  const int rc = pclose(p);
  std::remove(path);
  INFO("command: " << cmd);
  REQUIRE(rc == 0);  // python3-sympy missing is a failure, not a skip: the check must run in CI
  REQUIRE(out.size() == requests.size());
  return out;
}

}  // namespace

TEST_CASE("3j symbols agree with GSL for every argument up to j = 4", "[angular][gsl]") {
  // Reference: GSL gsl_sf_coupling_3j (independent implementation). Every (j1 j2 j3) with
  // 2j ≤ 8 and every (m1 m2 m3) with |m| ≤ j, including ones that break m1+m2+m3 = 0.
  long checked = 0;
  double max_diff = 0.0;
  for (int a = 0; a <= 8; ++a)
    for (int b = 0; b <= 8; ++b)
      for (int c = 0; c <= 8; ++c)
        for (int d = -a; d <= a; d += 2)
          for (int e = -b; e <= b; e += 2)
            for (int f = -c; f <= c; f += 2) {
              const double ours = wigner_3j(a, b, c, d, e, f);
              const double ref = gsl_3j(a, b, c, d, e, f);
              REQUIRE(std::isfinite(ours));
              REQUIRE(std::isfinite(ref));
              max_diff = std::max(max_diff, std::abs(ours - ref));
              if (std::abs(ours - ref) > kTol) {
                FAIL_CHECK("3j(" << a << " " << b << " " << c << "; " << d << " " << e << " " << f << ")/2: "
                                 << ours << " vs GSL " << ref);
              }
              ++checked;
            }
  INFO("checked " << checked << " 3j symbols, max |diff| " << max_diff);
  CHECK(checked == 45 * 45 * 45);  // (Σ_{2j=0..8} (2j+1))³ argument sets
  CHECK(max_diff <= kTol);
}

TEST_CASE("6j symbols agree with GSL for every argument up to j = 4", "[angular][gsl]") {
  // Reference: GSL gsl_sf_coupling_6j. All 9^6 argument sets with 2j ≤ 8.
  long nonzero = 0;
  double max_diff = 0.0;
  for (int a = 0; a <= 8; ++a)
    for (int b = 0; b <= 8; ++b)
      for (int c = 0; c <= 8; ++c)
        for (int d = 0; d <= 8; ++d)
          for (int e = 0; e <= 8; ++e)
            for (int f = 0; f <= 8; ++f) {
              const double ours = wigner_6j(a, b, c, d, e, f);
              const double ref = gsl_6j(a, b, c, d, e, f);
              REQUIRE(std::isfinite(ours));
              REQUIRE(std::isfinite(ref));
              max_diff = std::max(max_diff, std::abs(ours - ref));
              if (std::abs(ours - ref) > kTol) {
                FAIL_CHECK("6j{" << a << " " << b << " " << c << "; " << d << " " << e << " " << f << "}/2: "
                                 << ours << " vs GSL " << ref);
              }
              if (ours != 0.0) ++nonzero;
            }
  INFO("nonzero 6j symbols " << nonzero << ", max |diff| " << max_diff);
  CHECK(nonzero > 10000);
  CHECK(max_diff <= kTol);
}

TEST_CASE("3j and 6j spot checks up to j = 10 against GSL", "[angular][gsl]") {
  // Reference: GSL. Random valid arguments with j ≤ 10 from a seeded stream. GSL itself
  // evaluates the Racah sum in double precision, so for j = 10 its own error can approach
  // ~1e-14 relative to the largest term; the bound stays the promised 1e-13 absolute.
  auto rng = flyby::make_stream(flyby::test::seed("wigner spot checks"), flyby::StreamPurpose::kTest, 1);
  std::uniform_int_distribution<int> j2(0, 20);
  int n3 = 0, n6 = 0;
  while (n3 < 3000) {
    const int a = j2(rng), b = j2(rng), c = j2(rng);
    if (!triangle(a, b, c)) continue;
    std::uniform_int_distribution<int> ma(0, a), mb(0, b);
    const int d = 2 * ma(rng) - a, e = 2 * mb(rng) - b, f = -d - e;
    if (std::abs(f) > c) continue;
    const double ours = wigner_3j(a, b, c, d, e, f), ref = gsl_3j(a, b, c, d, e, f);
    REQUIRE(std::isfinite(ref));
    INFO("3j(" << a << " " << b << " " << c << "; " << d << " " << e << " " << f << ")/2");
    REQUIRE(std::abs(ours - ref) <= kTol);
    ++n3;
  }
  while (n6 < 3000) {
    std::array<int, 6> j{};
    for (auto& x : j) x = j2(rng);
    if (!triangle(j[0], j[1], j[2]) || !triangle(j[0], j[4], j[5]) || !triangle(j[3], j[1], j[5]) ||
        !triangle(j[3], j[4], j[2]))
      continue;
    const double ours = wigner_6j(j[0], j[1], j[2], j[3], j[4], j[5]);
    const double ref = gsl_6j(j[0], j[1], j[2], j[3], j[4], j[5]);
    REQUIRE(std::isfinite(ref));
    INFO("6j{" << j[0] << " " << j[1] << " " << j[2] << "; " << j[3] << " " << j[4] << " " << j[5] << "}/2");
    REQUIRE(std::abs(ours - ref) <= kTol);
    ++n6;
  }
}

TEST_CASE("3j, 6j and CG agree with SymPy's exact values", "[angular][sympy]") {
  // Reference: sympy.physics.wigner (exact rational arithmetic, evaluated to 25 digits) run by
  // tests/reference/wigner_sympy.py under FLYBY_TEST_PYTHON. All 3j with 2j ≤ 4 exhaustively,
  // plus seeded random 3j/6j/CG with j ≤ 10 (a subset keeps the CI time near one second).
  std::vector<std::string> req;
  std::vector<double> ours;
  auto add3 = [&](int a, int b, int c, int d, int e, int f) {
    std::ostringstream s;
    s << "3j " << a << " " << b << " " << c << " " << d << " " << e << " " << f;
    req.push_back(s.str());
    ours.push_back(wigner_3j(a, b, c, d, e, f));
  };
  for (int a = 0; a <= 4; ++a)
    for (int b = 0; b <= 4; ++b)
      for (int c = 0; c <= 4; ++c)
        for (int d = -a; d <= a; d += 2)
          for (int e = -b; e <= b; e += 2)
            // SymPy does not check that j1+j2+j3 and j3+m3 are integers, so only valid sets.
            if (triangle(a, b, c) && std::abs(d + e) <= c) add3(a, b, c, d, e, -d - e);
  auto rng = flyby::make_stream(flyby::test::seed("wigner sympy"), flyby::StreamPurpose::kTest, 2);
  std::uniform_int_distribution<int> j2(0, 20);
  int n = 0;
  while (n < 120) {
    const int a = j2(rng), b = j2(rng), c = j2(rng);
    if (!triangle(a, b, c)) continue;
    std::uniform_int_distribution<int> ma(0, a), mb(0, b);
    const int d = 2 * ma(rng) - a, e = 2 * mb(rng) - b;
    if (std::abs(d + e) > c) continue;
    add3(a, b, c, d, e, -d - e);
    std::ostringstream s;
    s << "cg " << a << " " << d << " " << b << " " << e << " " << c << " " << d + e;
    req.push_back(s.str());
    ours.push_back(clebsch_gordan(a, d, b, e, c, d + e));
    ++n;
  }
  n = 0;
  while (n < 120) {
    std::array<int, 6> j{};
    for (auto& x : j) x = j2(rng);
    if (!triangle(j[0], j[1], j[2]) || !triangle(j[0], j[4], j[5]) || !triangle(j[3], j[1], j[5]) ||
        !triangle(j[3], j[4], j[2]))
      continue;
    std::ostringstream s;
    s << "6j " << j[0] << " " << j[1] << " " << j[2] << " " << j[3] << " " << j[4] << " " << j[5];
    req.push_back(s.str());
    ours.push_back(wigner_6j(j[0], j[1], j[2], j[3], j[4], j[5]));
    ++n;
  }
  const auto ref = sympy_values(req);
  double max_diff = 0.0;
  for (std::size_t i = 0; i < req.size(); ++i) {
    REQUIRE(std::isfinite(ref[i]));
    INFO(req[i] << ": ours " << ours[i] << ", SymPy " << ref[i]);
    CHECK(std::abs(ours[i] - ref[i]) <= kTol);
    max_diff = std::max(max_diff, std::abs(ours[i] - ref[i]));
  }
  // Against exact values the implementation is correctly rounded to within a few ulp.
  INFO("max |diff| vs SymPy over " << req.size() << " values: " << max_diff);
  CHECK(max_diff <= 8 * std::numeric_limits<double>::epsilon());
}

TEST_CASE("exact values of Edmonds (1957)", "[angular]") {
  // Source: A. R. Edmonds, "Angular Momentum in Quantum Mechanics" (1957), Condon–Shortley
  // phases; values as listed in shared/REFERENCES.md ([derived, exact]).
  const double eps = 4 * std::numeric_limits<double>::epsilon();
  CHECK(std::abs(clebsch_gordan(1, -1, 1, 1, 0, 0) - (-std::sqrt(0.5))) <= eps);
  CHECK(std::abs(clebsch_gordan(2, 0, 1, 1, 1, 1) - (-std::sqrt(1.0 / 3))) <= eps);
  CHECK(std::abs(clebsch_gordan(2, 2, 2, -2, 4, 0) - std::sqrt(1.0 / 6)) <= eps);
  CHECK(clebsch_gordan(2, 0, 2, 0, 2, 0) == 0.0);
  CHECK(std::abs(clebsch_gordan(3, -1, 2, 2, 3, 1) - (-std::sqrt(8.0 / 15))) <= eps);
  CHECK(std::abs(clebsch_gordan(3, 1, 2, 0, 5, 1) - std::sqrt(3.0 / 5)) <= eps);
  CHECK(std::abs(wigner_3j(2, 2, 0, 0, 0, 0) - (-1 / std::sqrt(3.0))) <= eps);
  CHECK(std::abs(wigner_3j(2, 2, 4, 0, 0, 0) - std::sqrt(2.0 / 15)) <= eps);
  CHECK(std::abs(wigner_3j(4, 4, 4, 0, 0, 0) - (-std::sqrt(2.0 / 35))) <= eps);
  CHECK(std::abs(wigner_6j(2, 2, 2, 2, 2, 2) - 1.0 / 6) <= eps);
  CHECK(std::abs(wigner_6j(4, 4, 4, 4, 4, 4) - (-3.0 / 70)) <= eps);
  CHECK(std::abs(wigner_6j(2, 4, 6, 2, 4, 6) - 1.0 / 105) <= eps);
}

TEST_CASE("selection rules give zero and bad arguments are input errors", "[angular]") {
  CHECK(wigner_3j(2, 2, 6, 0, 0, 0) == 0.0);   // triangle broken
  CHECK(wigner_3j(2, 2, 2, 2, 0, 0) == 0.0);   // m sum ≠ 0
  CHECK(wigner_3j(2, 2, 2, 0, 0, 0) == 0.0);   // (1 1 1; 0 0 0): odd J with all m = 0
  CHECK(wigner_3j(2, 2, 2, 1, -1, 0) == 0.0);  // j + m not integer
  CHECK(wigner_6j(2, 2, 6, 2, 2, 2) == 0.0);
  CHECK_THROWS_AS(wigner_3j(-2, 2, 2, 0, 0, 0), flyby::InputError);
  CHECK_THROWS_AS(wigner_6j(2, 2, 2, 2, -1, 2), flyby::InputError);
}

TEST_CASE("Clebsch–Gordan tables are orthogonal and complete up to j = 4", "[angular]") {
  // Unitarity of the coupling transformation (Edmonds 1957, eqs. 3.5.4–3.5.5):
  //   Σ_{m1,m2} ⟨j1m1;j2m2|JM⟩⟨j1m1;j2m2|J′M′⟩ = δ_JJ′ δ_MM′,
  //   Σ_{J,M} ⟨j1m1;j2m2|JM⟩⟨j1m1′;j2m2′|JM⟩ = δ_m1m1′ δ_m2m2′.
  // Bound: each sum has ≤ 81 terms of ≤ 1 with ~1 ulp error each.
  const double tol = 200 * std::numeric_limits<double>::epsilon();
  for (int a = 0; a <= 8; ++a)
    for (int b = 0; b <= 8; ++b) {
      for (int J = std::abs(a - b); J <= a + b; J += 2)
        for (int Jp = std::abs(a - b); Jp <= a + b; Jp += 2)
          for (int M = -std::min(J, Jp); M <= std::min(J, Jp); M += 2) {
            double s = 0.0;
            for (int m1 = -a; m1 <= a; m1 += 2) {
              const int m2 = M - m1;
              if (std::abs(m2) > b) continue;
              s += clebsch_gordan(a, m1, b, m2, J, M) * clebsch_gordan(a, m1, b, m2, Jp, M);
            }
            REQUIRE(std::abs(s - (J == Jp ? 1.0 : 0.0)) <= tol);
          }
      for (int m1 = -a; m1 <= a; m1 += 2)
        for (int m2 = -b; m2 <= b; m2 += 2)
          for (int m1p = -a; m1p <= a; m1p += 2) {
            const int m2p = m1 + m2 - m1p;  // M must agree
            if (std::abs(m2p) > b) continue;
            double s = 0.0;
            for (int J = std::abs(a - b); J <= a + b; J += 2) {
              if (std::abs(m1 + m2) > J) continue;
              s += clebsch_gordan(a, m1, b, m2, J, m1 + m2) * clebsch_gordan(a, m1p, b, m2p, J, m1 + m2);
            }
            REQUIRE(std::abs(s - (m1 == m1p ? 1.0 : 0.0)) <= tol);
          }
    }
}

TEST_CASE("6j orthogonality up to j = 4", "[angular]") {
  // Edmonds (1957) eq. 6.2.9: Σ_x (2x+1)(2f+1) {a b x; c d f}{a b x; c d f′} = δ_ff′
  // (for f, f′ allowed by the triangles (a d f)(c b f)).
  const double tol = 200 * std::numeric_limits<double>::epsilon();
  for (int a = 0; a <= 8; ++a)
    for (int b = 0; b <= 8; ++b)
      for (int c = 0; c <= 8; ++c)
        for (int d = 0; d <= 8; ++d)
          for (int f = 0; f <= 16; ++f)
            for (int fp = 0; fp <= 16; ++fp) {
              if (!triangle(a, d, f) || !triangle(c, b, f) || !triangle(a, d, fp) || !triangle(c, b, fp)) continue;
              double s = 0.0;
              for (int x = 0; x <= 16; ++x) s += (x + 1.0) * (f + 1.0) * wigner_6j(a, b, x, c, d, f) * wigner_6j(a, b, x, c, d, fp);
              REQUIRE(std::abs(s - (f == fp ? 1.0 : 0.0)) <= tol);
            }
}
