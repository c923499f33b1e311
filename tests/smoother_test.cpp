// Checks of the Rauch–Tung–Striebel smoother against the joint Gaussian computed directly.

#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "joint_gaussian.h"
#include "statewise/smoother.h"
#include "test_models.h"

using namespace statewise;

namespace {

using testing::three_state_model;

struct Smoothed {
  StateTrack track;
  SmoothStatus status;
};

Smoothed smooth(const StateSpaceModel& model, const std::vector<double>& values, const std::vector<double>& inputs,
                int rows) {
  TransitionSchedule schedule;
  schedule.transitions.push_back(model_transition(model));
  KalmanFilter filter(model);
  InnovationRecord record = make_innovation_record(model.channel_count());
  StateTrack track(model.state_count());
  for (int t = 0; t < rows; ++t) {
    if (t > 0) filter.predict(schedule.step(static_cast<std::size_t>(t - 1)), &inputs[static_cast<std::size_t>(t - 1)]);
    REQUIRE(filter.update(&values[static_cast<std::size_t>(t * model.channel_count())], record) == StepStatus::ok);
    track.push_back(filter.mean(), filter.covariance());
  }
  const SmoothStatus status = rts_smooth(track, schedule, inputs.data(), model.input_count());
  return {std::move(track), status};
}

}  // namespace

TEST_CASE("smoothed means and covariances equal the conditional moments of the joint Gaussian") {
  // First principles: the RTS smoother computes E[x_t | all observed values] and its covariance;
  // here they are computed directly by conditioning the stacked joint Gaussian (tests/joint_gaussian.h).
  const StateSpaceModel model = three_state_model();
  const int rows = 15;
  std::vector<double> values(static_cast<std::size_t>(rows * 2)), inputs(static_cast<std::size_t>(rows));
  for (int t = 0; t < rows; ++t) {
    values[static_cast<std::size_t>(2 * t)] = std::sin(0.7 * t) + 1.0 + 0.1 * (t % 3);
    values[static_cast<std::size_t>(2 * t + 1)] = std::cos(0.7 * t) * 0.6 - 0.05 * (t % 4);
    inputs[static_cast<std::size_t>(t)] = (t % 5 == 0) ? 1.0 : 0.0;
  }
  // Missing values: a stretch of channel 1, single cells of channel 2, and one whole row.
  for (int t = 4; t < 8; ++t) values[static_cast<std::size_t>(2 * t)] = std::nan("");
  values[3] = values[21] = std::nan("");
  values[24] = values[25] = std::nan("");
  const Smoothed result = smooth(model, values, inputs, rows);
  REQUIRE(result.status.ok);
  const auto reference = testing::joint_gaussian_reference(model, values, inputs, rows);
  for (int t = 0; t < rows; ++t) {
    for (int i = 0; i < 3; ++i) {
      INFO("row " << t << " state " << i);
      CHECK(result.track.mean(static_cast<std::size_t>(t))(i) ==
            doctest::Approx(reference.conditional_mean(3 * t + i)).epsilon(1e-10));
      for (int j = 0; j < 3; ++j)
        CHECK(result.track.covariance(static_cast<std::size_t>(t))(i, j) ==
              doctest::Approx(reference.conditional_covariance(3 * t + i, 3 * t + j)).epsilon(1e-9).scale(1e-3));
    }
  }
}

TEST_CASE("the smoother handles a singular predicted covariance") {
  // Q = 0 in the offset direction and a zero initial variance for it: P_{t+1|t} is singular. The
  // conditional moments are still defined; compare with the joint Gaussian.
  StateSpaceModel model = three_state_model();
  model.Q(2, 2) = 0.0;
  model.initial_covariance(2, 2) = 0.0;
  const int rows = 6;
  std::vector<double> values(static_cast<std::size_t>(rows * 2)), inputs(static_cast<std::size_t>(rows), 0.0);
  for (int t = 0; t < rows * 2; ++t) values[static_cast<std::size_t>(t)] = 0.3 * t - 1.0;
  values[5] = std::nan("");
  const Smoothed result = smooth(model, values, inputs, rows);
  REQUIRE(result.status.ok);
  CHECK(result.status.pseudo_inverse_rows == static_cast<std::size_t>(rows - 1));
  const auto reference = testing::joint_gaussian_reference(model, values, inputs, rows);
  for (int t = 0; t < rows; ++t)
    for (int i = 0; i < 3; ++i)
      CHECK(result.track.mean(static_cast<std::size_t>(t))(i) ==
            doctest::Approx(reference.conditional_mean(3 * t + i)).epsilon(1e-9).scale(1.0));
}

TEST_CASE("smoothing a single row returns the filtered moments") {
  const StateSpaceModel model = three_state_model();
  std::vector<double> values = {1.0, 2.0}, inputs = {0.0};
  const Smoothed result = smooth(model, values, inputs, 1);
  REQUIRE(result.status.ok);
  const auto reference = testing::joint_gaussian_reference(model, values, inputs, 1);
  for (int i = 0; i < 3; ++i) CHECK(result.track.mean(0)(i) == doctest::Approx(reference.conditional_mean(i)));
}
