#pragma once
/// \file diagnostics.h
/// Innovation statistics gathered while filtering: per channel counts, innovation mean and standard
/// deviation and the share of standardized innovations beyond ±1.96, and the normalized innovation
/// squared (NIS) averaged over time with its chi-square bounds (Bar-Shalom, Li, Kirubarajan,
/// Estimation with Applications to Tracking and Navigation, 2001, section 5.4).

#include <cstddef>
#include <string>
#include <vector>

#include "statewise/filter.h"

namespace statewise {

/// Summary of one channel's innovations.
struct ChannelInnovationSummary {
  std::string name;                    ///< the channel's CSV column
  std::size_t observed = 0;            ///< rows where the channel was used in an update
  std::size_t missing = 0;             ///< rows where it was missing
  double innovation_mean = 0.0;        ///< mean of v = y - C x_pred (same units as the channel)
  double innovation_sd = 0.0;          ///< sample standard deviation of v (n-1 denominator)
  double fraction_outside_1_96 = 0.0;  ///< share of |z| > 1.96, z = v / sqrt(S_cc); about 0.05 when the model fits
};

/// The time-averaged normalized innovation squared with its two-sided 95% bounds. Under the model,
/// the sum of v'S^-1v over the N steps with data is chi-square with sum(k_t) degrees of freedom,
/// k_t the channels observed at step t; the bounds are its 2.5% and 97.5% quantiles divided by N.
struct NisSummary {
  std::size_t steps = 0;             ///< steps with at least one observed channel (N)
  double degrees_of_freedom = 0.0;   ///< sum of k_t
  double mean = 0.0;                 ///< (1/N) sum NIS_t
  double expected = 0.0;             ///< sum(k_t)/N, the mean's expectation under the model
  double lower_95 = 0.0;             ///< chi2_{0.025}(sum k_t) / N
  double upper_95 = 0.0;             ///< chi2_{0.975}(sum k_t) / N
};

/// Accumulates innovation statistics row by row in constant memory (Welford's running mean and
/// variance: B. P. Welford, Technometrics 4(3), 1962).
class InnovationAccumulator {
 public:
  /// Prepares for the named channels.
  explicit InnovationAccumulator(std::vector<std::string> channel_names);
  /// Adds one row's innovations.
  void add(const InnovationRecord& record);
  /// Per-channel summaries so far.
  std::vector<ChannelInnovationSummary> channels() const;
  /// NIS summary so far.
  NisSummary nis() const;
  /// Sum of the rows' log-likelihood terms.
  double log_likelihood() const { return log_likelihood_; }
  /// Rows added.
  std::size_t rows() const { return rows_; }

 private:
  struct Running {
    std::size_t observed = 0, missing = 0, outside = 0;
    double mean = 0.0, sum_squares = 0.0;
  };
  std::vector<std::string> names_;
  std::vector<Running> running_;
  std::size_t rows_ = 0, nis_steps_ = 0;
  double nis_sum_ = 0.0, nis_dof_ = 0.0, log_likelihood_ = 0.0;
};

}  // namespace statewise
