// Racah formulas for 3j and 6j symbols, evaluated exactly.
//
// Why hand-written and exact: GSL is the reference these functions are tested against, so the
// implementation must be independent of it; and the Racah sums alternate, so a floating-point
// evaluation loses digits to cancellation as j grows (for j = 10 the largest term exceeds the
// result by up to ~1e6). Here every term is a ratio of factorials, kept as a vector of prime
// exponents (Legendre's formula). The common factor of all terms (the smallest exponent of
// each prime) is pulled out, so each remaining term is an integer, and the alternating sum is
// done in exact multi-precision integer arithmetic. Only the final √(prefactor) · sum is
// rounded, in long double: a few hundred roundings of 2^-64 at most for j ≤ 10, far below the
// 1e-13 the header promises. Speed is not critical (a few µs per symbol; level structures
// need tens of symbols).
#include "models/angular/wigner.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <string>
#include <vector>

#include "engine/common/errors.h"

namespace flyby::angular {
namespace {

std::vector<int> primes_up_to(int n) {
  std::vector<int> primes;
  if (n < 2) return primes;
  std::vector<bool> composite(static_cast<std::size_t>(n) + 1, false);
  for (int i = 2; i <= n; ++i) {
    if (composite[i]) continue;
    primes.push_back(i);
    for (long long k = static_cast<long long>(i) * i; k <= n; k += i) composite[k] = true;
  }
  return primes;
}

// Adds sign · (exponents of n!) to e (Legendre's formula).
void add_factorial(std::vector<int>& e, const std::vector<int>& primes, int n, int sign) {
  for (std::size_t i = 0; i < primes.size(); ++i) {
    const int p = primes[i];
    if (p > n) break;
    int count = 0;
    for (long long q = p; q <= n; q *= p) count += static_cast<int>(n / q);
    e[i] += sign * count;
  }
}

// Unsigned multi-precision integer, just enough for exact Racah sums.
class BigUint {
 public:
  explicit BigUint(std::uint32_t v = 0) { if (v) limbs_.push_back(v); }
  bool is_zero() const { return limbs_.empty(); }
  void mul_small(std::uint32_t f) {
    std::uint64_t carry = 0;
    for (auto& l : limbs_) {
      const std::uint64_t t = static_cast<std::uint64_t>(l) * f + carry;
      l = static_cast<std::uint32_t>(t);
      carry = t >> 32;
    }
    if (carry) limbs_.push_back(static_cast<std::uint32_t>(carry));
    trim();
  }
  void add(const BigUint& o) {
    if (o.limbs_.size() > limbs_.size()) limbs_.resize(o.limbs_.size(), 0);
    std::uint64_t carry = 0;
    for (std::size_t i = 0; i < limbs_.size(); ++i) {
      const std::uint64_t t = static_cast<std::uint64_t>(limbs_[i]) +
                              (i < o.limbs_.size() ? o.limbs_[i] : 0) + carry;
      limbs_[i] = static_cast<std::uint32_t>(t);
      carry = t >> 32;
    }
    if (carry) limbs_.push_back(static_cast<std::uint32_t>(carry));
  }
  // *this −= o; requires *this ≥ o.
  void sub(const BigUint& o) {
    std::int64_t borrow = 0;
    for (std::size_t i = 0; i < limbs_.size(); ++i) {
      std::int64_t t = static_cast<std::int64_t>(limbs_[i]) -
                       (i < o.limbs_.size() ? o.limbs_[i] : 0) - borrow;
      borrow = t < 0 ? 1 : 0;
      if (t < 0) t += (std::int64_t{1} << 32);
      limbs_[i] = static_cast<std::uint32_t>(t);
    }
    FLYBY_CHECK(borrow == 0, "BigUint::sub underflow");
    trim();
  }
  int compare(const BigUint& o) const {
    if (limbs_.size() != o.limbs_.size()) return limbs_.size() < o.limbs_.size() ? -1 : 1;
    for (std::size_t i = limbs_.size(); i-- > 0;) {
      if (limbs_[i] != o.limbs_[i]) return limbs_[i] < o.limbs_[i] ? -1 : 1;
    }
    return 0;
  }
  long double to_long_double() const {
    long double v = 0.0L;
    for (std::size_t i = limbs_.size(); i-- > 0;) v = v * 4294967296.0L + limbs_[i];
    return v;
  }

