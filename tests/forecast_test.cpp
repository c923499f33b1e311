// Forecasts past the end of a log: the layout of future rows, the predicted moments and the
// prediction intervals for new measurements.

#include "statewise/forecast.h"

#include <doctest/doctest.h>

#include <cmath>
#include <string>

#include "statewise/error.h"
#include "input_error.h"

using namespace statewise;

using statewise::testing::input_error_of;

namespace {

// x_t = a x_{t-1} + b u + w, y = x + v (an AR(1) level with an input), step 60 s.
StateSpaceModel ar1_model(double a, double q, double r) {
  StateSpaceModel model;
  model.state_names = {"level"};
  model.observation_names = {"y"};
  model.input_names = {"u"};
  model.A = Eigen::MatrixXd::Constant(1, 1, a);
  model.B = Eigen::MatrixXd::Constant(1, 1, 0.5);
  model.C = Eigen::MatrixXd::Identity(1, 1);
  model.Q = Eigen::MatrixXd::Constant(1, 1, q);
  model.R = Eigen::MatrixXd::Constant(1, 1, r);
  model.initial_mean = Eigen::VectorXd::Zero(1);
  model.initial_covariance = Eigen::MatrixXd::Identity(1, 1);
  model.time_column = "time";
  model.step = 60.0;
  validate_model(model, "test");
  return model;
}

}  // namespace

TEST_CASE("predicted moments of an AR(1) level follow the closed form") {
  // First principles: x_{N+k} = a^k x_N + sum_{i<k} a^i (b u + w), so with x_N ~ N(m, P) the mean is
  // a^k m + b u (1 - a^k) / (1 - a) and the variance a^{2k} P + q (1 - a^{2k}) / (1 - a^2).
  const double a = 0.9, q = 0.2, b = 0.5, u = 2.0, m = 3.0, P = 0.4;
  const StateSpaceModel model = ar1_model(a, q, 1.0);
  TransitionCache transitions(model);
  const ForecastPlan plan = plan_forecast(model, ForecastRequest{5, false, 0.0, 0.0}, 0.0);
  const StateTrack track = forecast_states(Eigen::VectorXd::Constant(1, m),
                                           Eigen::MatrixXd::Constant(1, 1, P), &u, transitions, plan.gaps);
  REQUIRE(track.size() == 5);
  for (int k = 1; k <= 5; ++k) {
    const double ak = std::pow(a, k);
    const std::size_t row = static_cast<std::size_t>(k - 1);
    CHECK(track.mean(row)(0) == doctest::Approx(ak * m + b * u * (1 - ak) / (1 - a)).epsilon(1e-14));
    CHECK(track.covariance(row)(0, 0) ==
          doctest::Approx(ak * ak * P + q * (1 - ak * ak) / (1 - a * a)).epsilon(1e-14));
    CHECK(plan.seconds_after_last[row] == 60.0 * k);
  }
}

TEST_CASE("prediction intervals for a new measurement include the measurement noise") {
  // Reference: z = scipy.stats.norm.ppf(0.975) = 1.959963984540054 and norm.ppf(0.995) =
  // 2.5758293035489004 (scipy 1.10.1); the interval is C x ∓ z sqrt(C P C' + R) (first principles:
  // y = C x + v with x and v independent).
  const StateSpaceModel model = ar1_model(0.9, 0.2, 0.25);
  const Eigen::VectorXd mean = Eigen::VectorXd::Constant(1, 3.0);
  const Eigen::MatrixXd covariance = Eigen::MatrixXd::Constant(1, 1, 0.75);
  const MeasurementInterval interval95 = measurement_interval(model, mean, covariance, 0.95);
  CHECK(interval95.sd(0) == 1.0);
  CHECK(interval95.lower(0) == doctest::Approx(3.0 - 1.959963984540054).epsilon(1e-15));
  CHECK(interval95.upper(0) == doctest::Approx(3.0 + 1.959963984540054).epsilon(1e-15));
  const MeasurementInterval interval99 = measurement_interval(model, mean, covariance, 0.99);
  CHECK(interval99.upper(0) == doctest::Approx(3.0 + 2.5758293035489004).epsilon(1e-15));
  CHECK(std::isnan(measurement_interval(model, mean, covariance, 1.0).upper(0)));
}

TEST_CASE("future rows are laid out by the model's time axis") {
  // Specification: docs/cli.md, section "statewise forecast".
  StateSpaceModel stepped = ar1_model(0.9, 0.2, 1.0);
  const ForecastPlan whole_steps = plan_forecast(stepped, ForecastRequest{2, false, 0.0, 180.0}, 0.0);
  CHECK(whole_steps.gaps[0].steps == 3);
  CHECK(whole_steps.seconds_after_last[1] == 360.0);
  // Rows up to the time, the last one allowed to lie past it by 1e-6 of a step (6e-5 s here).
  CHECK(plan_forecast(stepped, ForecastRequest{0, true, 299.9999, 0.0}, 0.0).gaps.size() == 4);
  CHECK(plan_forecast(stepped, ForecastRequest{0, true, 299.99999, 0.0}, 0.0).gaps.size() == 5);
  StateSpaceModel continuous = stepped;
  continuous.domain = TimeDomain::continuous;
  continuous.step = 0.0;
  const ForecastPlan median_gap = plan_forecast(continuous, ForecastRequest{3, false, 0.0, 0.0}, 12.5);
  CHECK(median_gap.step_seconds == 12.5);
  CHECK(median_gap.gaps[2].seconds == 12.5);
  StateSpaceModel rows = stepped;
  rows.step = 0.0;
  const ForecastPlan row_steps = plan_forecast(rows, ForecastRequest{2, false, 0.0, 0.0}, 30.0);
  CHECK(row_steps.gaps[1].steps == 1);
  CHECK(row_steps.seconds_after_last.empty());

  CHECK(input_error_of([&] {
          plan_forecast(stepped, ForecastRequest{1, false, 0.0, 90.0}, 0.0);
        }) == "--step: expected a whole multiple of the model's step of 60 s, got 90");
  CHECK(
      input_error_of([&] {
        plan_forecast(rows, ForecastRequest{1, false, 0.0, 60.0}, 0.0);
      }) ==
      "--step: the model has no \"step\", so its future rows are one model step each; remove --step, or give "
      "the model a \"step\"");
  CHECK(
      input_error_of([&] {
        plan_forecast(rows, ForecastRequest{0, true, 600.0, 0.0}, 0.0);
      }) ==
      "--until: needs a model with a time axis (a continuous model, or a discrete one with a \"step\"); use "
      "--horizon");
  CHECK(
      input_error_of([&] {
        plan_forecast(continuous, ForecastRequest{3, false, 0.0, 0.0}, 0.0);
      }) ==
      "--step: needed: the log has no two rows at different times, so there is no typical gap to use as the "
      "forecast step; give --step SECONDS");
  CHECK(input_error_of([&] {
          plan_forecast(stepped, ForecastRequest{0, true, 30.0, 0.0}, 0.0);
        }) ==
        "--until: is 30 s after the log's last row, less than one forecast step of 60 s; expected a later "
        "time");
  CHECK(input_error_of([&] {
          plan_forecast(stepped, ForecastRequest{0, false, 0.0, 0.0}, 0.0);
        }) == "--horizon: expected a number of rows from 1 to 10000000, got 0");
}
