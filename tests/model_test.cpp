// Tests of the model file format (include/statewise/model.h): what parse_model accepts and the
// defaults it fills in, that write_model round-trips bit for bit, and the exact message of every
// kind of bad input.

#include "statewise/model.h"

#include <doctest/doctest.h>

#include <bit>
#include <cstdint>
#include <limits>
#include <string>
#include <string_view>

#include "statewise/error.h"
#include "input_error.h"

using statewise::testing::input_error_of;

namespace {

using statewise::InputError;
using statewise::parse_model;
using statewise::StateSpaceModel;

// The complete message of the InputError that parsing `text` as "model.json" raises.
std::string error_of(std::string_view text) {
  return input_error_of([&] { (void)parse_model(text, "model.json"); });
}

// Nests `levels` - 1 lists inside the "description" value of an otherwise valid model, so the whole
// document is `levels` levels deep (the top-level object is level 1).
std::string nested_model(int levels) {
  const int lists = levels - 1;
  return R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "description": )" +
         std::string(static_cast<std::size_t>(lists), '[') +
         std::string(static_cast<std::size_t>(lists), ']') + "}";
}

bool same_bits(double a, double b) {
  return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b);
}

bool same_bits(const Eigen::MatrixXd& a, const Eigen::MatrixXd& b) {
  if (a.rows() != b.rows() || a.cols() != b.cols()) return false;
  for (Eigen::Index i = 0; i < a.rows(); ++i)
    for (Eigen::Index j = 0; j < a.cols(); ++j)
      if (!same_bits(a(i, j), b(i, j))) return false;
  return true;
}

void check_same_model(const StateSpaceModel& expected, const StateSpaceModel& actual) {
  CHECK(actual.state_names == expected.state_names);
  CHECK(actual.observation_names == expected.observation_names);
  CHECK(actual.input_names == expected.input_names);
  CHECK(actual.time_column == expected.time_column);
  CHECK(same_bits(actual.A, expected.A));
  CHECK(same_bits(actual.B, expected.B));
  CHECK(same_bits(actual.C, expected.C));
  CHECK(same_bits(actual.Q, expected.Q));
  CHECK(same_bits(actual.R, expected.R));
  CHECK(same_bits(actual.initial_mean, expected.initial_mean));
  CHECK(same_bits(actual.initial_covariance, expected.initial_covariance));
}

}  // namespace

