// Checks of the forward pass: the automatic switch to the square-root form, the definiteness check,
// and the gate's bookkeeping (flags, used values, innovations of rejected values, the rejection log).

#include "statewise/forward_pass.h"

#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "simulation.h"
#include "test_models.h"

using namespace statewise;
using testing::cold_room_model;
using testing::ill_conditioned_model;

namespace {

}  // namespace

TEST_CASE("plain numerics switch to the square-root form where the plain update breaks down") {
  // The plain update fails on the first row (square_root_filter_test.cpp shows why); the pass must redo
  // that row in square-root form from the same prediction and carry on, giving exactly what a
  // square-root filter gives from the start (same arithmetic from the same prior).
  const StateSpaceModel model = ill_conditioned_model(std::ldexp(1.0, -27));
  const Transition transition = model_transition(model);
  const double rows[3][2] = {{1.0, 1.0 + std::ldexp(1.0, -28)},
                             {1.25, 1.25 + std::ldexp(3.0, -29)},
                             {0.75, 0.75 - std::ldexp(1.0, -30)}};
  ForwardPass pass(model, ForwardPassOptions{});
  SquareRootKalmanFilter root(model);
  InnovationRecord record = make_innovation_record(2);
  CHECK(pass.numerics() == Numerics::plain);
  for (int t = 0; t < 3; ++t) {
    if (t > 0) {
      pass.predict(transition, nullptr);
      root.predict(transition, nullptr);
    }
    REQUIRE(pass.update(rows[t], static_cast<std::size_t>(t + 2)) == StepStatus::ok);
    REQUIRE(root.update(rows[t], record) == StepStatus::ok);
    CHECK(pass.mean() == root.mean());
    CHECK(pass.covariance() == root.covariance());
  }
  CHECK(pass.numerics() == Numerics::square_root);
  REQUIRE(pass.numerics_switch().has_value());
  CHECK(pass.numerics_switch()->row == 1);
  CHECK(pass.numerics_switch()->line == 2);
  CHECK(pass.numerics_switch()->reason == describe(StepStatus::singular_innovation_covariance));
  CHECK(pass.rows() == 3);
}

TEST_CASE("square-root numerics from the first row, and plain numerics with nothing to fix") {
  const StateSpaceModel model = cold_room_model();
  const Transition transition = model_transition(model);
  const testing::SimulatedLog log = testing::simulate(model, 300, 4);
  ForwardPassOptions options;
  options.numerics = Numerics::square_root;
  ForwardPass root_pass(model, options);
  ForwardPass plain_pass(model, ForwardPassOptions{});
  KalmanFilter plain(model);
  InnovationRecord record = make_innovation_record(2);
  for (int t = 0; t < log.rows; ++t) {
    if (t > 0) {
      root_pass.predict(transition, nullptr);
      plain_pass.predict(transition, nullptr);
      plain.predict(transition, nullptr);
    }
    const double* y = &log.values[static_cast<std::size_t>(2 * t)];
    REQUIRE(root_pass.update(y, 0) == StepStatus::ok);
    REQUIRE(plain_pass.update(y, 0) == StepStatus::ok);
    REQUIRE(plain.update(y, record) == StepStatus::ok);
    // The plain pass is the plain filter, bit for bit; the square-root pass agrees to 1e-9
    // (square_root_filter_test.cpp).
    REQUIRE(plain_pass.mean() == plain.mean());
    REQUIRE(plain_pass.covariance() == plain.covariance());
    REQUIRE((root_pass.mean() - plain.mean()).cwiseAbs().maxCoeff() <= 1e-9 * 18.0);
  }
  CHECK(root_pass.numerics() == Numerics::square_root);
  CHECK_FALSE(root_pass.numerics_switch().has_value());
  CHECK(plain_pass.numerics() == Numerics::plain);
  CHECK_FALSE(plain_pass.numerics_switch().has_value());
  CHECK(plain_pass.rejected()[0] == 0);
}

