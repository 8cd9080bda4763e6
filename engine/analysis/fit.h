// Weighted nonlinear least squares for curve models y ≈ f(x; p), built on GSL's trust-region
// solver gsl_multifit_nlinear (Levenberg–Marquardt, optionally with geodesic acceleration).
//
// Why GSL: it is a well-kept numerical library packaged in Debian (libgsl-dev), its nlinear
// module offers Levenberg–Marquardt with geodesic acceleration (Transtrum & Sethna), and it also
// returns the Jacobian for the covariance (gsl_multifit_nlinear_covar) and the χ² distribution
// (gsl_cdf_chisq_Q) for the goodness of fit, so no numerical core is hand-written here.
#pragma once

#include <Eigen/Dense>

#include <functional>
#include <optional>
#include <span>
#include <string>
#include <vector>

namespace flyby::analysis {

// A model f(x; p) with its gradient in p.
struct CurveModel {
  std::vector<std::string> parameter_names;  // one per parameter, with units (e.g. "freq_MHz")
  // Returns f(x; p) and writes ∂f/∂p_i into grad (grad.size() == p.size()).
  std::function<double(std::span<const double> p, double x, std::span<double> grad)> evaluate;
};

enum class TrustRegionMethod {
  kLevenbergMarquardt,          // classic LM (gsl_multifit_nlinear_trs_lm)
  kLevenbergMarquardtGeodesic,  // LM with geodesic acceleration (trs_lmaccel): long narrow valleys
  kDogleg,                      // Powell's dogleg (trs_dogleg)
};

// Diagonal scaling of the trust region (GSL's gsl_multifit_nlinear_scale_*).
enum class ParameterScaling {
  kMore,        // Moré: invariant to the units of the parameters; GSL's default
  kLevenberg,   // identity: the original Levenberg damping; sometimes better from far starts
  kMarquardt,   // diag(JᵀJ) at each step: scale invariant but can stall where a column vanishes
};

struct FitOptions {
  TrustRegionMethod method = TrustRegionMethod::kLevenbergMarquardt;  // trust-region step
  ParameterScaling scaling = ParameterScaling::kMore;                 // trust-region shape
  int max_iterations = 500;  // iterations of the trust-region driver, >= 1
  // Stop when every step component satisfies |δp_i| <= xtol (|p_i| + xtol) (GSL's test), > 0.
  double xtol = 1e-12;
  // Stop when max_i |g_i p_i| <= gtol max(χ²/2, 1) with g the gradient of χ²/2 (GSL's test), > 0.
  double gtol = 1e-12;
  // Stop when the relative change of the residual vector is below ftol (GSL's test), >= 0.
  double ftol = 0.0;
  // Multiply the covariance by χ²/dof. On when the data have no known errors (unit weights,
  // the NIST StRD convention); off for Poisson-weighted histograms whose σ are known.
  bool scale_covariance_by_reduced_chi2 = false;

  std::optional<std::string> validate() const;
};

enum class FitStatus {
  kConverged,       // a stopping test was met
  kMaxIterations,   // max_iterations reached: parameters are the last iterate
  kNoProgress,      // the solver could not reduce χ² further before meeting a test
  kNumericalIssue,  // non-finite values or a singular Jacobian: no covariance
};
const char* to_string(FitStatus s);

struct FitResult {
  FitStatus status = FitStatus::kNumericalIssue;
  std::string message;                   // solver's stopping reason, or the trouble
  std::vector<std::string> parameter_names;
  std::vector<double> parameters;        // best-fit p
  std::vector<double> standard_errors;   // √diag(covariance)
  Eigen::MatrixXd covariance;            // (JᵀWJ)⁻¹, scaled by χ²/dof if asked
  double chi2 = 0;                       // Σ w_k (y_k − f_k)², w = 1/σ² (or 1)
  int dof = 0;                           // points − parameters
  double reduced_chi2 = 0;               // chi2 / dof
  double p_value = 0;                    // P(χ²_dof >= chi2), gsl_cdf_chisq_Q; meaningful with real σ
  int iterations = 0;
  int function_evaluations = 0;
  bool covariance_scaled = false;        // covariance multiplied by reduced χ²

  bool ok() const { return status == FitStatus::kConverged; }
  std::string brief_report() const;
  std::string full_report() const;
};

// Fits model to (x, y) with errors sigma (empty: unit weights). Throws InputError on
// inconsistent sizes, non-finite data, non-positive sigma or fewer points than parameters.
FitResult fit_curve(const CurveModel& model, std::span<const double> x, std::span<const double> y,
                    std::span<const double> sigma, std::span<const double> start,
                    const FitOptions& options = {});

}  // namespace flyby::analysis
