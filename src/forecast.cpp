#include "statewise/forecast.h"

#include <charconv>
#include <cmath>
#include <string>

#include "statewise/error.h"
#include "statewise/filter.h"
#include "statewise/statistics.h"

namespace statewise {

namespace {

std::string number_text(double value) {
  char buffer[64];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::general, 10);
  return std::string(buffer, result.ptr);
}

}  // namespace

ForecastPlan plan_forecast(const StateSpaceModel& model, const ForecastRequest& request, double median_gap) {
  const SourceLocation at_step{"--step", 0, 0, ""};
  const SourceLocation at_until{"--until", 0, 0, ""};
  const SourceLocation at_horizon{"--horizon", 0, 0, ""};
  if (request.step < 0.0 || !std::isfinite(request.step))
    raise_input_error(at_step, "expected a positive number of seconds, got " + number_text(request.step));
  ForecastPlan plan;
  Gap gap;
  if (model.domain == TimeDomain::continuous) {
    plan.step_seconds = request.step > 0.0 ? request.step : median_gap;
    if (!(plan.step_seconds > 0.0))
      raise_input_error(at_step,
                        "needed: the log has no two rows at different times, so there is no typical gap "
                        "to use as the forecast step; give --step SECONDS");
    gap = Gap{0, plan.step_seconds};
  } else if (model.step > 0.0) {
    plan.step_seconds = request.step > 0.0 ? request.step : model.step;
    const double steps = plan.step_seconds / model.step;
    const double whole = std::round(steps);
    if (whole < 1.0 || std::abs(plan.step_seconds - whole * model.step) > kStepTolerance * model.step)
      raise_input_error(at_step, "expected a whole multiple of the model's step of " +
                                     number_text(model.step) + " s, got " + number_text(plan.step_seconds));
    gap = Gap{static_cast<std::int64_t>(whole), plan.step_seconds};
  } else {
    if (request.step > 0.0)
      raise_input_error(at_step,
                        "the model has no \"step\", so its future rows are one model step each; remove "
                        "--step, or give the model a \"step\"");
    if (request.has_until)
      raise_input_error(at_until,
                        "needs a model with a time axis (a continuous model, or a discrete one with a "
                        "\"step\"); use --horizon");
    gap = Gap{1, 0.0};
  }

  std::int64_t rows = request.horizon;
  if (request.has_until) {
    const double count =
        std::floor((request.until_seconds + kStepTolerance * plan.step_seconds) / plan.step_seconds);
    if (count < 1.0)
      raise_input_error(at_until, "is " + number_text(request.until_seconds) +
                                      " s after the log's last row, less than one forecast step of " +
                                      number_text(plan.step_seconds) + " s; expected a later time");
    if (count > static_cast<double>(kMaxForecastRows))
      raise_input_error(at_until, "would need " + number_text(count) + " forecast rows; expected at most " +
                                      std::to_string(kMaxForecastRows));
    rows = static_cast<std::int64_t>(count);
  } else if (rows < 1 || rows > kMaxForecastRows) {
    raise_input_error(at_horizon, "expected a number of rows from 1 to " + std::to_string(kMaxForecastRows) +
                                      ", got " + std::to_string(rows));
  }
  plan.gaps.assign(static_cast<std::size_t>(rows), gap);
  if (plan.step_seconds > 0.0) {
    plan.seconds_after_last.resize(static_cast<std::size_t>(rows));
    for (std::int64_t k = 0; k < rows; ++k)
      plan.seconds_after_last[static_cast<std::size_t>(k)] = static_cast<double>(k + 1) * plan.step_seconds;
  }
  return plan;
}

StateTrack forecast_states(const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance,
                           const double* held_inputs, TransitionCache& transitions,
                           const std::vector<Gap>& gaps) {
  StateTrack track(static_cast<int>(mean.size()));
  track.reserve(gaps.size());
  Eigen::VectorXd current_mean = mean, next_mean(mean.size());
  Eigen::MatrixXd current_covariance = covariance, next_covariance(covariance.rows(), covariance.cols());
  Eigen::MatrixXd workspace(covariance.rows(), covariance.cols());
  for (const Gap& gap : gaps) {
    predict_moments(transitions.transition(gap), current_mean, current_covariance, held_inputs, next_mean,
                    next_covariance, workspace);
    current_mean.swap(next_mean);
    current_covariance.swap(next_covariance);
    track.push_back(current_mean, current_covariance);
  }
  return track;
}

MeasurementInterval measurement_interval(const StateSpaceModel& model,
                                         const Eigen::Ref<const Eigen::VectorXd>& mean,
                                         const Eigen::Ref<const Eigen::MatrixXd>& covariance, double level) {
  MeasurementInterval interval;
  // y = C x + v: mean C x, covariance C P C' + R (x and v independent).
  interval.mean = model.C * mean;
  const Eigen::MatrixXd measurement_covariance = model.C * covariance * model.C.transpose() + model.R;
  interval.sd = measurement_covariance.diagonal().cwiseMax(0.0).cwiseSqrt();
  // The upper quantile from the lower tail, which keeps its precision for levels close to 1.
  const double z = level > 0.0 && level < 1.0 ? -normal_quantile(0.5 * (1.0 - level)) : std::nan("");
  interval.lower = interval.mean - z * interval.sd;
  interval.upper = interval.mean + z * interval.sd;
  return interval;
}

}  // namespace statewise