TEST_SUITE("model file") {
  TEST_CASE("defaults: state names x1..xn and initial mean 0 with covariance 1e6 I and no inputs or time") {
    const StateSpaceModel model = parse_model(
        R"({"observations": ["y"], "A": [[1, 1], [0, 1]], "C": [[1, 0]], "Q": [[0.1, 0], [0, 0.2]], "R": [[0.5]]})",
        "model.json");
    CHECK(model.state_names == std::vector<std::string>{"x1", "x2"});
    CHECK(model.observation_names == std::vector<std::string>{"y"});
    CHECK(model.input_names.empty());
    CHECK(model.time_column.empty());
    CHECK(model.state_count() == 2);
    CHECK(model.channel_count() == 1);
    CHECK(model.input_count() == 0);
    CHECK(model.B.rows() == 2);
    CHECK(model.B.cols() == 0);
    CHECK(model.initial_mean == Eigen::VectorXd::Zero(2));
    CHECK(model.initial_covariance == 1e6 * Eigen::MatrixXd::Identity(2, 2));
    CHECK(statewise::kDefaultInitialVariance == 1e6);
    CHECK(model.A == (Eigen::MatrixXd(2, 2) << 1, 1, 0, 1).finished());
    CHECK(model.Q == (Eigen::MatrixXd(2, 2) << 0.1, 0, 0, 0.2).finished());
  }

  TEST_CASE("version 1 is accepted and the description is free text") {
    const StateSpaceModel model = parse_model(
        R"({"version": 1, "description": "a random walk", "observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1})",
        "model.json");
    CHECK(model.state_count() == 1);
  }

  TEST_CASE("a list of numbers for Q or R or the initial covariance is the diagonal") {
    const StateSpaceModel model = parse_model(R"({
      "observations": ["a", "b"], "A": [[1, 0], [0, 1]], "C": [[1, 0], [0, 1]],
      "Q": [0.5, 2], "R": [0.01, 0.04], "initial": {"mean": [3, 4], "covariance": [9, 16]}
    })",
                                              "model.json");
    CHECK(model.Q == (Eigen::MatrixXd(2, 2) << 0.5, 0, 0, 2).finished());
    CHECK(model.R == (Eigen::MatrixXd(2, 2) << 0.01, 0, 0, 0.04).finished());
    CHECK(model.initial_covariance == (Eigen::MatrixXd(2, 2) << 9, 0, 0, 16).finished());
    CHECK(model.initial_mean == (Eigen::VectorXd(2) << 3, 4).finished());
  }

  TEST_CASE("a 1×1 matrix and a one-state mean may be a plain number") {
    const StateSpaceModel model = parse_model(
        R"({"observations": ["y"], "A": 0.9, "C": 2, "Q": 0.1, "R": 0.2, "initial": {"mean": 3, "covariance": 5}})",
        "model.json");
    CHECK(model.A == Eigen::MatrixXd::Constant(1, 1, 0.9));
    CHECK(model.C == Eigen::MatrixXd::Constant(1, 1, 2.0));
    CHECK(model.Q == Eigen::MatrixXd::Constant(1, 1, 0.1));
    CHECK(model.R == Eigen::MatrixXd::Constant(1, 1, 0.2));
    CHECK(model.initial_mean == Eigen::VectorXd::Constant(1, 3.0));
    CHECK(model.initial_covariance == Eigen::MatrixXd::Constant(1, 1, 5.0));
  }

  TEST_CASE("the initial object may give only the mean or only the covariance") {
    const StateSpaceModel only_mean = parse_model(
        R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "initial": {"mean": 7}})", "model.json");
    CHECK(only_mean.initial_mean(0) == 7.0);
    CHECK(only_mean.initial_covariance(0, 0) == 1e6);
    const StateSpaceModel only_covariance = parse_model(
        R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "initial": {"covariance": 2}})",
        "model.json");
    CHECK(only_covariance.initial_mean(0) == 0.0);
    CHECK(only_covariance.initial_covariance(0, 0) == 2.0);
  }

  TEST_CASE("inputs with B and state names and a time column: the cold-room example") {
    // Values as written in examples/cold-room/model.json.
    const StateSpaceModel model =
        statewise::load_model(STATEWISE_SOURCE_DIR "/examples/cold-room/model.json");
    CHECK(model.state_names == std::vector<std::string>{"air_temp", "warming_rate"});
    CHECK(model.observation_names == std::vector<std::string>{"probe_a", "probe_b"});
    CHECK(model.input_names == std::vector<std::string>{"compressor"});
    CHECK(model.time_column == "time");
    CHECK(model.A == (Eigen::MatrixXd(2, 2) << 1, 1, 0, 0.98).finished());
    CHECK(model.B == (Eigen::MatrixXd(2, 1) << -0.06, 0).finished());
    CHECK(model.C == (Eigen::MatrixXd(2, 2) << 1, 0, 1, 0).finished());
    CHECK(model.Q == (Eigen::MatrixXd(2, 2) << 0.0004, 0, 0, 0.00002).finished());
    CHECK(model.R == (Eigen::MatrixXd(2, 2) << 0.01, 0, 0, 0.04).finished());
    CHECK(model.initial_mean == (Eigen::VectorXd(2) << -18, 0).finished());
    CHECK(model.initial_covariance == (Eigen::MatrixXd(2, 2) << 4, 0, 0, 0.01).finished());
  }

  TEST_CASE("round trip: parse_model(write_model(m)) reproduces m bit for bit") {
    StateSpaceModel model;
    // Names with the characters a JSON writer could mangle: commas, brackets, quotes, non-ASCII.
    model.state_names = {"level, smoothed", "rate[1]", "say \"hi\""};
    model.observation_names = {"temp °C", "b,c"};
    model.input_names = {"u[0]"};
    model.time_column = "time, UTC";
    const double third = 1.0 / 3.0;
    const double tiny = 1e-300;
    const double denormal = std::numeric_limits<double>::denorm_min();
    const double huge = std::numeric_limits<double>::max();
    model.A.resize(3, 3);
    model.A << 0.1, third, tiny, -0.0, 1e300, -2.5e-7, 1, 0.7, denormal;
    model.B.resize(3, 1);
    model.B << 0.1, -third, huge;
    model.C.resize(2, 3);
    model.C << 1, 0, third, 0, 0.1, 1e-300;
    model.Q.resize(3, 3);
    model.Q << third, tiny, 0, tiny, 0.1, 0, 0, 0, 2e-300;
    model.R.resize(2, 2);
    model.R << 0.01, 0.001, 0.001, 0.04;
    model.initial_mean.resize(3);
    model.initial_mean << -18, third, -tiny;
    model.initial_covariance.resize(3, 3);
    model.initial_covariance << 1e300, 0, 0, 0, 0.1, 0, 0, 0, third;
    statewise::validate_model(model, "round trip");

    const std::string text = statewise::write_model(model);
    const StateSpaceModel parsed = parse_model(text, "written.json");
    check_same_model(model, parsed);
    // Writing again gives the same text.
    CHECK(statewise::write_model(parsed) == text);
  }

  TEST_CASE("round trip without inputs and without a time column") {
    const StateSpaceModel model = parse_model(
        R"({"observations": ["y"], "A": [[1, 0.1], [0, 1]], "C": [[1, 0]], "Q": [1e-300, 0.1], "R": 0.3})",
        "model.json");
    const std::string text = statewise::write_model(model);
    CHECK(text.find("\"inputs\"") == std::string::npos);
    CHECK(text.find("\"B\"") == std::string::npos);
    CHECK(text.find("\"time\"") == std::string::npos);
    check_same_model(model, parse_model(text, "written.json"));
  }

  TEST_CASE("write_model keeps commas inside names as they are") {
    // Regression: the compact list writer used to add a space after every comma of the dumped list,
    // inside names too, so the name "a,b" came back as "a, b".
    StateSpaceModel model = parse_model(
        R"({"states": ["a,b", "c"], "observations": ["y,z"], "A": [[1, 0], [0, 1]], "C": [[1, 0]], "Q": [1, 1], "R": 1})",
        "model.json");
    const std::string text = statewise::write_model(model);
    CHECK(text.find(R"("states": ["a,b", "c"])") != std::string::npos);
    CHECK(text.find(R"("observations": ["y,z"])") != std::string::npos);
    CHECK(parse_model(text, "written.json").state_names == model.state_names);
  }
}

