// Coverage checks of reported uncertainties over repeated Monte Carlo runs: how many of n runs
// may fall inside their ±1σ interval when the interval is right.
#pragma once

#include <gsl/gsl_cdf.h>

#include <utility>

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

}  // namespace flyby::test
