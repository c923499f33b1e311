// Discretization of continuous-time models and k-step powers of discrete ones, checked against
// closed forms, and a continuous model filtered on uneven timestamps.

#include "statewise/discretize.h"

#include <doctest/doctest.h>

#include <cmath>
#include <string>
#include <vector>

#include "statewise/error.h"
#include "test_models.h"
#include "input_error.h"

using namespace statewise;

using statewise::testing::input_error_of;

namespace {

// Largest entry-wise relative error of `actual` against `expected` (absolute where expected is 0).
double relative_error(const Eigen::MatrixXd& actual, const Eigen::MatrixXd& expected) {
  double worst = 0.0;
  for (Eigen::Index i = 0; i < expected.rows(); ++i)
    for (Eigen::Index j = 0; j < expected.cols(); ++j) {
      const double scale = expected(i, j) == 0.0 ? 1.0 : std::abs(expected(i, j));
      worst = std::max(worst, std::abs(actual(i, j) - expected(i, j)) / scale);
    }
  return worst;
}

using testing::kinematic_model;

}  // namespace

TEST_CASE("falling body: A = [[1, T], [0, 1]] and B g = [-g T^2/2, -g T]") {
  // Elementary kinematics: under constant acceleration -g, x(T) = x + v T - g T^2/2, v(T) = v - g T.
  const StateSpaceModel model = kinematic_model(0.0);
  const double g = 9.81;
  for (const double T : {1e-6, 0.01, 0.5, 1.0, 3.0, 60.0, 1e4}) {
    const Transition t = discretize_continuous(model.A, model.B, model.Q, T);
    Eigen::Matrix2d A;
    A << 1, T, 0, 1;
    const Eigen::Vector2d Bg(-g * T * T / 2, -g * T);
    INFO("T = " << T << "\nA =\n" << t.A << "\nB g =\n" << t.B * g);
    CHECK(relative_error(t.A, A) < 1e-14);
    CHECK(relative_error(t.B * g, Bg) < 1e-14);
    CHECK(t.Q.isZero(0.0));
  }
}

TEST_CASE("white-noise acceleration: Q = q [[T^3/3, T^2/2], [T^2/2, T]]") {
  // Bar-Shalom, Li, Kirubarajan, Estimation with Applications to Tracking and Navigation, 2001,
  // section 6.2.2 (continuous white noise acceleration model, discretized exactly).
  const double q = 0.7;
  const StateSpaceModel model = kinematic_model(q);
  for (const double T : {1e-9, 1e-6, 1e-3, 0.1, 1.0, 7.5, 100.0, 1e3, 1e5}) {
    const Transition t = discretize_continuous(model.A, model.B, model.Q, T);
    Eigen::Matrix2d expected;
    expected << T * T * T / 3, T * T / 2, T * T / 2, T;
    expected *= q;
    INFO("T = " << T << "\nQ =\n" << t.Q << "\nexpected\n" << expected);
    // Small T: exponentials of tiny matrices, exact to rounding. Large T: one composition per halving
    // (up to 17 here), each adding a few ulps.
    CHECK(relative_error(t.Q, expected) < 1e-13);
  }
}

TEST_CASE("long gaps of a stable model reach the stationary variance") {
  // First principles (the Ornstein-Uhlenbeck process dx = (-a x + b u) dt + dW, E[dW^2] = q dt):
  // A = e^{-aT}, B = b (1 - e^{-aT}) / a, Q = q (1 - e^{-2aT}) / (2a). Regression test: Van Loan's
  // block holds e^{aT}, which without halving the interval loses digits at aT = 30 and overflows
  // near aT = 710.
  const double a = 2.0, b = 0.5, q = 3.0;
  const Eigen::MatrixXd F = Eigen::MatrixXd::Constant(1, 1, -a);
  const Eigen::MatrixXd G = Eigen::MatrixXd::Constant(1, 1, b);
  const Eigen::MatrixXd Qc = Eigen::MatrixXd::Constant(1, 1, q);
  for (const double T : {1e-7, 0.01, 1.0, 15.0, 50.0, 500.0, 86400.0}) {
    const Transition t = discretize_continuous(F, G, Qc, T);
    INFO("T = " << T << ": A " << t.A(0, 0) << ", B " << t.B(0, 0) << ", Q " << t.Q(0, 0));
    CHECK(std::abs(t.A(0, 0) - std::exp(-a * T)) <=
          1e-13 * std::exp(-a * T) + 1e-300);  // e^-1000 underflows to 0
    CHECK(t.B(0, 0) == doctest::Approx(b * -std::expm1(-a * T) / a).epsilon(1e-13));
    CHECK(t.Q(0, 0) == doctest::Approx(q * -std::expm1(-2 * a * T) / (2 * a)).epsilon(1e-13));
  }
}

