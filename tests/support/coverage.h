// Statistics of Monte Carlo tests: coverage checks of reported uncertainties over repeated runs
// (how many of n runs may fall inside their ±1σ interval when the interval is right), and click
// rates with standard errors from batch means.
#pragma once

#include <gsl/gsl_cdf.h>

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <utility>
#include <vector>

namespace flyby::test {

// Two-sided binomial acceptance region [lo, hi] for k successes of n at probability p, each
// tail ≤ alpha (GSL binomial CDF).
inline std::pair<int, int> binomial_region(int n, double p, double alpha) {
  int lo = 0, hi = n;
  while (lo < n && gsl_cdf_binomial_P(static_cast<unsigned>(lo), p, static_cast<unsigned>(n)) < alpha) ++lo;
  while (hi > 0 && gsl_cdf_binomial_Q(static_cast<unsigned>(hi - 1), p, static_cast<unsigned>(n)) < alpha) --hi;
  return {lo, hi};
}

// Probability that |t| ≤ 1 for Student's t with `dof` degrees of freedom: the ±1σ coverage of
// an estimate whose σ comes from a jackknife (or batch means) over dof + 1 blocks (GSL).
inline double one_sigma_coverage_t(double dof) { return 1 - 2 * gsl_cdf_tdist_Q(1.0, dof); }

// Rate of tags (per µs) over [0, duration) with its standard error from `batches` equal time
// batches (Welford): the error comes from the sample, so it holds for non-Poissonian light too.
struct BatchRate {
  double per_us = 0, stderr_per_us = 0;
};
inline BatchRate batch_rate(const std::vector<std::int64_t>& time_ps, double duration_s, int batches = 50) {
  std::vector<double> k(std::size_t(batches), 0.0);
  const double D_ps = duration_s * 1e12;
  for (auto t : time_ps)
    k[std::min<std::size_t>(std::size_t(batches - 1), std::size_t(double(t) / D_ps * batches))] += 1.0;
  double m = 0, s2 = 0;
  for (int i = 0; i < batches; ++i) {
    const double dx = k[std::size_t(i)] - m;
    m += dx / (i + 1);
    s2 += dx * (k[std::size_t(i)] - m);
  }
  s2 /= batches - 1;
  const double batch_us = duration_s * 1e6 / batches;
  return {m / batch_us, std::sqrt(s2 / batches) / batch_us};
}

}  // namespace flyby::test
