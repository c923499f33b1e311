// Checks of the Kalman filter against results from outside the project.

#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "joint_gaussian.h"
#include "statewise/filter.h"
#include "test_models.h"
#include "simulation.h"

using namespace statewise;
using testing::two_channel_model;
using testing::TestRandom;

namespace {

StateSpaceModel local_level(double level_variance, double noise_variance) {
  StateSpaceModel model;
  model.state_names = {"level"};
  model.observation_names = {"y"};
  model.A = Eigen::MatrixXd::Identity(1, 1);
  model.B = Eigen::MatrixXd::Zero(1, 0);
  model.C = Eigen::MatrixXd::Identity(1, 1);
  model.Q = Eigen::MatrixXd::Constant(1, 1, level_variance);
  model.R = Eigen::MatrixXd::Constant(1, 1, noise_variance);
  model.initial_mean = Eigen::VectorXd::Zero(1);
  model.initial_covariance = Eigen::MatrixXd::Constant(1, 1, 10.0);
  validate_model(model, "test");
  return model;
}

double run_filter(const StateSpaceModel& model, const std::vector<double>& values, const std::vector<double>& inputs,
                  int rows) {
  KalmanFilter filter(model);
  const Transition transition = model_transition(model);
  InnovationRecord record = make_innovation_record(model.channel_count());
  double log_likelihood = 0.0;
  for (int t = 0; t < rows; ++t) {
    if (t > 0)
      filter.predict(transition, model.input_count() > 0 ? &inputs[static_cast<std::size_t>((t - 1) * model.input_count())]
                                                        : nullptr);
    REQUIRE(filter.update(&values[static_cast<std::size_t>(t * model.channel_count())], record) == StepStatus::ok);
    log_likelihood += record.log_likelihood;
  }
  return log_likelihood;
}

}  // namespace

TEST_CASE("local level: steady-state variance matches the closed form") {
  // Harvey (1989), Forecasting, Structural Time Series Models and the Kalman Filter, section 3.3
  // (standard textbook result): for the local level model with signal-to-noise ratio q = Q/R the
  // steady-state predicted variance is P = R (q + sqrt(q^2 + 4q)) / 2.
  for (const double q : {0.01, 0.5, 1.0, 4.0, 100.0}) {
    const double noise = 2.0;
    const StateSpaceModel model = local_level(q * noise, noise);
    KalmanFilter filter(model);
    const Transition transition = model_transition(model);
    InnovationRecord record = make_innovation_record(1);
    const double y = 1.0;
    for (int t = 0; t < 2000; ++t) {
      if (t > 0) filter.predict(transition, nullptr);
      REQUIRE(filter.update(&y, record) == StepStatus::ok);
    }
    filter.predict(transition, nullptr);
    const double expected = noise * (q + std::sqrt(q * q + 4.0 * q)) / 2.0;
    INFO("q = " << q << ", expected " << expected << ", got " << filter.covariance()(0, 0));
    // The recursion converges geometrically; 2000 steps leave only rounding (a few ulps).
    CHECK(filter.covariance()(0, 0) == doctest::Approx(expected).epsilon(1e-13));
  }
}

TEST_CASE("steady-state covariance matches scipy's discrete algebraic Riccati solution") {
  // Reference values from scipy 1.10.1 (Debian python3-scipy, numpy 1.24.2):
  //   scipy.linalg.solve_discrete_are(A.T, C.T, Q, R)
  // which solves X = A X A' - A X C' (C X C' + R)^-1 C X A' + Q, the steady-state predicted covariance.
  SUBCASE("local linear trend, one channel") {
    StateSpaceModel model;
    model.state_names = {"level", "slope"};
    model.observation_names = {"y"};
    model.A.resize(2, 2);
    model.A << 1, 1, 0, 1;
    model.B = Eigen::MatrixXd::Zero(2, 0);
    model.C.resize(1, 2);
    model.C << 1, 0;
    model.Q = Eigen::Vector2d(0.1, 0.01).asDiagonal();
    model.R = Eigen::MatrixXd::Identity(1, 1);
    model.initial_mean = Eigen::VectorXd::Zero(2);
    model.initial_covariance = 100.0 * Eigen::MatrixXd::Identity(2, 2);
    KalmanFilter filter(model);
    const Transition transition = model_transition(model);
    InnovationRecord record = make_innovation_record(1);
    const double y = 0.0;
    for (int t = 0; t < 3000; ++t) {
      if (t > 0) filter.predict(transition, nullptr);
      REQUIRE(filter.update(&y, record) == StepStatus::ok);
    }
    filter.predict(transition, nullptr);
    const Eigen::MatrixXd& P = filter.covariance();
    CHECK(P(0, 0) == doctest::Approx(0.7292663872380021).epsilon(1e-12));
    CHECK(P(0, 1) == doctest::Approx(0.13150157364982365).epsilon(1e-12));
    CHECK(P(1, 0) == doctest::Approx(0.13150157364982365).epsilon(1e-12));
    CHECK(P(1, 1) == doctest::Approx(0.0654568562943564).epsilon(1e-12));
  }
  SUBCASE("two states, two channels, correlated noise") {
    const StateSpaceModel model = two_channel_model();
    KalmanFilter filter(model);
    const Transition transition = model_transition(model);
    InnovationRecord record = make_innovation_record(2);
    const double y[2] = {0.0, 0.0};
    const double u = 0.0;
    for (int t = 0; t < 500; ++t) {
      if (t > 0) filter.predict(transition, &u);
      REQUIRE(filter.update(y, record) == StepStatus::ok);
    }
    filter.predict(transition, &u);
    const Eigen::MatrixXd& P = filter.covariance();
    CHECK(P(0, 0) == doctest::Approx(0.48974875225562564).epsilon(1e-12));
    CHECK(P(0, 1) == doctest::Approx(0.04207676239944656).epsilon(1e-12));
    CHECK(P(1, 1) == doctest::Approx(0.3167096851012365).epsilon(1e-12));
  }
}