TEST_CASE("has_lost_definiteness tells rounding from indefiniteness") {
  // First principles: a PSD matrix of rank 1 (v v') has zero pivots after the first; rounding makes
  // them tiny of either sign, which must not count. A matrix with a negative eigenvalue must.
  Eigen::MatrixXd rank_one(3, 3);
  const Eigen::Vector3d v(0.3, 1.7, -2.9);
  rank_one = v * v.transpose();
  CHECK_FALSE(has_lost_definiteness(rank_one));
  CHECK_FALSE(has_lost_definiteness(Eigen::MatrixXd::Identity(2, 2)));
  CHECK_FALSE(has_lost_definiteness(Eigen::MatrixXd::Zero(2, 2)));
  Eigen::MatrixXd indefinite(2, 2);
  indefinite << 1.0, 1.001, 1.001, 1.0;  // eigenvalues 2.001 and -0.001
  CHECK(has_lost_definiteness(indefinite));
  Eigen::MatrixXd negative_variance = Eigen::MatrixXd::Identity(2, 2);
  negative_variance(1, 1) = -1e-300;
  CHECK(has_lost_definiteness(negative_variance));
  Eigen::MatrixXd not_finite = Eigen::MatrixXd::Identity(2, 2);
  not_finite(0, 0) = std::nan("");
  CHECK(has_lost_definiteness(not_finite));
}

TEST_CASE("the gate's decisions reach the filter, the output record and the rejection log") {
  const StateSpaceModel model = cold_room_model();
  const Transition transition = model_transition(model);
  testing::SimulatedLog log = testing::simulate(model, 400, 8);
  // Spikes of 3 °C (30 standard deviations of probe A, 15 of probe B) on three rows.
  log.values[2 * 100] += 3.0;
  log.values[2 * 200 + 1] -= 3.0;
  log.values[2 * 300] += 3.0;
  log.values[2 * 300 + 1] += 3.0;
  ForwardPassOptions options;
  options.reject_probability = 0.999;
  ForwardPass pass(model, options);
  KalmanFilter plain(model);  // fed by hand with the spiked values removed
  InnovationRecord record = make_innovation_record(2);
  std::size_t rejected_rows = 0;
  for (int t = 0; t < log.rows; ++t) {
    if (t > 0) {
      pass.predict(transition, nullptr);
      plain.predict(transition, nullptr);
    }
    const double* y = &log.values[static_cast<std::size_t>(2 * t)];
    const Eigen::VectorXd predicted = pass.mean();
    REQUIRE(pass.update(y, static_cast<std::size_t>(t + 2)) == StepStatus::ok);
    double used[2] = {pass.used_values()[0], pass.used_values()[1]};
    REQUIRE(plain.update(used, record) == StepStatus::ok);
    // Rejected values are missing for the filter: it gives what a filter given NaN there gives.
    REQUIRE(pass.mean() == plain.mean());
    for (int c = 0; c < 2; ++c) {
      if (pass.rejected()[c] == 0) {
        CHECK(pass.used_values()[c] == y[c]);
        continue;
      }
      CHECK(std::isnan(pass.used_values()[c]));
      // The innovation of a rejected value is reported against the prediction.
      CHECK(pass.record().innovation(c) == doctest::Approx(y[c] - predicted(0)));
    }
    rejected_rows += pass.row_had_rejection();
  }
  const RejectionLog& rejections = pass.rejections();
  // The spikes, plus at most a few false alarms (1 - P = 0.1% of 800 values: 0.8 expected).
  CHECK(rejections.count >= 4);
  CHECK(rejections.count <= 7);
  CHECK(rejections.row_count == rejected_rows);
  auto listed = [&](std::size_t row, std::size_t channel) {
    for (const RejectedValue& r : rejections.first)
      if (r.row == row && r.channel == channel) return &r;
    return static_cast<const RejectedValue*>(nullptr);
  };
  REQUIRE(listed(101, 0) != nullptr);
  CHECK(listed(101, 0)->line == 102);
  CHECK(listed(101, 0)->value == log.values[2 * 100]);
  CHECK(listed(101, 0)->z > 10.0);
  REQUIRE(listed(201, 1) != nullptr);
  CHECK(listed(201, 1)->z < -10.0);
  CHECK(listed(301, 0) != nullptr);
  CHECK(listed(301, 1) != nullptr);
  const ConsistencySummary summary = pass.consistency();
  CHECK(summary.channels[0].rejected == rejections.per_channel[0]);
  CHECK(summary.channels[1].rejected == rejections.per_channel[1]);
  CHECK(summary.channels[0].used + summary.channels[0].rejected == 400);
}

