// Statistics helpers for the engine's Monte Carlo tests: Welford mean/variance and χ² bounds
// (Boost.Math's chi-squared quantile).
#pragma once

#include <boost/math/distributions/chi_squared.hpp>
#include <cmath>
#include <cstddef>

namespace flyby::test {

struct Welford {
  std::size_t n = 0;
  double mean = 0, m2 = 0;
  void add(double x) {
    ++n;
    const double d = x - mean;
    mean += d / double(n);
    m2 += d * (x - mean);
  }
  double variance() const { return n > 1 ? m2 / double(n - 1) : 0.0; }
  double standard_error() const { return std::sqrt(variance() / double(n)); }
};

// The value a χ² statistic with `dof` degrees of freedom exceeds with probability p.
inline double chi2_bound(double dof, double p) {
  return boost::math::quantile(boost::math::complement(boost::math::chi_squared(dof), p));
}

// Simpson's rule for ∫_a^b f with `n` (even) intervals.
template <class F>
double simpson(F f, double a, double b, int n = 64) {
  const double h = (b - a) / n;
  double s = f(a) + f(b);
  for (int i = 1; i < n; ++i) s += f(a + i * h) * (i % 2 ? 4 : 2);
  return s * h / 3;
}

}  // namespace flyby::test
