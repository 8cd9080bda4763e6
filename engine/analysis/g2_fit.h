// Fits of g2(τ) histograms with the composable models of g2_model.h: automatic starting values
// (background level from the tails, beat frequency from the peak of a zero-padded FFT
// periodogram of the residual, decay and phase from a linear least-squares scan), then the
// weighted nonlinear fit of fit.h. Beat parameters are brought to a canonical form afterwards
// (amplitude >= 0, frequency >= 0, phase in (−π, π]).
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "engine/analysis/fit.h"
#include "engine/analysis/g2_model.h"

namespace flyby::analysis {

// A g2 histogram as read from a correlation CSV.
struct G2Data {
  std::vector<double> tau_us;  // bin centres, µs
  std::vector<double> g2;      // normalized counts
  std::vector<double> g2_err;  // Poisson errors; 0 for empty bins (replaced, see fit_g2)
};

struct G2FitOptions {
  std::string model = "beats";          // model spec (g2_model.h)
  std::optional<double> tau_min_us;     // fit only bins with τ >= this, µs; unset: no lower limit
  std::optional<double> tau_max_us;     // fit only bins with τ <= this, µs; unset: no upper limit
  std::vector<double> start;            // starting values in parameter order; empty: automatic
  int alternative_starts = 3;           // beat-frequency candidates tried (spectral peaks), >= 1
  // A converged fit with χ² p-value above this ends the search over candidates, in [0, 1].
  double accept_p_value = 1e-3;
  // Poisson weights from the model instead of the data: refit with σ_k² = model_k / E until the
  // parameters settle. Its fixed point solves the Poisson likelihood equations, so it removes
  // the bias of data-weighted χ² (about −1 count per bin on the level) and needs no special
  // treatment of empty bins. Off: errors from the data (the CSV's g2_err).
  bool poisson_model_weights = true;
  int max_reweightings = 10;            // reweighting passes at most, >= 1
  FitOptions solver = [] {
    FitOptions o;
    // Geodesic acceleration: beat fits have long curved valleys (frequency vs phase).
    o.method = TrustRegionMethod::kLevenbergMarquardtGeodesic;
    return o;
  }();
};

struct G2FitResult {
  G2Model model;
  FitResult fit;                      // parameters, errors, covariance, χ², p-value, status
  std::vector<double> start;          // the starting values of the fit that was kept
  std::vector<double> tau_us;         // fitted bins
  std::vector<double> g2, g2_err;     // their data (errors after the empty-bin replacement)
  std::vector<double> model_g2;       // model at the fitted bins
  int empty_bins_replaced = 0;        // bins whose zero error became the error of one count
  double expected_counts_per_bin = 0; // E = g2/err² recovered from the data
  int reweightings = 0;               // Poisson reweighting passes done (0: data errors)
  bool poisson_model_weights = false; // errors in g2_err are √(model/E), not from the data

  std::string brief_report() const { return "model " + model.spec + ": " + fit.brief_report(); }
  std::string full_report() const;
};

// Automatic starting values for `model` on data (τ, y, σ), in parameter order.
std::vector<double> g2_starting_values(const G2Model& model, std::span<const double> tau_us,
                                       std::span<const double> y, std::span<const double> sigma,
                                       int beat_candidate = 0);

// Fits the model. Bins with zero error (no counts) get the error of one count, 1/E with E the
// expected counts per bin recovered from any non-empty bin (g2/err² = E). InputError if the
// data are inconsistent or too few bins remain in the range.
G2FitResult fit_g2(const G2Data& data, const G2FitOptions& options);

}  // namespace flyby::analysis
