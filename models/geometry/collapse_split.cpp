// Detected / undetected channel bookkeeping (see collapse_split.h).
#include "models/geometry/collapse_split.h"

#include <cmath>
#include <limits>
#include <sstream>

#include "engine/common/errors.h"

namespace flyby::geometry {

Eigen::MatrixXcd decay_matrix(const std::vector<LinearCollapse>& channels, int n) {
  Eigen::MatrixXcd m = Eigen::MatrixXcd::Zero(n, n);
  for (const auto& c : channels) {
    FLYBY_CHECK(c.coefficients.size() == n, "collapse coefficient vector of wrong size");
    m += c.coefficients.conjugate() * c.coefficients.transpose();
  }
  return m;
}

std::vector<LinearCollapse> undetected_remainder(const std::vector<LinearCollapse>& detected, int n,
                                                 double rate, const std::string& prefix,
                                                 const std::string& what) {
  Eigen::MatrixXcd m = rate * Eigen::MatrixXcd::Identity(n, n) - decay_matrix(detected, n);
  m = 0.5 * (m + m.adjoint()).eval();
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXcd> es(m);
  FLYBY_CHECK(es.info() == Eigen::Success, "eigen-decomposition of the remainder failed");
  // Rounding tolerance: a few ulps of the rate times the matrix size.
  const double tol = 64.0 * n * std::numeric_limits<double>::epsilon() * rate;
  std::vector<LinearCollapse> out;
  int index = 0;
  for (int k = 0; k < n; ++k) {
    const double lambda = es.eigenvalues()(k);
    if (lambda < -tol) {
      std::ostringstream os;
      os << what << ": the detection channels collect more than the physical decay (remainder eigenvalue "
         << lambda / rate << " of the total rate); reduce efficiencies or solid angles";
      throw InputError(os.str());
    }
    if (lambda <= tol) continue;
    LinearCollapse c;
    c.channel = prefix + std::to_string(index++);
    c.detected = false;
    c.coefficients = std::sqrt(lambda) * es.eigenvectors().col(k).conjugate();
    out.push_back(std::move(c));
  }
  return out;
}

double completeness_error(const std::vector<LinearCollapse>& all, int n, double rate) {
  const Eigen::MatrixXcd d = decay_matrix(all, n) - rate * Eigen::MatrixXcd::Identity(n, n);
  return d.cwiseAbs().maxCoeff();
}

}  // namespace flyby::geometry