TEST_CASE("log-likelihood equals the joint Gaussian density of the observed values") {
  // First principles: the prediction-error decomposition sums to log N(Y; E[Y], Cov(Y)) of all
  // observed values at once (Harvey 1989, section 3.4; Durbin and Koopman 2012, section 7.2).
  const StateSpaceModel model = two_channel_model();
  const int rows = 12;
  TestRandom random{42};
  std::vector<double> values(static_cast<std::size_t>(rows * 2)), inputs(static_cast<std::size_t>(rows));
  for (auto& v : values) v = random.normal() * 2.0;
  for (auto& u : inputs) u = random.normal();
  // Missing: one channel on some rows, both on one row.
  values[1] = std::nan("");
  values[6] = std::nan("");
  values[10] = values[11] = std::nan("");
  values[19] = std::nan("");
  const auto reference = testing::joint_gaussian_reference(model, values, inputs, rows);
  const double log_likelihood = run_filter(model, values, inputs, rows);
  INFO("filter " << log_likelihood << ", joint density " << reference.log_likelihood);
  CHECK(log_likelihood == doctest::Approx(reference.log_likelihood).epsilon(1e-11));
}

TEST_CASE("filtered moments equal the conditional moments given the data so far") {
  // First principles: the filtered mean at row t is E[x_t | y_0..y_t]; compute it from the joint
  // Gaussian of the first t+1 rows alone.
  const StateSpaceModel model = two_channel_model();
  const int rows = 7;
  TestRandom random{7};
  std::vector<double> values(static_cast<std::size_t>(rows * 2)), inputs(static_cast<std::size_t>(rows));
  for (auto& v : values) v = random.normal();
  for (auto& u : inputs) u = random.normal();
  values[3] = std::nan("");
  values[8] = values[9] = std::nan("");
  KalmanFilter filter(model);
  const Transition transition = model_transition(model);
  InnovationRecord record = make_innovation_record(2);
  for (int t = 0; t < rows; ++t) {
    if (t > 0) filter.predict(transition, &inputs[static_cast<std::size_t>(t - 1)]);
    REQUIRE(filter.update(&values[static_cast<std::size_t>(2 * t)], record) == StepStatus::ok);
    const auto reference = testing::joint_gaussian_reference(model, values, inputs, t + 1);
    for (int i = 0; i < 2; ++i) {
      CHECK(filter.mean()(i) == doctest::Approx(reference.conditional_mean(2 * t + i)).epsilon(1e-10));
      for (int j = 0; j < 2; ++j)
        CHECK(filter.covariance()(i, j) ==
              doctest::Approx(reference.conditional_covariance(2 * t + i, 2 * t + j)).epsilon(1e-10));
    }
  }
}

TEST_CASE("a row with no observed channel is a pure prediction") {
  const StateSpaceModel model = two_channel_model();
  KalmanFilter filter(model);
  InnovationRecord record = make_innovation_record(2);
  const double nothing[2] = {std::nan(""), std::nan("")};
  REQUIRE(filter.update(nothing, record) == StepStatus::ok);
  CHECK(record.observed == 0);
  CHECK(std::isnan(record.nis));
  CHECK(record.log_likelihood == 0.0);
  CHECK(filter.mean() == model.initial_mean);
  CHECK(filter.covariance() == model.initial_covariance);
}

TEST_CASE("the covariance stays exactly symmetric") {
  const StateSpaceModel model = two_channel_model();
  KalmanFilter filter(model);
  const Transition transition = model_transition(model);
  InnovationRecord record = make_innovation_record(2);
  TestRandom random{3};
  const double u = 0.3;
  for (int t = 0; t < 1000; ++t) {
    if (t > 0) filter.predict(transition, &u);
    double y[2] = {random.normal(), random.uniform() < 0.3 ? std::nan("") : random.normal()};
    REQUIRE(filter.update(y, record) == StepStatus::ok);
    REQUIRE(filter.covariance()(0, 1) == filter.covariance()(1, 0));
  }
}

TEST_CASE("a singular innovation covariance is reported, not thrown, and the state is kept") {
  StateSpaceModel model = local_level(0.0, 0.0);
  model.initial_covariance(0, 0) = 0.0;  // S = P + R = 0
  KalmanFilter filter(model);
  InnovationRecord record = make_innovation_record(1);
  const double y = 1.0;
  CHECK(filter.update(&y, record) == StepStatus::singular_innovation_covariance);
  CHECK(filter.mean()(0) == 0.0);
}
