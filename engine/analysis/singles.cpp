// Singles counts, rates and the χ² drift test (see singles.h).
#include "engine/analysis/singles.h"

#include <gsl/gsl_cdf.h>

#include <cmath>
#include <cstdio>
#include <sstream>

#include "engine/common/errors.h"

namespace flyby::analysis {

std::optional<std::string> SinglesOptions::validate() const {
  if (duration_ps <= 0) return "singles: the record duration must be > 0";
  if (slices < 2) return "singles: at least 2 time slices are needed for the drift test";
  if (static_cast<std::int64_t>(slices) > duration_ps) return "singles: more slices than picoseconds in the record";
  for (int c : channels)
    if (c < 0 || c > 255) return "singles: channel id " + std::to_string(c) + " outside 0..255";
  return std::nullopt;
}

const char* to_string(SinglesStatus s) {
  switch (s) {
    case SinglesStatus::kSuccess: return "success";
    case SinglesStatus::kFewCounts: return "few-counts";
  }
  return "?";
}

SinglesCounter::SinglesCounter(SinglesOptions options) : opt_(std::move(options)) {
  if (auto p = opt_.validate()) throw InputError(*p);
  index_of_.assign(256, -1);
  for (std::size_t i = 0; i < opt_.channels.size(); ++i) index_of_[static_cast<std::size_t>(opt_.channels[i])] = static_cast<int>(i);
  counts_.assign(opt_.channels.size(), std::vector<std::uint64_t>(static_cast<std::size_t>(opt_.slices), 0));
}

void SinglesCounter::add_chunk(std::span<const std::int64_t> time_ps, std::span<const std::uint8_t> channel) {
  FLYBY_CHECK(time_ps.size() == channel.size(), "singles: time and channel arrays differ in length");
  for (std::size_t k = 0; k < time_ps.size(); ++k) {
    const int i = index_of_[channel[k]];
    if (i < 0) continue;
    const std::int64_t t = time_ps[k] - opt_.start_ps;
    if (t < 0 || t >= opt_.duration_ps) continue;
    // Slice s holds [s D / S, (s + 1) D / S): integer arithmetic, no rounding at the edges.
    const auto s = static_cast<std::size_t>((static_cast<__int128>(t) * opt_.slices) / opt_.duration_ps);
    ++counts_[static_cast<std::size_t>(i)][s];
  }
}

SinglesResult SinglesCounter::finish() const {
  SinglesResult r;
  r.options = opt_;
  const double T = static_cast<double>(opt_.duration_ps) * 1e-12;
  const int S = opt_.slices;
  r.slice_duration_s = T / S;
  for (int s = 0; s < S; ++s) r.slice_mid_s.push_back((s + 0.5) * r.slice_duration_s);
  for (std::size_t i = 0; i < opt_.channels.size(); ++i) {
    ChannelSingles c;
    c.channel = opt_.channels[i];
    c.slice_counts = counts_[i];
    for (auto n : c.slice_counts) c.counts += n;
    c.rate_per_s = static_cast<double>(c.counts) / T;
    c.rate_err_per_s = std::sqrt(static_cast<double>(c.counts)) / T;
    for (auto n : c.slice_counts) c.slice_rate_per_s.push_back(static_cast<double>(n) / r.slice_duration_s);
    c.drift_dof = S - 1;
    const double mean = static_cast<double>(c.counts) / S;
    if (c.counts > 0) {
      for (auto n : c.slice_counts) c.drift_chi2 += (static_cast<double>(n) - mean) * (static_cast<double>(n) - mean) / mean;
      c.drift_p_value = gsl_cdf_chisq_Q(c.drift_chi2, c.drift_dof);
      // Straight line n_s = a + b t_s with weights 1/n̄ (Poisson under the null): b / a is the
      // relative slope; closed-form weighted least squares (equal weights).
      double tm = 0;
      for (double t : r.slice_mid_s) tm += t / S;
      double sxx = 0, sxy = 0;
      for (int s = 0; s < S; ++s) {
        const double dt = r.slice_mid_s[static_cast<std::size_t>(s)] - tm;
        sxx += dt * dt;
        sxy += dt * static_cast<double>(c.slice_counts[static_cast<std::size_t>(s)]);
      }
      const double b = sxy / sxx;
      c.drift_slope_per_s = b / mean;
      c.drift_slope_err_per_s = std::sqrt(mean / sxx) / mean;
      if (mean < 5 && r.status == SinglesStatus::kSuccess) {
        r.status = SinglesStatus::kFewCounts;
        r.message = "channel " + std::to_string(c.channel) + " has " + std::to_string(mean) +
                    " counts per slice (< 5): the chi2 drift test is approximate";
      }
    }
    r.channels.push_back(std::move(c));
  }
  return r;
}

const ChannelSingles* SinglesResult::find(int channel) const {
  for (const auto& c : channels)
    if (c.channel == channel) return &c;
  return nullptr;
}

std::string SinglesResult::brief_report() const {
  std::ostringstream s;
  s << "singles over " << options.slices << " slices:";
  for (const auto& c : channels) {
    char buf[160];
    std::snprintf(buf, sizeof buf, " ch%d %.6g/s (drift p = %.3g)", c.channel, c.rate_per_s, c.drift_p_value);
    s << buf;
  }
  return s.str();
}

std::string SinglesResult::full_report() const {
  std::ostringstream s;
  s << "singles: " << to_string(status) << (message.empty() ? "" : " (" + message + ")") << "\n";
  for (const auto& c : channels) {
    char buf[320];
    std::snprintf(buf, sizeof buf,
                  "  channel %d: %llu counts, %.6g ± %.2g /s; drift chi2 = %.2f / %d dof, p = %.3g; slope %.3g ± %.2g /s\n",
                  c.channel, static_cast<unsigned long long>(c.counts), c.rate_per_s, c.rate_err_per_s, c.drift_chi2,
                  c.drift_dof, c.drift_p_value, c.drift_slope_per_s, c.drift_slope_err_per_s);
    s << buf;
  }
  return s.str();
}

}  // namespace flyby::analysis
