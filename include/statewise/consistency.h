#pragma once
/// \file consistency.h
/// Tests of a filter's consistency on its innovations, gathered online in constant memory while the
/// filter runs: per channel, on the standardized innovations z = v / sqrt(S_cc), the Ljung–Box
/// portmanteau test of whiteness (G. M. Ljung and G. E. P. Box, Biometrika 65(2), 1978), the
/// Jarque–Bera test of normality (C. M. Jarque and A. K. Bera, Economics Letters 6(3), 1980), tests of
/// their mean and mean square, and the share beyond ±1.96; for the whole model, the normalized
/// innovation squared (NIS) per step and time-averaged with chi-square bounds (Y. Bar-Shalom,
/// X. R. Li, T. Kirubarajan, Estimation with Applications to Tracking and Navigation, 2001,
/// section 5.4). Under the model the z of a channel are independent N(0, 1) over time.
///
/// The results equal those of the batch functions in statistics.h (ljung_box, jarque_bera) on the
/// whole z series of a channel, with NaN where the channel was missing or rejected.

#include <cstddef>
#include <string>
#include <vector>

#include "statewise/filter.h"
#include "statewise/statistics.h"

namespace statewise {

/// How the consistency tests are run.
struct ConsistencyOptions {
  /// Ljung–Box lags h, 1 to 100; 0 (default) chooses default_ljung_box_lags(n) = min(10, n/5) at the
  /// end, n the number of values the channel contributed.
  int ljung_box_lags = 0;
  /// The probability P of the outlier gate in use (0 = none). Values that pass a gate are a
  /// truncated sample: their expected mean square and NIS are smaller than without the gate
  /// (e.g. 0.988 instead of 1 at P = 0.999), and the tests of size use these expectations.
  double gate_probability = 0.0;
  /// True when the gate tests each channel on its own (sequential updates, diagonal R); false when it
  /// tests all channels of a row jointly.
  bool gate_per_channel = true;
};

/// Largest number of lags a monitor keeps when the lag count is chosen automatically.
inline constexpr int kAutomaticLagLimit = 10;

/// The tests on one channel's standardized innovations z. Values rejected by an outlier gate are not
/// part of them (they did not enter the filter); they are counted in `rejected`.
struct ChannelConsistency {
  std::string name;                     ///< the channel's CSV column
  std::size_t used = 0;                 ///< values that entered the filter (the tests use these)
  std::size_t missing = 0;              ///< rows where the channel had no value
  std::size_t rejected = 0;             ///< values rejected by the outlier gate
  double z_mean = 0.0;                  ///< mean of z; 0 under the model
  double z_mean_p_value = 0.0;          ///< two-sided P(|N(0,1)| > sqrt(n) |mean|): a test of bias
  double z_mean_square = 0.0;           ///< mean of z²; about the factor by which S_cc is off
  double z_expected_mean_square = 1.0;  ///< its expectation under the model: 1, or less behind a gate
  /// Two-sided test of the size of the innovations: sum z² is chi-square(n) under the model (normal
  /// approximation with the truncated moments behind a gate).
  double z_mean_square_p_value = 0.0;
  double fraction_outside_1_96 = 0.0;  ///< share of |z| > 1.96; 0.05 under the model
  double lag1_autocorrelation = 0.0;   ///< r_1 of z (autocorrelation with the estimator of statistics.h)
  LjungBoxResult ljung_box{};          ///< whiteness up to ljung_box.lags lags
  JarqueBeraResult jarque_bera{};      ///< normality
};

/// The normalized innovation squared, per step and averaged over the steps with data.
struct NisConsistency {
  std::size_t steps = 0;            ///< steps with at least one channel used (N)
  double degrees_of_freedom = 0.0;  ///< sum of k_t, the channels used at each step
  double mean = 0.0;                ///< (1/N) sum NIS_t
  double expected = 0.0;            ///< sum(k_t) / N
  double lower_95 = 0.0;            ///< chi2 2.5% quantile of sum(k_t), divided by N
  double upper_95 = 0.0;            ///< chi2 97.5% quantile of sum(k_t), divided by N
  double p_value = 0.0;       ///< two-sided chi-square test of sum NIS_t with sum(k_t) degrees of freedom
  double scale_factor = 0.0;  ///< mean / expected: multiplying Q, R and the initial covariance by it makes
                              ///< the average consistent
  /// Share of steps whose NIS_t is outside the two-sided 95% interval of chi-square(k_t); 0.05 under the
  /// model without a gate (smaller behind one, which cuts the upper tail).
  double fraction_steps_outside_95 = 0.0;
};

/// All consistency results of a run.
struct ConsistencySummary {
  std::vector<ChannelConsistency> channels;  ///< model order
  NisConsistency nis;                        ///< the whole model
};

/// Accumulates the consistency tests row by row. Memory is O(channels × lags), independent of the
/// number of rows. Ljung–Box comes from running lagged sums and Jarque–Bera from running central
/// moments (P. Pébay, Formulas for robust, one-pass parallel computation of covariances and
/// arbitrary-order statistical moments, Sandia report SAND2008-6212, 2008).
class ConsistencyMonitor {
 public:
  /// Prepares for the named channels. Lags outside 0..100 are clamped into it.
  explicit ConsistencyMonitor(std::vector<std::string> channel_names, ConsistencyOptions options = {});

  /// Adds one row: the filter's record (innovation NaN where a channel was missing or rejected) and,
  /// optionally, m flags (nonzero = the channel's value was rejected by the gate on this row).
  void add(const InnovationRecord& record, const unsigned char* rejected = nullptr);

  /// The test results so far.
  ConsistencySummary summary() const;

 private:
  struct Channel {
    // Standardized innovations are shifted by the first one seen before summing, so that the sums stay
    // well conditioned when the mean is far from zero.
    double shift = 0.0;
    bool has_shift = false;
    std::size_t count = 0, missing = 0, rejected = 0, outside = 0;
    double mean = 0.0, m2 = 0.0, m3 = 0.0, m4 = 0.0;        // of the shifted values (Pébay 2008)
    double sum_squares_raw = 0.0;                           // sum z²
    double expected_squares = 0.0, variance_squares = 0.0;  // sum of E[z²] and Var[z²] of the values
    double smallest = 0.0, largest = 0.0;
    std::vector<double> recent;  // ring of the last `lags` shifted values, NaN where none
    std::size_t position = 0;    // values pushed, missing included
    std::vector<double> product_sum, lead_sum, lag_sum;  // per lag k: sums over complete pairs
    std::vector<std::size_t> pairs;
  };
  void push(Channel& channel, double z, int row_channels);
  ChannelConsistency finish(const Channel& channel, const std::string& name) const;
  std::vector<std::string> names_;
  std::vector<Channel> channels_;
  int lags_kept_;
  int fixed_lags_;
  std::vector<double> step_lower_, step_upper_;  // per-step NIS interval for k = 0..m channels
  // Moments of z² of one value and of NIS_t for k channels, under the model (behind the gate if any).
  std::vector<double> value_mean_, value_variance_, step_mean_, step_variance_;
  bool gated_ = false;
  std::size_t nis_steps_ = 0, nis_outside_ = 0;
  double nis_sum_ = 0.0, nis_dof_ = 0.0, nis_expected_ = 0.0, nis_variance_ = 0.0;
};

}  // namespace statewise