 private:
  void trim() {
    while (!limbs_.empty() && limbs_.back() == 0) limbs_.pop_back();
  }
  std::vector<std::uint32_t> limbs_;
};

// One term of a Racah sum: (−1)^odd · Π p^exponent.
struct Term {
  bool negative = false;
  std::vector<int> exponents;
};

// sign · √(Π p^prefactor) · Σ_k term_k, exactly up to the final rounding.
double racah_value(const std::vector<int>& primes, std::vector<int> prefactor,
                   const std::vector<Term>& terms, bool negate) {
  if (terms.empty()) return 0.0;
  const std::size_t np = primes.size();
  std::vector<int> common(np, 0);
  for (std::size_t i = 0; i < np; ++i) {
    int m = terms[0].exponents[i];
    for (const auto& t : terms) m = std::min(m, t.exponents[i]);
    common[i] = m;
  }
  BigUint pos, neg;
  for (const auto& t : terms) {
    BigUint v(1);
    for (std::size_t i = 0; i < np; ++i) {
      for (int k = t.exponents[i] - common[i]; k > 0; --k) v.mul_small(static_cast<std::uint32_t>(primes[i]));
    }
    (t.negative ? neg : pos).add(v);
  }
  bool sum_negative = false;
  BigUint sum;
  if (pos.compare(neg) >= 0) {
    sum = pos;
    sum.sub(neg);
  } else {
    sum = neg;
    sum.sub(pos);
    sum_negative = true;
  }
  if (sum.is_zero()) return 0.0;
  // Fold the common factor into the square root: √R · G · S = √(R G²) · S.
  for (std::size_t i = 0; i < np; ++i) prefactor[i] += 2 * common[i];
  // Even part exactly by repeated multiplication, odd part as √(N/D) with N, D < 2^64 for any j
  // in the tested range (products of distinct primes); fall back to long double otherwise.
  long double value = sum.to_long_double();
  long double odd_num = 1.0L, odd_den = 1.0L;
  for (std::size_t i = 0; i < np; ++i) {
    const int e = prefactor[i];
    const long double p = primes[i];
    const int half = (e >= 0 ? e : -e) / 2;
    for (int k = 0; k < half; ++k) value = (e > 0) ? value * p : value / p;
    if (e % 2 != 0) (e > 0 ? odd_num : odd_den) *= p;
  }
  value *= std::sqrt(odd_num / odd_den);
  if (sum_negative != negate) value = -value;
  return static_cast<double>(value);
}

void require_nonnegative(int two_j, const char* what) {
  if (two_j < 0) {
    throw InputError(std::string("angular momentum ") + what + " must be ≥ 0, got 2j = " +
                     std::to_string(two_j));
  }
}

bool m_ok(int two_j, int two_m) { return std::abs(two_m) <= two_j && (two_j + two_m) % 2 == 0; }

}  // namespace

bool triangle(int two_a, int two_b, int two_c) {
  if (two_a < 0 || two_b < 0 || two_c < 0) return false;
  if ((two_a + two_b + two_c) % 2 != 0) return false;
  return two_c >= std::abs(two_a - two_b) && two_c <= two_a + two_b;
}

double wigner_3j(int two_j1, int two_j2, int two_j3, int two_m1, int two_m2, int two_m3) {
  require_nonnegative(two_j1, "j1");
  require_nonnegative(two_j2, "j2");
  require_nonnegative(two_j3, "j3");
  if (two_m1 + two_m2 + two_m3 != 0) return 0.0;
  if (!m_ok(two_j1, two_m1) || !m_ok(two_j2, two_m2) || !m_ok(two_j3, two_m3)) return 0.0;
  if (!triangle(two_j1, two_j2, two_j3)) return 0.0;

  // Integers of the Racah formula (Edmonds 1957, eq. 3.6.11).
  const int a = (two_j1 + two_j2 - two_j3) / 2;   // j1 + j2 − j3
  const int b = (two_j1 - two_j2 + two_j3) / 2;   // j1 − j2 + j3
  const int c = (-two_j1 + two_j2 + two_j3) / 2;  // −j1 + j2 + j3
  const int big_j = (two_j1 + two_j2 + two_j3) / 2;
  const int j1pm1 = (two_j1 + two_m1) / 2, j1mm1 = (two_j1 - two_m1) / 2;
  const int j2pm2 = (two_j2 + two_m2) / 2, j2mm2 = (two_j2 - two_m2) / 2;
  const int j3pm3 = (two_j3 + two_m3) / 2, j3mm3 = (two_j3 - two_m3) / 2;
  const int t1 = (two_j3 - two_j2 + two_m1) / 2;  // j3 − j2 + m1
  const int t2 = (two_j3 - two_j1 - two_m2) / 2;  // j3 − j1 − m2

  const int kmin = std::max({0, -t1, -t2});
  const int kmax = std::min({a, j1mm1, j2pm2});
  if (kmin > kmax) return 0.0;

  const auto primes = primes_up_to(big_j + 1);
  std::vector<int> pre(primes.size(), 0);
  add_factorial(pre, primes, a, +1);
  add_factorial(pre, primes, b, +1);
  add_factorial(pre, primes, c, +1);
  add_factorial(pre, primes, big_j + 1, -1);
  for (int n : {j1pm1, j1mm1, j2pm2, j2mm2, j3pm3, j3mm3}) add_factorial(pre, primes, n, +1);

  std::vector<Term> terms;
  for (int k = kmin; k <= kmax; ++k) {
    Term t;
    t.negative = (k % 2) != 0;
    t.exponents.assign(primes.size(), 0);
    for (int n : {k, t1 + k, t2 + k, a - k, j1mm1 - k, j2pm2 - k}) add_factorial(t.exponents, primes, n, -1);
    terms.push_back(std::move(t));
  }
  const int phase = (two_j1 - two_j2 - two_m3) / 2;  // (−1)^(j1 − j2 − m3)
  return racah_value(primes, pre, terms, (phase % 2) != 0);
}

double wigner_6j(int two_j1, int two_j2, int two_j3, int two_j4, int two_j5, int two_j6) {
  require_nonnegative(two_j1, "j1");
  require_nonnegative(two_j2, "j2");
  require_nonnegative(two_j3, "j3");
  require_nonnegative(two_j4, "j4");
  require_nonnegative(two_j5, "j5");
  require_nonnegative(two_j6, "j6");
  if (!triangle(two_j1, two_j2, two_j3) || !triangle(two_j1, two_j5, two_j6) ||
      !triangle(two_j4, two_j2, two_j6) || !triangle(two_j4, two_j5, two_j3)) {
    return 0.0;
  }
  // Racah formula (Edmonds 1957, eq. 6.3.7).
  const int a1 = (two_j1 + two_j2 + two_j3) / 2;
  const int a2 = (two_j1 + two_j5 + two_j6) / 2;
  const int a3 = (two_j4 + two_j2 + two_j6) / 2;
  const int a4 = (two_j4 + two_j5 + two_j3) / 2;
  const int b1 = (two_j1 + two_j2 + two_j4 + two_j5) / 2;
  const int b2 = (two_j2 + two_j3 + two_j5 + two_j6) / 2;
  const int b3 = (two_j3 + two_j1 + two_j6 + two_j4) / 2;
  const int kmin = std::max({a1, a2, a3, a4});
  const int kmax = std::min({b1, b2, b3});
  if (kmin > kmax) return 0.0;

  const auto primes = primes_up_to(kmax + 1);
  std::vector<int> pre(primes.size(), 0);
  auto add_delta = [&](int ta, int tb, int tc) {  // Δ(abc) = (a+b−c)!(a−b+c)!(−a+b+c)!/(a+b+c+1)!
    add_factorial(pre, primes, (ta + tb - tc) / 2, +1);
    add_factorial(pre, primes, (ta - tb + tc) / 2, +1);
    add_factorial(pre, primes, (-ta + tb + tc) / 2, +1);
    add_factorial(pre, primes, (ta + tb + tc) / 2 + 1, -1);
  };
  add_delta(two_j1, two_j2, two_j3);
  add_delta(two_j1, two_j5, two_j6);
  add_delta(two_j4, two_j2, two_j6);
  add_delta(two_j4, two_j5, two_j3);

  std::vector<Term> terms;
  for (int k = kmin; k <= kmax; ++k) {
    Term t;
    t.negative = (k % 2) != 0;
    t.exponents.assign(primes.size(), 0);
    add_factorial(t.exponents, primes, k + 1, +1);
    for (int n : {k - a1, k - a2, k - a3, k - a4, b1 - k, b2 - k, b3 - k}) add_factorial(t.exponents, primes, n, -1);
    terms.push_back(std::move(t));
  }
  return racah_value(primes, pre, terms, false);
}

double clebsch_gordan(int two_j1, int two_m1, int two_j2, int two_m2, int two_J, int two_M) {
  if (two_m1 + two_m2 != two_M) return 0.0;
  const double w = wigner_3j(two_j1, two_j2, two_J, two_m1, two_m2, -two_M);
  if (w == 0.0) return 0.0;
  const int phase = (two_j1 - two_j2 + two_M) / 2;  // (−1)^(j1 − j2 + M), an integer
  const double s = std::sqrt(static_cast<double>(two_J + 1));
  return ((phase % 2) != 0 ? -1.0 : 1.0) * s * w;
}

}  // namespace flyby::angular
