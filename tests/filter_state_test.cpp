// KalmanFilter::step, state() and restore(), and the filter state's JSON text. The reference for
// step() is the filter's own predict/update sequence as the CLI runs it (the tests in
// filter_test.cpp check that sequence against independent results); a resumed run must agree with
// an uninterrupted one to the last bit.

#include <doctest/doctest.h>

#include <cmath>
#include <functional>
#include <limits>
#include <string>
#include <vector>

#include "statewise/filter_state.h"
#include "test_models.h"
#include "input_error.h"

using namespace statewise;
using testing::two_channel_model;

using statewise::testing::input_error_of;

namespace {

constexpr double kMissing = std::numeric_limits<double>::quiet_NaN();

// Row t's values and input: smooth made-up signals with some channels missing.
std::vector<double> values_of(int t) {
  return {t % 4 == 1 ? kMissing : std::sin(0.3 * t), t % 5 == 2 ? kMissing : 0.5 * std::cos(0.2 * t)};
}
std::vector<double> inputs_of(int t) { return {0.1 * (t % 7)}; }

}  // namespace

TEST_CASE("filter state: step() gives exactly the predict/update sequence the CLI runs") {
  const StateSpaceModel model = two_channel_model();
  KalmanFilter by_step(model), by_hand(model);
  const Transition transition = model_transition(model);
  InnovationRecord a = make_innovation_record(2), b = make_innovation_record(2);
  for (int t = 0; t < 40; ++t) {
    const std::vector<double> values = values_of(t), inputs = inputs_of(t);
    REQUIRE(by_step.step(values, inputs, a) == StepStatus::ok);
    if (t > 0) by_hand.predict(transition, inputs_of(t - 1).data());
    REQUIRE(by_hand.update(values.data(), b) == StepStatus::ok);
    CHECK(by_step.mean() == by_hand.mean());
    CHECK(by_step.covariance() == by_hand.covariance());
    CHECK(a.log_likelihood == b.log_likelihood);
  }
  CHECK(by_step.rows_processed() == 40);
}

TEST_CASE("filter state: a run saved as text and resumed matches an uninterrupted run bit for bit") {
  const StateSpaceModel model = two_channel_model();
  KalmanFilter uninterrupted(model), first(model);
  InnovationRecord record;
  for (int t = 0; t < 17; ++t) {
    REQUIRE(uninterrupted.step(values_of(t), inputs_of(t), record) == StepStatus::ok);
    REQUIRE(first.step(values_of(t), inputs_of(t), record) == StepStatus::ok);
  }
  const std::string text = write_filter_state(first.state(), model);
  KalmanFilter resumed(model);
  resumed.restore(parse_filter_state(text, model, "state.json"));
  CHECK(resumed.rows_processed() == 17);
  for (int t = 17; t < 40; ++t) {
    REQUIRE(uninterrupted.step(values_of(t), inputs_of(t), record) == StepStatus::ok);
    REQUIRE(resumed.step(values_of(t), inputs_of(t), record) == StepStatus::ok);
    CHECK(resumed.mean() == uninterrupted.mean());
    CHECK(resumed.covariance() == uninterrupted.covariance());
  }

  // The last row's inputs are part of the state: without them the next prediction differs.
  FilterState without_inputs = first.state();
  without_inputs.last_inputs.setZero();
  KalmanFilter wrong(model), right(model);
  wrong.restore(without_inputs);
  right.restore(first.state());
  REQUIRE(wrong.step(values_of(17), inputs_of(17), record) == StepStatus::ok);
  REQUIRE(right.step(values_of(17), inputs_of(17), record) == StepStatus::ok);
  CHECK(wrong.mean() != right.mean());
}