TEST_CASE("discretizing over 2T equals two steps of T, and k steps equal the direct sums") {
  // First principles: the solution of a linear SDE is a flow, x(t+2T) = Φ(T) x(t+T) + ..., so the 2T
  // transition is the T transition composed with itself; a k-step power is A^k, sum A^i B,
  // sum A^i Q A^i' (summed directly here, one step at a time).
  Eigen::MatrixXd F(3, 3), G(3, 2), Qc(3, 3);
  F << -0.3, 1.0, 0.0, -1.0, -0.2, 0.5, 0.0, 0.0, -0.05;
  G << 0.0, 1.0, 1.0, 0.0, 0.2, -0.1;
  Qc << 0.5, 0.1, 0.0, 0.1, 0.3, 0.05, 0.0, 0.05, 0.01;
  const Transition one = discretize_continuous(F, G, Qc, 0.8);
  const Transition two = discretize_continuous(F, G, Qc, 1.6);
  const Transition composed = compose(one, one);
  CHECK(relative_error(composed.A, two.A) < 1e-13);
  CHECK(relative_error(composed.B, two.B) < 1e-13);
  CHECK(relative_error(composed.Q, two.Q) < 1e-13);
  for (const std::int64_t k : {0, 1, 2, 5, 13, 64}) {
    Eigen::MatrixXd A = Eigen::MatrixXd::Identity(3, 3), B = Eigen::MatrixXd::Zero(3, 2),
                    Q = Eigen::MatrixXd::Zero(3, 3);
    for (std::int64_t i = 0; i < k; ++i) {  // x_{i+1} = A1 x_i + B1 u + w: fold one step at a time
      B = one.A * B + one.B;
      Q = one.A * Q * one.A.transpose() + one.Q;
      A = one.A * A;
    }
    const Transition power = repeat_transition(one, k);
    INFO("k = " << k);
    CHECK((power.A - A).cwiseAbs().maxCoeff() < 1e-12);
    CHECK((power.B - B).cwiseAbs().maxCoeff() < 1e-12);
    CHECK((power.Q - Q).cwiseAbs().maxCoeff() < 1e-12);
  }
}

TEST_CASE("the cache discretizes each distinct gap once") {
  // Specification: issue "Real time axes", item 2 (a regular log costs one discretization) and
  // discretize.h (gaps agreeing to the nanosecond share a transition).
  const StateSpaceModel model = kinematic_model(1.0);
  TransitionCache cache(model);
  for (int i = 0; i < 100; ++i) cache.index(Gap{0, 0.1});
  CHECK(cache.discretizations() == 1);
  CHECK(cache.index(Gap{0, 0.1 + 1e-12}) == cache.index(Gap{0, 0.1}));
  CHECK(cache.discretizations() == 1);
  const std::uint32_t other = cache.index(Gap{0, 0.2});
  CHECK(other != cache.index(Gap{0, 0.1}));
  CHECK(cache.discretizations() == 2);
  CHECK(cache.at(other).A(0, 1) == doctest::Approx(0.2));
  // Discrete models: keyed by steps; one step is the model's own matrices.
  StateSpaceModel discrete = model;
  discrete.domain = TimeDomain::discrete;
  discrete.A << 1, 1, 0, 1;
  discrete.step = 1.0;
  TransitionCache steps(discrete);
  CHECK(steps.transition(Gap{1, 1.0}).A == discrete.A);
  CHECK(steps.transition(Gap{3, 3.0}).A(0, 1) == 3.0);
  CHECK(steps.discretizations() == 2);
  // A bounded cache starts over when full.
  TransitionCache bounded(model, 2);
  bounded.index(Gap{0, 1.0});
  bounded.index(Gap{0, 2.0});
  bounded.index(Gap{0, 3.0});
  bounded.index(Gap{0, 1.0});
  CHECK(bounded.discretizations() == 4);
}

