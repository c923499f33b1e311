#pragma once
/// \file screening.h
/// Screening of measurements before they reach the filter: a chi-square gate on the innovations that
/// rejects outliers (a rejected value is then treated as missing), and a detector of stuck sensors
/// (a channel repeating exactly the same value for many observations in a row).
///
/// The gate is the validation gate of target tracking (Y. Bar-Shalom, X. R. Li, T. Kirubarajan,
/// Estimation with Applications to Tracking and Navigation, 2001, section 5.4; Y. Bar-Shalom and
/// T. E. Fortmann, Tracking and Data Association, 1988): a value is accepted when its normalized
/// innovation squared is below the chi-square quantile of probability P, so that under the model a
/// fraction 1 - P of good values is rejected.

#include <Eigen/Core>
#include <cstddef>
#include <string>
#include <vector>

#include "statewise/model.h"

namespace statewise {

/// How the gate tests a row.
enum class GateMode {
  per_channel,  ///< R is diagonal: channels are tested one at a time, each against the prediction updated
                ///< with the channels before it on the row (a sequential update), with chi-square(1)
  joint,  ///< R has correlations: all observed channels of a row are tested together with chi-square(k) and
          ///< rejected together
};

/// What the gate decided for one row. Vectors have one entry per channel.
struct GateDecision {
  std::vector<double> kept;             ///< the row's values with rejected ones replaced by NaN
  std::vector<unsigned char> rejected;  ///< 1 where the value was rejected, else 0
  /// For rejected values: the innovation y - C x against the prediction before the row's update, and
  /// its standard deviation sqrt(C P C' + R)_cc, so that the value's standardized innovation can be
  /// reported like an accepted one's; NaN elsewhere.
  Eigen::VectorXd innovation, innovation_sd;
  int rejected_count = 0;  ///< number of values rejected on the row
};

/// The chi-square gate. Typical use per row, between predict and update:
/// `gate.screen(values, filter.mean(), filter.covariance(), decision); filter.update(decision.kept.data(),
/// record);`
class OutlierGate {
 public:
  /// `probability` P is in (0, 1), e.g. 0.999; the mode is per_channel when R is diagonal (every
  /// off-diagonal entry exactly 0), joint otherwise.
  OutlierGate(const StateSpaceModel& model, double probability);

  /// The mode chosen from R.
  GateMode mode() const { return mode_; }
  /// P.
  double probability() const { return probability_; }
  /// The chi-square quantile of P with k degrees of freedom (k = 1 in per_channel mode).
  double threshold(int k) const { return thresholds_[static_cast<std::size_t>(k)]; }

  /// Screens one row of m values (NaN = missing) against the predicted mean and covariance of the
  /// state at that row. A value whose innovation variance is not positive cannot be tested and is
  /// accepted. Allocates nothing once `decision` has been used for a row of this model.
  void screen(const double* values, const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance,
              GateDecision& decision);

 private:
  StateSpaceModel model_;
  double probability_;
  GateMode mode_;
  std::vector<double> thresholds_;  // index k
  Eigen::VectorXd mean_, gain_, row_times_covariance_;
  Eigen::MatrixXd covariance_;
  std::vector<int> observed_;
  Eigen::MatrixXd joint_C_, joint_S_;
  Eigen::VectorXd joint_v_;
};

/// One stretch where a channel repeated exactly the same value.
struct StuckRun {
  std::size_t channel = 0;     ///< channel index (model order)
  double value = 0.0;          ///< the repeated value
  std::size_t count = 0;       ///< number of observations in the run (missing cells in between are skipped)
  std::size_t first_row = 0;   ///< 1-based data row of the first observation of the run
  std::size_t last_row = 0;    ///< 1-based data row of the last
  std::size_t first_line = 0;  ///< input line of the first observation
  std::size_t last_line = 0;   ///< input line of the last
};

/// Finds runs of at least `run_length` consecutive observations of a channel with exactly the same
/// value (missing cells do not break a run, they are skipped). Memory is constant: at most
/// kStuckRunsKept runs are kept, the rest only counted.
class StuckValueDetector {
 public:
  /// `channels` = m; `run_length` >= 2, or 0 to detect nothing.
  StuckValueDetector(std::size_t channels, std::size_t run_length);
  /// Adds one data row of m values (NaN = missing) read from input line `line`.
  void add(const double* values, std::size_t line);
  /// The runs of at least run_length found so far (including runs still going on), in the order they
  /// started, at most kStuckRunsKept.
  std::vector<StuckRun> runs() const;
  /// Number of runs found, including those not kept.
  std::size_t run_count() const;
  /// The run length that counts as stuck (0 = detection off).
  std::size_t run_length() const { return run_length_; }

 private:
  std::size_t run_length_;
  std::size_t rows_ = 0;
  std::vector<StuckRun> current_;  // per channel, the run in progress (count 0 = none)
  std::vector<StuckRun> finished_;
  std::size_t finished_count_ = 0;
};

/// Most stuck runs a detector keeps.
inline constexpr std::size_t kStuckRunsKept = 100;

/// The default run length of `--stuck`: 20 identical observations in a row. A sensor whose noise
/// spans a few steps of its resolution repeats a value a few times by chance, rarely 20 times.
inline constexpr std::size_t kDefaultStuckRunLength = 20;

}  // namespace statewise