TEST_CASE("filter state: the JSON text reads back to the very same doubles") {
  const StateSpaceModel model = two_channel_model();
  FilterState state;
  state.mean = Eigen::Vector2d(0.1 + 0.2, -1e-300);
  state.covariance.resize(2, 2);
  state.covariance << 1.0 / 3.0, 1e-17, 1e-17, 2.0 / 3.0;
  state.rows_processed = 18446744073709551615ULL;  // the largest count, 2^64 - 1
  state.last_inputs = Eigen::VectorXd::Constant(1, 5e-324);
  const FilterState back = parse_filter_state(write_filter_state(state, model), model, "state.json");
  CHECK(back.mean == state.mean);
  CHECK(back.covariance == state.covariance);
  CHECK(back.rows_processed == state.rows_processed);
  CHECK(back.last_inputs == state.last_inputs);
}

TEST_CASE("filter state: the text layout") {
  StateSpaceModel model = two_channel_model();
  FilterState state;
  state.mean = Eigen::Vector2d(1.5, -2);
  state.covariance = Eigen::Matrix2d::Identity();
  state.rows_processed = 3;
  state.last_inputs = Eigen::VectorXd::Constant(1, 0.25);
  CHECK(write_filter_state(state, model) ==
        "{\n"
        "  \"statewise_filter_state\": 1,\n"
        "  \"states\": [\"a\", \"b\"],\n"
        "  \"rows_processed\": 3,\n"
        "  \"mean\": [1.5, -2.0],\n"
        "  \"covariance\": [\n"
        "    [1.0, 0.0],\n"
        "    [0.0, 1.0]\n"
        "  ],\n"
        "  \"inputs\": [\"u\"],\n"
        "  \"last_inputs\": [0.25]\n"
        "}\n");
}

TEST_CASE("filter state: bad state text is reported with the file, the key and what was expected") {
  const StateSpaceModel model = two_channel_model();
  const std::string good =
      R"({"statewise_filter_state": 1, "states": ["a", "b"], "rows_processed": 3, "mean": [1, 2],
          "covariance": [[1, 0], [0, 1]], "inputs": ["u"], "last_inputs": [0.5]})";
  CHECK_NOTHROW(parse_filter_state(good, model, "s.json"));
  auto error = [&](const std::string& text) { return input_error_of([&] { parse_filter_state(text, model, "s.json"); }); };
  auto replaced = [&](const std::string& from, const std::string& to) {
    std::string text = good;
    text.replace(text.find(from), from.size(), to);
    return error(text);
  };
  CHECK(error("{\"statewise_filter_state\": 1,\n  \"states\": [\"a\" \"b\"]}") ==
        "s.json:2:20: invalid JSON: syntax error while parsing array - unexpected string literal; expected ']'");
  CHECK(error(R"({"A": [[1]]})") == "s.json: statewise_filter_state: missing; this is not a filter state written by statewise");
  CHECK(replaced("\"statewise_filter_state\": 1", "\"statewise_filter_state\": 2") ==
        "s.json: statewise_filter_state: this statewise reads filter state format version 1, got 2");
  CHECK(replaced("\"mean\"", "\"means\"") == "s.json: means: unknown key; did you mean \"mean\"?");
  CHECK(replaced("[\"a\", \"b\"]", "[\"level\", \"slope\"]") ==
        "s.json: states: the state was saved for the states [\"level\", \"slope\"], but the model has [\"a\", \"b\"]");
  CHECK(replaced("\"inputs\": [\"u\"]", "\"inputs\": [\"heater\"]") ==
        "s.json: inputs: the state was saved for the inputs [\"heater\"], but the model has [\"u\"]");
  CHECK(replaced("\"rows_processed\": 3", "\"rows_processed\": -3") ==
        "s.json: rows_processed: expected a whole number of rows (0 or more), got the number -3");
  CHECK(replaced("[1, 2]", "[1, 2, 3]") ==
        "s.json: mean: expected a list of 2 numbers (one per state), got a list of 3 numbers");
  CHECK(replaced("[[1, 0], [0, 1]]", "[[1, 0.5], [0, 1]]") ==
        "s.json: covariance: must be symmetric, but entry [0][1] is 0.5 and entry [1][0] is 0");
  CHECK(replaced("[[1, 0], [0, 1]]", "[[1, 0], [0, -1]]") ==
        "s.json: covariance: must be a covariance, but the variance at [1][1] is -1; expected a value >= 0");
  CHECK(replaced(", \"inputs\": [\"u\"], \"last_inputs\": [0.5]", "") ==
        "s.json: inputs: the state was saved for the inputs [], but the model has [\"u\"]");
}

