#pragma once
/// \file forecast.h
/// Predictions past the end of a log: where the future rows go (every S seconds, or every model step),
/// the predicted state moments there from the filtered state at the last row with the inputs held
/// at their last values, and prediction intervals for a new measurement, which include the
/// measurement noise R (docs/algorithms.md, section "Forecasts").

#include <Eigen/Core>
#include <cstdint>
#include <vector>

#include "statewise/discretize.h"
#include "statewise/model.h"
#include "statewise/smoother.h"
#include "statewise/time_axis.h"

namespace statewise {

/// Most rows one forecast may have.
inline constexpr std::int64_t kMaxForecastRows = 10'000'000;

/// What a forecast should cover. Give `horizon` or `until`, not both.
struct ForecastRequest {
  std::int64_t horizon = 0;    ///< number of future rows (>= 1), or 0 when `until` is used
  bool has_until = false;      ///< forecast up to a time
  double until_seconds = 0.0;  ///< that time, in seconds after the log's last row
  /// Seconds between future rows; 0 = the default: the model's step for a discrete model, the log's
  /// median gap for a continuous one. Must be a whole number of steps for a discrete model with a
  /// step; not allowed for a discrete model without one (its future rows are one step each).
  double step = 0.0;
};

/// Where the future rows go.
struct ForecastPlan {
  std::vector<Gap> gaps;  ///< the gap before each future row (the first from the log's last row)
  /// Each future row's time in seconds after the log's last row; empty when the model has no time
  /// axis (a discrete model without a step).
  std::vector<double> seconds_after_last;
  double step_seconds = 0.0;  ///< seconds between future rows; 0 without a time axis
};

/// Lays out the future rows. `median_gap` is the log's median gap between rows in seconds (used as a
/// continuous model's default step; 0 when unknown). Raises InputError at "--step", "--until" or
/// "--horizon" for a request the model cannot serve (messages in docs/cli.md).
ForecastPlan plan_forecast(const StateSpaceModel& model, const ForecastRequest& request, double median_gap);

/// Predicted moments of the state at each future row: starting from `mean`, `covariance` (the
/// filtered moments at the log's last row), each gap applies x = A x + B u, P = A P A' + Q with the
/// inputs held at `held_inputs` (p values; may be null when p = 0).
StateTrack forecast_states(const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance,
                           const double* held_inputs, TransitionCache& transitions,
                           const std::vector<Gap>& gaps);

/// A central prediction interval for a new measurement of each channel, y ~ N(C x, C P C' + R):
/// mean ∓ z sd with z the standard normal quantile at (1 + level) / 2. It includes the measurement
/// noise, so it is wider than the interval for the noise-free signal C x (whose sd is `c_sd` in the
/// estimates table).
struct MeasurementInterval {
  Eigen::VectorXd mean;   ///< C x
  Eigen::VectorXd sd;     ///< sqrt of the diagonal of C P C' + R
  Eigen::VectorXd lower;  ///< mean - z sd
  Eigen::VectorXd upper;  ///< mean + z sd
};

/// The interval for `level` in (0, 1) (NaN bounds otherwise).
MeasurementInterval measurement_interval(const StateSpaceModel& model,
                                         const Eigen::Ref<const Eigen::VectorXd>& mean,
                                         const Eigen::Ref<const Eigen::MatrixXd>& covariance, double level);

}  // namespace statewise