TEST_CASE("the forward pass reports stuck runs with their lines") {
  const StateSpaceModel model = cold_room_model();
  const Transition transition = model_transition(model);
  testing::SimulatedLog log = testing::simulate(model, 100, 12);
  for (int t = 40; t < 65; ++t) log.values[static_cast<std::size_t>(2 * t + 1)] = -18.25;  // probe B stuck
  ForwardPass pass(model, ForwardPassOptions{});
  for (int t = 0; t < log.rows; ++t) {
    if (t > 0) pass.predict(transition, nullptr);
    REQUIRE(pass.update(&log.values[static_cast<std::size_t>(2 * t)], static_cast<std::size_t>(t + 2)) ==
            StepStatus::ok);
  }
  const std::vector<StuckRun> runs = pass.stuck().runs();
  REQUIRE(runs.size() == 1);
  CHECK(runs[0].channel == 1);
  CHECK(runs[0].value == -18.25);
  CHECK(runs[0].count == 25);
  CHECK(runs[0].first_line == 42);
  CHECK(runs[0].last_line == 66);
}

TEST_CASE("after ten fully rejected rows the gate lets the next row in, so the filter finds a jump") {
  // A level that jumps by 50 measurement standard deviations at row 100 (a refilled tank, a moved
  // sensor). The gate rejects the new values, the filter coasts on its prediction, and without the
  // re-acquisition rule it would stay lost until its variance grew to the size of the jump. Rows 100 to
  // 109 are rejected; at row 110 (line 112) the filter takes on its initial uncertainty again
  // (P + P0, P0 = 100 here) and the row without the gate, which brings it to the new level at once.
  StateSpaceModel model;
  model.state_names = {"level"};
  model.observation_names = {"y"};
  model.A = Eigen::MatrixXd::Identity(1, 1);
  model.B = Eigen::MatrixXd::Zero(1, 0);
  model.C = Eigen::MatrixXd::Identity(1, 1);
  model.Q = Eigen::MatrixXd::Constant(1, 1, 0.01);
  model.R = Eigen::MatrixXd::Constant(1, 1, 1.0);
  model.initial_mean = Eigen::VectorXd::Zero(1);
  model.initial_covariance = Eigen::MatrixXd::Constant(1, 1, 100.0);
  const Transition transition = model_transition(model);
  ForwardPassOptions options;
  options.reject_probability = 0.999;
  ForwardPass pass(model, options);
  testing::TestRandom random{31};
  for (int t = 0; t < 200; ++t) {
    if (t > 0) pass.predict(transition, nullptr);
    const double y = (t >= 100 ? 50.0 : 0.0) + random.normal() * 0.5;  // well inside the gate before the jump
    REQUIRE(pass.update(&y, static_cast<std::size_t>(t + 2)) == StepStatus::ok);
    if (t >= 100 && t < 110) CHECK(pass.rejected()[0] == 1);
    if (t == 110) CHECK(pass.rejected()[0] == 0);
  }
  CHECK(pass.rejections().reacquired == 1);
  CHECK(pass.rejections().first_reacquired_line == 112);
  CHECK(pass.rejections().count == 10);
  CHECK(std::abs(pass.mean()(0) - 50.0) < 1.0);
}
