// Weighted nonlinear least squares through gsl_multifit_nlinear (see fit.h).
#include "engine/analysis/fit.h"

#include <gsl/gsl_blas.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_multifit_nlinear.h>
#include <gsl/gsl_vector.h>

#include <cmath>
#include <iomanip>
#include <memory>
#include <sstream>

#include "engine/common/errors.h"

namespace flyby::analysis {
namespace {

struct Problem {
  const CurveModel* model;
  std::span<const double> x, y;
  std::vector<double> grad;
  int evaluations = 0;
};

int residual_f(const gsl_vector* p, void* data, gsl_vector* f) {
  auto* pr = static_cast<Problem*>(data);
  ++pr->evaluations;
  const std::span<const double> ps(p->data, p->size);
  for (std::size_t k = 0; k < pr->x.size(); ++k) {
    const double v = pr->model->evaluate(ps, pr->x[k], pr->grad) - pr->y[k];
    // A trial point where the model overflows is left non-finite: GSL then rejects the step
    // and shrinks the trust region. (Returning an error code makes GSL retry the same step.)
    gsl_vector_set(f, k, v);
  }
  return GSL_SUCCESS;
}

int residual_df(const gsl_vector* p, void* data, gsl_matrix* J) {
  auto* pr = static_cast<Problem*>(data);
  const std::span<const double> ps(p->data, p->size);
  for (std::size_t k = 0; k < pr->x.size(); ++k) {
    pr->model->evaluate(ps, pr->x[k], pr->grad);
    for (std::size_t i = 0; i < p->size; ++i) gsl_matrix_set(J, k, i, pr->grad[i]);
  }
  return GSL_SUCCESS;
}

struct WorkspaceDeleter {
  void operator()(gsl_multifit_nlinear_workspace* w) const { gsl_multifit_nlinear_free(w); }
};
struct MatrixDeleter {
  void operator()(gsl_matrix* m) const { gsl_matrix_free(m); }
};

}  // namespace

const char* to_string(FitStatus s) {
  switch (s) {
    case FitStatus::kConverged: return "converged";
    case FitStatus::kMaxIterations: return "max-iterations";
    case FitStatus::kNoProgress: return "no-progress";
    case FitStatus::kNumericalIssue: return "numerical-issue";
  }
  return "unknown";
}

std::optional<std::string> FitOptions::validate() const {
  if (max_iterations < 1) return "max_iterations must be >= 1";
  if (!(xtol > 0)) return "xtol must be > 0";
  if (!(gtol > 0)) return "gtol must be > 0";
  if (!(ftol >= 0)) return "ftol must be >= 0";
  return std::nullopt;
}

FitResult fit_curve(const CurveModel& model, std::span<const double> x, std::span<const double> y,
                    std::span<const double> sigma, std::span<const double> start, const FitOptions& options) {
  // GSL's default handler aborts the process; flyby reports numerical trouble as a status.
  static const bool handler_off = [] {
    gsl_set_error_handler_off();
    return true;
  }();
  (void)handler_off;
  if (auto err = options.validate()) throw InputError("fit: " + *err);
  const std::size_t n = x.size(), p = start.size();
  if (y.size() != n) throw InputError("fit: x and y have different lengths");
  if (!sigma.empty() && sigma.size() != n) throw InputError("fit: sigma and y have different lengths");
  if (p != model.parameter_names.size())
    throw InputError("fit: " + std::to_string(p) + " starting values for " +
                     std::to_string(model.parameter_names.size()) + " parameters");
  if (n < p || p == 0)
    throw InputError("fit: " + std::to_string(n) + " data points cannot determine " + std::to_string(p) +
                     " parameters");
  for (std::size_t k = 0; k < n; ++k) {
    if (!std::isfinite(x[k]) || !std::isfinite(y[k]))
      throw InputError("fit: data point " + std::to_string(k) + " is not finite");
    if (!sigma.empty() && !(sigma[k] > 0 && std::isfinite(sigma[k])))
      throw InputError("fit: error of data point " + std::to_string(k) + " must be finite and > 0");
  }
  for (std::size_t i = 0; i < p; ++i)
    if (!std::isfinite(start[i]))
      throw InputError("fit: starting value of " + model.parameter_names[i] + " is not finite");

  FitResult r;
  r.parameter_names = model.parameter_names;
  r.parameters.assign(start.begin(), start.end());
  r.dof = static_cast<int>(n) - static_cast<int>(p);

  Problem pr{&model, x, y, std::vector<double>(p), 0};
  gsl_multifit_nlinear_parameters params = gsl_multifit_nlinear_default_parameters();
  switch (options.method) {
    case TrustRegionMethod::kLevenbergMarquardt: params.trs = gsl_multifit_nlinear_trs_lm; break;
    case TrustRegionMethod::kLevenbergMarquardtGeodesic: params.trs = gsl_multifit_nlinear_trs_lmaccel; break;
    case TrustRegionMethod::kDogleg: params.trs = gsl_multifit_nlinear_trs_dogleg; break;
  }
  switch (options.scaling) {
    case ParameterScaling::kMore: params.scale = gsl_multifit_nlinear_scale_more; break;
    case ParameterScaling::kLevenberg: params.scale = gsl_multifit_nlinear_scale_levenberg; break;
    case ParameterScaling::kMarquardt: params.scale = gsl_multifit_nlinear_scale_marquardt; break;
  }
  std::unique_ptr<gsl_multifit_nlinear_workspace, WorkspaceDeleter> w(
      gsl_multifit_nlinear_alloc(gsl_multifit_nlinear_trust, &params, n, p));
  FLYBY_CHECK(w != nullptr, "gsl_multifit_nlinear_alloc failed");

  gsl_multifit_nlinear_fdf fdf{};
  fdf.f = residual_f;
  fdf.df = residual_df;
  fdf.fvv = nullptr;  // geodesic acceleration: GSL's finite-difference second directional derivative
  fdf.n = n;
  fdf.p = p;
  fdf.params = &pr;

  std::vector<double> p0(start.begin(), start.end());
  std::vector<double> wts(n, 1.0);
  if (!sigma.empty())
    for (std::size_t k = 0; k < n; ++k) wts[k] = 1.0 / (sigma[k] * sigma[k]);
  gsl_vector_view xv = gsl_vector_view_array(p0.data(), p);
  gsl_vector_view wv = gsl_vector_view_array(wts.data(), n);
  int st = gsl_multifit_nlinear_winit(&xv.vector, &wv.vector, &fdf, w.get());
  if (st != GSL_SUCCESS) {
    r.status = FitStatus::kNumericalIssue;
    r.message = std::string("model cannot be evaluated at the starting values: ") + gsl_strerror(st);
    return r;
  }
  int info = 0;
  st = gsl_multifit_nlinear_driver(static_cast<std::size_t>(options.max_iterations), options.xtol, options.gtol,
                                   options.ftol, nullptr, nullptr, &info, w.get());
  r.iterations = static_cast<int>(gsl_multifit_nlinear_niter(w.get()));
  r.function_evaluations = pr.evaluations;
  const gsl_vector* best = gsl_multifit_nlinear_position(w.get());
  for (std::size_t i = 0; i < p; ++i) r.parameters[i] = gsl_vector_get(best, i);
  const gsl_vector* res = gsl_multifit_nlinear_residual(w.get());  // weighted residuals √w (f − y)
  gsl_blas_ddot(res, res, &r.chi2);

  if (st == GSL_SUCCESS) {
    r.status = FitStatus::kConverged;
    r.message = info == 1 ? "small step (xtol)" : info == 2 ? "small gradient (gtol)" : "small change of residuals (ftol)";
  } else if (st == GSL_EMAXITER) {
    r.status = FitStatus::kMaxIterations;
    r.message = "reached " + std::to_string(options.max_iterations) + " iterations without meeting a stopping test";
  } else if (st == GSL_ENOPROG) {
    r.status = FitStatus::kNoProgress;
    r.message = "no further reduction of chi2 possible before meeting a stopping test";
  } else {
    r.status = FitStatus::kNumericalIssue;
    r.message = std::string("solver failed: ") + gsl_strerror(st);
  }
  bool finite = std::isfinite(r.chi2);
  for (double v : r.parameters) finite = finite && std::isfinite(v);
  if (!finite) {
      r.status = FitStatus::kNumericalIssue;
    r.message = "non-finite parameters or chi2 (the model overflowed)";
  }

  r.reduced_chi2 = r.dof > 0 ? r.chi2 / r.dof : std::numeric_limits<double>::quiet_NaN();
  r.p_value = r.dof > 0 ? gsl_cdf_chisq_Q(r.chi2, r.dof) : std::numeric_limits<double>::quiet_NaN();

  std::unique_ptr<gsl_matrix, MatrixDeleter> cov(gsl_matrix_alloc(p, p));
  const gsl_matrix* J = gsl_multifit_nlinear_jac(w.get());
  // epsrel = 0: GSL drops no columns; a rank-deficient Jacobian shows up as inf/NaN below.
  st = gsl_multifit_nlinear_covar(J, 0.0, cov.get());
  r.covariance.resize(static_cast<Eigen::Index>(p), static_cast<Eigen::Index>(p));
  const double scale = options.scale_covariance_by_reduced_chi2 && r.dof > 0 ? r.reduced_chi2 : 1.0;
  r.covariance_scaled = options.scale_covariance_by_reduced_chi2 && r.dof > 0;
  bool cov_ok = st == GSL_SUCCESS;
  for (std::size_t i = 0; i < p; ++i)
    for (std::size_t j = 0; j < p; ++j) {
      const double c = gsl_matrix_get(cov.get(), i, j) * scale;
      r.covariance(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = c;
      cov_ok = cov_ok && std::isfinite(c);
    }
  r.standard_errors.resize(p);
  for (std::size_t i = 0; i < p; ++i) {
    const double v = r.covariance(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(i));
    cov_ok = cov_ok && v >= 0;
    r.standard_errors[i] = std::sqrt(std::max(v, 0.0));
  }
  if (!cov_ok && r.status == FitStatus::kConverged) {
    r.status = FitStatus::kNumericalIssue;
    r.message = "singular Jacobian at the optimum: parameters are not all determined by the data";
  }
  return r;
}

std::string FitResult::brief_report() const {
  std::ostringstream o;
  o << "fit: " << to_string(status) << " after " << iterations << " iterations, chi2/dof = " << chi2 << "/" << dof
    << " = " << std::setprecision(4) << reduced_chi2 << ", p = " << p_value;
  return o.str();
}

std::string FitResult::full_report() const {
  std::ostringstream o;
  o << brief_report() << "\n  " << message << "\n";
  for (std::size_t i = 0; i < parameters.size(); ++i)
    o << "  " << std::left << std::setw(24) << parameter_names[i] << std::right << std::setw(16)
      << std::setprecision(8) << parameters[i] << " +- " << std::setprecision(3) << standard_errors[i] << "\n";
  if (covariance_scaled) o << "  (standard errors scaled by sqrt(chi2/dof))\n";
  return o.str();
}

}  // namespace flyby::analysis