TEST_SUITE("model file errors") {
  TEST_CASE("JSON syntax errors name line and column") {
    CHECK(error_of("{\"observations\": [\"y\"],\n  \"A\": 1,\n}") ==
          "model.json:3:1: invalid JSON: syntax error while parsing object key - unexpected '}'; expected "
          "string "
          "literal");
    CHECK(error_of("{\"observations\": [") ==
          "model.json:1:19: invalid JSON: syntax error while parsing value - unexpected end of input; "
          "expected '[', "
          "'{', or a literal");
    // The column is where nlohmann's lexer stopped (the '}' after "tru"); the rest is nlohmann's text.
    CHECK(error_of("{\"A\": tru}") ==
          "model.json:1:10: invalid JSON: syntax error while parsing value - invalid literal; last read: "
          "'\"A\": "
          "tru}'");
  }

  TEST_CASE("an empty file") {
    CHECK(error_of("") == "model.json: the file is empty; expected a JSON object");
    CHECK(error_of(" \n\t\r\n") == "model.json: the file is empty; expected a JSON object");
  }

  TEST_CASE("the top level is not an object") {
    CHECK(error_of("[1, 2]") ==
          "model.json: top level: expected a JSON object with the model's keys, got a list of 2 numbers");
    CHECK(error_of("\"A\"") ==
          "model.json: top level: expected a JSON object with the model's keys, got the text \"A\"");
    CHECK(error_of("null") ==
          "model.json: top level: expected a JSON object with the model's keys, got null");
  }

  TEST_CASE("unknown keys with a did-you-mean hint") {
    CHECK(error_of(R"({"obsevations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: obsevations: unknown key; did you mean \"observations\"?");
    CHECK(
        error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "initial": {"covarance": 1}})") ==
        "model.json: initial.covarance: unknown key; did you mean \"covariance\"?");
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "sampling": 2})") ==
          "model.json: sampling: unknown key");
    // Regression: one-letter keys got no hint, since changing 1 of 1 letters is "more than a third".
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "q": 1, "R": 1})") ==
          "model.json: q: unknown key; did you mean \"Q\"?");
    CHECK(error_of(R"({"Observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: Observations: unknown key; did you mean \"observations\"?");
  }

  TEST_CASE("a required key is missing") {
    CHECK(error_of(R"({"A": 1, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: observations: missing; expected the list of measured CSV columns");
    CHECK(error_of(R"({"observations": ["y"], "C": 1, "Q": 1, "R": 1})") ==
          "model.json: A: missing; expected the states × states transition matrix");
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "Q": 1, "R": 1})") ==
          "model.json: C: missing; expected the channels × states observation matrix");
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "R": 1})") ==
          "model.json: Q: missing; expected the states × states process noise covariance");
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1})") ==
          "model.json: R: missing; expected the channels × channels measurement noise covariance");
  }

  TEST_CASE("no states or no channels") {
    CHECK(error_of(R"({"observations": [], "A": 1, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: observations: expected at least one observed channel");
    CHECK(error_of(R"({"observations": ["y"], "A": [], "C": 1, "Q": 1, "R": 1})") ==
          "model.json: A: the model has no states; expected at least one");
    CHECK(error_of(R"({"states": [], "observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: states: the model has no states; expected at least one");
  }

  TEST_CASE("B and inputs go together") {
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "B": 1, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: B: given, but the model lists no inputs; add \"inputs\" or remove B");
    CHECK(error_of(R"({"observations": ["y"], "inputs": ["u"], "A": 1, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: B: missing; expected the states × inputs matrix because inputs are given");
  }

  TEST_CASE("dimension mismatches name the matrix and both shapes") {
    // Without "states" the number of states is the number of rows of A.
    CHECK(
        error_of(
            R"({"observations": ["y"], "A": [[1, 0, 0], [0, 1, 0]], "C": [[1, 0]], "Q": [1, 1], "R": 1})") ==
        "model.json: A: expected a 2×2 matrix (states × states), got a 2×3 matrix");
    CHECK(
        error_of(
            R"({"states": ["p", "v"], "observations": ["y"], "A": [[1]], "C": [[1, 0]], "Q": [1, 1], "R": 1})") ==
        "model.json: A: expected a 2×2 matrix (states × states), got a 1×1 matrix");
    CHECK(error_of(
              R"({"observations": ["y"], "A": [[1, 0], [0, 1]], "C": [[1, 0, 0]], "Q": [1, 1], "R": 1})") ==
          "model.json: C: expected a 1×2 matrix (channels × states), got a 1×3 matrix");
    CHECK(
        error_of(
            R"({"observations": ["y", "z"], "A": [[1, 0], [0, 1]], "C": [[1, 0]], "Q": [1, 1], "R": [1, 1]})") ==
        "model.json: C: expected a 2×2 matrix (channels × states), got a 1×2 matrix");
    CHECK(
        error_of(
            R"({"observations": ["y", "z"], "A": 1, "C": [[1], [1]], "Q": 1, "R": [[1, 0, 0], [0, 1, 0], [0, 0, 1]]})") ==
        "model.json: R: expected a 2×2 matrix (channels × channels), got a 3×3 matrix");
    CHECK(error_of(R"({"observations": ["y", "z"], "A": 1, "C": [[1], [1]], "Q": 1, "R": [1, 2, 3]})") ==
          "model.json: R: expected a 2×2 matrix (channels × channels) or a list of its 2 diagonal entries, "
          "got a "
          "list of 3 numbers");
    CHECK(error_of(R"({"observations": ["y", "z"], "A": 1, "C": [[1], [1]], "Q": 1, "R": 1})") ==
          "model.json: R: expected a 2×2 matrix (channels × channels), got a single number");
    CHECK(error_of(R"({"observations": ["y"], "A": [[1, 0], [0, 1]], "C": [[1, 0]], "Q": [1, 1], "R": 1,
                       "initial": {"mean": [1, 2, 3]}})") ==
          "model.json: initial.mean: expected a list of 2 numbers (one value per state), got a list of 3 "
          "numbers");
    CHECK(error_of(R"({"observations": ["y"], "A": [[1, 0], [0, 1]], "C": [[1, 0]], "Q": [1, 1], "R": 1,
                       "initial": {"covariance": [[1, 0, 0], [0, 1, 0], [0, 0, 1]]}})") ==
          "model.json: initial.covariance: expected a 2×2 matrix (states × states), got a 3×3 matrix");
    CHECK(
        error_of(
            R"({"observations": ["y"], "inputs": ["u", "w"], "A": 1, "B": [[1]], "C": 1, "Q": 1, "R": 1})") ==
        "model.json: B: expected a 1×2 matrix (states × inputs), got a 1×1 matrix");
    CHECK(
        error_of(
            R"({"states": ["p", "v"], "observations": ["y"], "A": [[1, 0], [0, 1]], "C": [[1, 0]], "Q": [1, 1, 1], "R": 1})") ==
        "model.json: Q: expected a 2×2 matrix (states × states) or a list of its 2 diagonal entries, got a "
        "list "
        "of 3 numbers");
  }

  TEST_CASE("ragged rows and a flat list where a matrix is expected") {
    CHECK(error_of(R"({"observations": ["y"], "A": [[1, 0], [0]], "C": [[1, 0]], "Q": [1, 1], "R": 1})") ==
          "model.json: A[1]: expected a 2×2 matrix (states × states), got a row of 1 numbers");
    CHECK(
        error_of(
            R"({"states": ["p", "v"], "observations": ["y"], "A": [1, 0], "C": [[1, 0]], "Q": [1, 1], "R": 1})") ==
        "model.json: A: expected a 2×2 matrix (states × states) as a list of rows, got a list of 2 numbers");
    CHECK(error_of(R"({"observations": ["y"], "A": {"a": 1}, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: A: expected a matrix (a list of rows), got an object");
  }

  TEST_CASE("an entry that is not a number") {
    CHECK(
        error_of(R"({"observations": ["y"], "A": [[1, "x"], [0, 1]], "C": [[1, 0]], "Q": [1, 1], "R": 1})") ==
        "model.json: A[0][1]: expected a number, got the text \"x\"");
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": [true], "R": 1})") ==
          "model.json: Q[0]: expected a number, got the value true");
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": null})") ==
          "model.json: R: expected a 1×1 matrix (channels × channels) as a list of rows, got null");
  }

  TEST_CASE("a number beyond the range of a double is named by its key") {
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": [[1e999]]})") ==
          "model.json: R[0][0]: expected a finite number, got 1e999 (beyond the range of a double)");
    CHECK(error_of(R"({"observations": ["y", "z"], "A": 1, "C": [[1], [1]], "Q": 1, "R": [1, -1e999]})") ==
          "model.json: R[1]: expected a finite number, got -1e999 (beyond the range of a double)");
    CHECK(
        error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "initial": {"mean": 1e400}})") ==
        "model.json: initial.mean: expected a finite number, got 1e400 (beyond the range of a double)");
    // A 400-digit integer is shortened in the message.
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": )" +
                   ("1" + std::string(400, '0')) + "}") ==
          "model.json: R: expected a finite number, got 1000000000000000000000000000000000000... (beyond the "
          "range "
          "of a double)");
  }

  TEST_CASE("validate_model rejects non-finite entries of a model built in code") {
    StateSpaceModel model =
        parse_model(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1})", "model.json");
    model.A(0, 0) = std::numeric_limits<double>::infinity();
    try {
      statewise::validate_model(model, "code");
      FAIL("no error");
    } catch (const InputError& error) {
      CHECK(std::string(error.what()) == "code: A[0][0]: expected a finite number, got inf");
    }
  }

  TEST_CASE("Q and R and the initial covariance must be covariances") {
    CHECK(
        error_of(
            R"({"observations": ["y"], "A": [[1, 0], [0, 1]], "C": [[1, 0]], "Q": [[1, 0.1], [0.2, 1]], "R": 1})") ==
        "model.json: Q: must be symmetric, but entry [0][1] is 0.1 and entry [1][0] is 0.2");
    CHECK(error_of(R"({"observations": ["y", "z"], "A": 1, "C": [[1], [1]], "Q": 1, "R": [1, -0.5]})") ==
          "model.json: R: must be a covariance, but the variance at [1][1] is -0.5; expected a value >= 0");
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": -2})") ==
          "model.json: R: must be a covariance, but the variance at [0][0] is -2; expected a value >= 0");
    // [[1, 2], [2, 1]] has the eigenvalues 3 and -1.
    CHECK(error_of(R"({"observations": ["y"], "A": [[1, 0], [0, 1]], "C": [[1, 0]], "Q": [1, 1], "R": 1,
                       "initial": {"covariance": [[1, 2], [2, 1]]}})") ==
          "model.json: initial.covariance: must be a covariance (positive semidefinite), but it has the "
          "negative "
          "eigenvalue -1");
    // Zero variances are allowed (a known state, a noiseless channel).
    CHECK(error_of(
              R"({"observations": ["y"], "A": 1, "C": 1, "Q": 0, "R": 0, "initial": {"covariance": 0}})") ==
          "(no error)");
  }

  TEST_CASE("a duplicate key names its path") {
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "A": 2})") ==
          "model.json: A: the key appears twice in the same object; keep one");
    CHECK(
        error_of(
            R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "initial": {"mean": 1, "mean": 2}})") ==
        "model.json: initial.mean: the key appears twice in the same object; keep one");
    // The same key in different objects is fine.
    CHECK(
        error_of(
            R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "description": [{"a": 1}, {"a": 2}]})") ==
        "(no error)");
  }

  TEST_CASE("duplicate names and a column used twice") {
    CHECK(
        error_of(
            R"({"states": ["a", "a"], "observations": ["y"], "A": [[1, 0], [0, 1]], "C": [[1, 0]], "Q": [1, 1], "R": 1})") ==
        "model.json: states[1]: the name \"a\" appears twice");
    CHECK(error_of(R"({"observations": ["y", "y"], "A": 1, "C": [[1], [1]], "Q": 1, "R": [1, 1]})") ==
          "model.json: observations[1]: the name \"y\" appears twice");
    CHECK(
        error_of(
            R"({"observations": ["y"], "inputs": ["u", "u"], "A": 1, "B": [[1, 1]], "C": 1, "Q": 1, "R": 1})") ==
        "model.json: inputs[1]: the name \"u\" appears twice");
    CHECK(error_of(R"({"observations": ["y"], "inputs": ["y"], "A": 1, "B": 1, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: inputs[0]: the column \"y\" is both observed and an input");
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "time": {"column": "y"}})") ==
          "model.json: time.column: the column \"y\" is also a channel or an input");
    CHECK(error_of(R"({"observations": ["y", ""], "A": 1, "C": [[1], [1]], "Q": 1, "R": [1, 1]})") ==
          "model.json: observations[1]: expected a non-empty name");
    CHECK(error_of(R"({"observations": "y", "A": 1, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: observations: expected a list of names, got the text \"y\"");
  }

  TEST_CASE("the time object") {
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "time": "t"})") ==
          "model.json: time: expected an object such as {\"column\": \"time\"}, got the text \"t\"");
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "time": {}})") ==
          "model.json: time.column: expected the name of the time column");
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "time": {"colum": "t"}})") ==
          "model.json: time.colum: unknown key; did you mean \"column\"?");
  }

  TEST_CASE("nesting: 64 levels are read and 65 refused at the bracket opening level 65") {
    CHECK(error_of(nested_model(64)) == "(no error)");
    // Regression: the limit used to let one more level through (65 levels were read).
    // The 64th '[' opens level 65; the prefix before the first '[' is 71 bytes, so it is at column 71 + 64.
    CHECK(error_of(nested_model(65)) ==
          "model.json:1:135: nested more than 64 levels deep; expected a model file");
    CHECK(error_of(nested_model(100000)) ==
          "model.json:1:135: nested more than 64 levels deep; expected a model file");
    // Brackets inside text do not count.
    CHECK(error_of(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1, "description": ")" +
                   std::string(100, '[') + "\\\"" + std::string(100, '{') + "\"}") == "(no error)");
  }

  TEST_CASE("versions other than 1") {
    CHECK(error_of(R"({"version": 2, "observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: version: this statewise reads model format version 1, got 2");
    CHECK(error_of(R"({"version": "1", "observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1})") ==
          "model.json: version: this statewise reads model format version 1, got \"1\"");
  }

  TEST_CASE("load_model says why a file cannot be read") {
    try {
      statewise::load_model("no-such-model.json");
      FAIL("no error");
    } catch (const InputError& error) {
      CHECK(std::string(error.what()) ==
            "no-such-model.json: cannot open the model file (No such file or directory)");
    }
    // Regression: a folder used to be reported as "the file is empty".
    const std::string folder = STATEWISE_SOURCE_DIR "/examples";
    try {
      statewise::load_model(folder);
      FAIL("no error");
    } catch (const InputError& error) {
      CHECK(std::string(error.what()) == folder + ": cannot read the model file (Is a directory)");
    }
  }
}