TEST_CASE("filter state: restore() checks a state built in code") {
  const StateSpaceModel model = two_channel_model();
  KalmanFilter filter(model);
  FilterState state = filter.state();
  state.mean = Eigen::Vector3d(1, 2, 3);
  CHECK(input_error_of([&] { filter.restore(state); }) ==
        "filter state: mean: expected 2 values (one per state: a, b), got 3");
  state = filter.state();
  state.covariance(0, 0) = std::numeric_limits<double>::infinity();
  CHECK(input_error_of([&] { filter.restore(state); }) == "filter state: covariance[0][0]: expected a finite number, got inf");
  state = filter.state();
  state.last_inputs.resize(0);
  CHECK(input_error_of([&] { filter.restore(state); }) ==
        "filter state: last_inputs: expected 1 values (one per input: u), got 0");
}

TEST_CASE("filter state: step() refuses bad rows with the row and the value, changing nothing") {
  const StateSpaceModel model = two_channel_model();
  KalmanFilter filter(model);
  InnovationRecord record;
  REQUIRE(filter.step(values_of(0), inputs_of(0), record) == StepStatus::ok);
  const FilterState before = filter.state();
  CHECK(input_error_of([&] { filter.step(std::vector<double>{1, 2, 3}, inputs_of(1), record); }) ==
        "row 2: values: expected 2 channel values (y1, y2), got 3");
  CHECK(input_error_of([&] { filter.step(values_of(1), std::vector<double>{}, record); }) ==
        "row 2: inputs: expected 1 inputs (u), got 0");
  CHECK(input_error_of([&] { filter.step(std::vector<double>{1, -INFINITY}, inputs_of(1), record); }) ==
        "row 2: values[1]: channel \"y2\": expected a finite number or NaN for a missing value, got -inf");
  CHECK(input_error_of([&] { filter.step(values_of(1), std::vector<double>{kMissing}, record); }) ==
        "row 2: inputs[0]: the input \"u\" is missing; inputs are known quantities and must be given on every row");
  CHECK(filter.mean() == before.mean);
  CHECK(filter.covariance() == before.covariance);
  CHECK(filter.rows_processed() == 1);
}

TEST_CASE("filter state: numerical trouble in step() is a status, and the filter is left as before the call") {
  // A = 2, C = 1, Q = 0, R = 0, P0 = 1: the first row is observed exactly, leaving P = 0; the second
  // row's innovation covariance C (A P A' + Q) C' + R is then 0, which is not positive definite.
  StateSpaceModel model;
  model.state_names = {"x"};
  model.observation_names = {"y"};
  model.A = Eigen::MatrixXd::Constant(1, 1, 2.0);
  model.B = Eigen::MatrixXd::Zero(1, 0);
  model.C = Eigen::MatrixXd::Identity(1, 1);
  model.Q = Eigen::MatrixXd::Zero(1, 1);
  model.R = Eigen::MatrixXd::Zero(1, 1);
  model.initial_mean = Eigen::VectorXd::Zero(1);
  model.initial_covariance = Eigen::MatrixXd::Identity(1, 1);
  validate_model(model, "test");
  KalmanFilter filter(model);
  InnovationRecord record;
  const std::vector<double> first = {3.0}, second = {7.0};
  REQUIRE(filter.step(first, {}, record) == StepStatus::ok);
  CHECK(filter.mean()(0) == 3.0);
  CHECK(filter.step(second, {}, record) == StepStatus::singular_innovation_covariance);
  CHECK(filter.mean()(0) == 3.0);  // the prediction 2 * 3 was undone
  CHECK(filter.covariance()(0, 0) == 0.0);
  CHECK(filter.rows_processed() == 1);
}