TEST_CASE("discretize_model makes a discrete model with the step, or refuses with the exact words") {
  // Specification: docs/cli.md, section "statewise discretize".
  const StateSpaceModel continuous = kinematic_model(0.7);
  const StateSpaceModel discrete = discretize_model(continuous, 2.0);
  CHECK(discrete.domain == TimeDomain::discrete);
  CHECK(discrete.step == 2.0);
  CHECK(discrete.A(0, 1) == doctest::Approx(2.0));
  CHECK(discrete.Q(0, 0) == doctest::Approx(0.7 * 8.0 / 3.0));
  validate_model(discrete, "discretized");
  // A discrete model with a step is raised to whole steps.
  const StateSpaceModel coarser = discretize_model(discrete, 6.0);
  CHECK(coarser.A(0, 1) == doctest::Approx(6.0));
  CHECK(coarser.Q(0, 0) == doctest::Approx(0.7 * 216.0 / 3.0));
  CHECK(input_error_of([&] { discretize_model(discrete, 3.0); }) ==
        "--dt: expected a whole multiple of the model's step of 2 s, got 3 (1.5 steps)");
  CHECK(input_error_of([&] { discretize_model(continuous, 0.0); }) ==
        "--dt: expected a positive number of seconds, got 0");
  StateSpaceModel stepless = discrete;
  stepless.step = 0.0;
  CHECK(input_error_of([&] { discretize_model(stepless, 1.0); }) ==
        "--dt: the model is already discrete and has no \"step\" to count 1 s in; expected a continuous "
        "model or a "
        "discrete one with a step");
}

TEST_CASE("a continuous model on uneven timestamps agrees with the model discretized row by row") {
  // First principles: for the white-noise acceleration model with gravity as input the transition
  // over dt has the closed form A = [[1, dt], [0, 1]], B = [-dt^2/2, -dt], Q = q [[dt^3/3, dt^2/2],
  // [dt^2/2, dt]] (Bar-Shalom et al. 2001, section 6.2.2, plus elementary kinematics). Filtering the
  // log through the timeline and the transition cache must give the same numbers as filtering with
  // these per-row matrices, written out by hand from the gaps.
  const double q = 0.3;
  const StateSpaceModel model = kinematic_model(q);
  const std::vector<std::string> times = {"2026-11-02T08:00:00Z",    "2026-11-02T08:00:00.4Z",
                                          "2026-11-02T08:00:01.9Z",  "2026-11-02T08:00:02Z",
                                          "2026-11-02T08:00:07.25Z", "2026-11-02T08:00:07.65Z",
                                          "2026-11-02T08:00:08.05Z", "2026-11-02T08:01:00Z"};
  const std::vector<double> gaps = {0.4, 1.5, 0.1, 5.25, 0.4, 0.4, 51.95};
  const std::vector<double> heights = {100.2, 99.1, 89.0, std::nan(""), -30.0, -38.5, -46.0, -12000.0};
  const std::vector<double> g = {9.81, 9.81, 9.81, 9.81, 9.81, 0.0, 9.81, 9.81};

  Timeline timeline(model, {}, "log.csv");
  TransitionCache cache(model);
  KalmanFilter through_timeline(model), by_hand(model);
  InnovationRecord record = make_innovation_record(1);
  TimelineRow row;
  for (std::size_t i = 0; i < times.size(); ++i) {
    ObservationRow log_row;
    log_row.values = {heights[i]};
    log_row.inputs = {g[i]};
    log_row.time_text = times[i];
    log_row.line = i + 2;
    timeline.push(log_row);
    REQUIRE(timeline.pop(row));
    double previous_input = 0.0;
    if (i > 0) {
      previous_input = g[i - 1];
      through_timeline.predict(cache.transition(row.gap), &previous_input);
      const double dt = gaps[i - 1];
      Transition exact;
      exact.A.resize(2, 2);
      exact.A << 1, dt, 0, 1;
      exact.B.resize(2, 1);
      exact.B << -dt * dt / 2, -dt;
      exact.Q.resize(2, 2);
      exact.Q << dt * dt * dt / 3, dt * dt / 2, dt * dt / 2, dt;
      exact.Q *= q;
      by_hand.predict(exact, &previous_input);
    }
    REQUIRE(through_timeline.update(&heights[i], record) == StepStatus::ok);
    REQUIRE(by_hand.update(&heights[i], record) == StepStatus::ok);
    INFO("row " << i << "\n" << through_timeline.mean() << "\nby hand\n" << by_hand.mean());
    CHECK(relative_error(through_timeline.mean(), by_hand.mean()) < 1e-11);
    CHECK(relative_error(through_timeline.covariance(), by_hand.covariance()) < 1e-11);
  }
  CHECK(cache.discretizations() == 5);  // gaps 0.4, 1.5, 0.1, 5.25, 51.95: 0.4 is reused twice
}
