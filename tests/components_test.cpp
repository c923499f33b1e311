// Checks of the model building blocks (statewise/components.h): each expansion against the matrices
// written out by hand from the formula its source gives, plus the error messages.

#include "statewise/components.h"

#include <doctest/doctest.h>

#include <cmath>
#include <numbers>
#include <string>

#include "statewise/error.h"
#include "statewise/model.h"
#include "input_error.h"

using namespace statewise;

using statewise::testing::input_error_of;

namespace {

StateSpaceModel parse(const std::string& text) { return parse_model(text, "model.json"); }

std::string error_of(const std::string& text) {
  return input_error_of([&] { (void)parse_model(text, "model.json"); });
}

}  // namespace

TEST_CASE("components: level and trend feed the channels, block-diagonal, diffuse by default") {
  // Durbin and Koopman (2012), section 3.2.1: local linear trend mu_t = mu_{t-1} + nu_{t-1} + xi,
  // nu_t = nu_{t-1} + zeta; a level is a random walk. Both are seen with loading 1.
  const StateSpaceModel model = parse(R"({
    "observations": ["a", "b"],
    "components": [{"type": "trend", "level_variance": 2, "slope_variance": 0.5},
                   {"type": "level", "name": "offset", "variance": 3, "channels": ["b"]}],
    "R": [1, 1]
  })");
  CHECK(model.state_names == std::vector<std::string>{"level", "slope", "offset"});
  Eigen::MatrixXd A(3, 3), C(2, 3);
  A << 1, 1, 0, 0, 1, 0, 0, 0, 1;
  C << 1, 0, 0, 1, 0, 1;
  CHECK(model.A == A);
  CHECK(model.C == C);
  CHECK(model.Q == Eigen::Vector3d(2, 0.5, 3).asDiagonal().toDenseMatrix());
  CHECK(model.diffuse == std::vector<bool>{true, true, true});
}

TEST_CASE("components: dummy and trigonometric seasonals") {
  // Durbin and Koopman (2012), section 3.2.2. Dummy form, period 4: gamma_t = -(gamma_{t-1} +
  // gamma_{t-2} + gamma_{t-3}) + omega. Trigonometric form, period 4: harmonic 1 rotates by
  // lambda = pi/2, harmonic 2 = s/2 is one state with A = cos(pi) = -1; the cos states are seen.
  const StateSpaceModel dummy = parse(R"({"observations": ["y"], "R": 1,
    "components": [{"type": "seasonal", "period": 4, "variance": 0.1}]})");
  Eigen::MatrixXd A(3, 3);
  A << -1, -1, -1, 1, 0, 0, 0, 1, 0;
  CHECK(dummy.A == A);
  CHECK(dummy.state_names == std::vector<std::string>{"season_1", "season_2", "season_3"});
  CHECK(dummy.C == Eigen::RowVector3d(1, 0, 0).eval());
  CHECK(dummy.Q(0, 0) == 0.1);
  CHECK(dummy.Q.sum() == 0.1);

  const StateSpaceModel trig = parse(R"({"observations": ["y"], "R": 1,
    "components": [{"type": "seasonal", "name": "week", "period": 4, "form": "trigonometric", "variance": 0.1}]})");
  CHECK(trig.state_names == std::vector<std::string>{"week_cos1", "week_sin1", "week_cos2"});
  const double c = std::cos(std::numbers::pi / 2), s = std::sin(std::numbers::pi / 2);
  Eigen::MatrixXd T(3, 3);
  T << c, s, 0, -s, c, 0, 0, 0, -1;
  CHECK((trig.A - T).cwiseAbs().maxCoeff() < 1e-15);
  CHECK(trig.C == Eigen::RowVector3d(1, 0, 1).eval());
  CHECK(trig.Q == (0.1 * Eigen::Matrix3d::Identity()).eval());
  // Both forms span the same seasonal patterns: with s - 1 states the sum over a period of the seen
  // value of A^k applied to any state is zero (the seasonal effects add up to zero over a cycle).
  for (const StateSpaceModel* m : {&dummy, &trig}) {
    Eigen::MatrixXd sum = Eigen::MatrixXd::Zero(1, 3), power = Eigen::MatrixXd::Identity(3, 3);
    for (int k = 0; k < 4; ++k, power = m->A * power) sum += m->C * power;
    CHECK(sum.cwiseAbs().maxCoeff() < 1e-14);
  }
}

TEST_CASE("components: autoregression in companion form") {
  // Durbin and Koopman (2012), section 3.4.
  const StateSpaceModel model = parse(R"({"observations": ["y"], "R": 1,
    "components": [{"type": "ar", "coefficients": [0.5, -0.2, 0.1], "variance": 2}]})");
  Eigen::MatrixXd A(3, 3);
  A << 0.5, -0.2, 0.1, 1, 0, 0, 0, 1, 0;
  CHECK(model.A == A);
  CHECK(model.state_names == std::vector<std::string>{"ar_1", "ar_2", "ar_3"});
  CHECK(model.Q(0, 0) == 2);
  CHECK(model.Q.sum() == 2);
}

TEST_CASE("components: kinematic models, continuous and discrete noise") {
  // Bar-Shalom, Li and Kirubarajan (2001): continuous white-noise acceleration, section 6.2.2,
  // Q = q [[T^3/3, T^2/2], [T^2/2, T]]; discrete white-noise acceleration, section 6.3.2,
  // Q = s [[T^4/4, T^3/2], [T^3/2, T^2]]; continuous Wiener-process acceleration, section 6.2.3.
  const double T = 0.5;
  const StateSpaceModel cv = parse(R"({"observations": ["x"], "R": 1,
    "components": [{"type": "constant_velocity", "dt": 0.5, "variance": 2}]})");
  Eigen::Matrix2d A, Q;
  A << 1, T, 0, 1;
  Q << T * T * T / 3, T * T / 2, T * T / 2, T;
  CHECK(cv.A == A);
  CHECK(((cv.Q - 2 * Q).cwiseAbs().maxCoeff()) < 1e-15);
  CHECK(cv.state_names == std::vector<std::string>{"position", "velocity"});
  const StateSpaceModel dw = parse(R"({"observations": ["x"], "R": 1,
    "components": [{"type": "constant_velocity", "dt": 0.5, "form": "discrete", "variance": 2}]})");
  Q << T * T * T * T / 4, T * T * T / 2, T * T * T / 2, T * T;
  CHECK(((dw.Q - 2 * Q).cwiseAbs().maxCoeff()) < 1e-15);
  const StateSpaceModel ca = parse(R"({"observations": ["x"], "R": 1,
    "components": [{"type": "constant_acceleration", "name": "cart", "variance": 1}]})");
  Eigen::Matrix3d A3, Q3;
  A3 << 1, 1, 0.5, 0, 1, 1, 0, 0, 1;
  Q3 << 1.0 / 20, 1.0 / 8, 1.0 / 6, 1.0 / 8, 1.0 / 3, 1.0 / 2, 1.0 / 6, 1.0 / 2, 1;
  CHECK(ca.A == A3);
  CHECK(((ca.Q - Q3).cwiseAbs().maxCoeff()) < 1e-15);
  CHECK(ca.state_names == std::vector<std::string>{"cart_position", "cart_velocity", "cart_acceleration"});
}

TEST_CASE("components: a bias feeds one channel, a regression enters through B") {
  const StateSpaceModel model = parse(R"({"observations": ["a", "b"], "inputs": ["u", "v"], "R": [1, 1],
    "components": [{"type": "level", "variance": 1},
                   {"type": "bias", "channel": "b", "variance": 0.01, "persistence": 0.99},
                   {"type": "regression", "inputs": ["v"], "coefficients": [2.5], "channels": ["a"]}]})");
  CHECK(model.state_names == std::vector<std::string>{"level", "bias_b", "regression"});
  Eigen::MatrixXd C(2, 3), B(3, 2);
  C << 1, 0, 1, 1, 1, 0;
  B << 0, 0, 0, 0, 0, 2.5;
  CHECK(model.C == C);
  CHECK(model.B == B);
  CHECK(model.A(1, 1) == 0.99);
  CHECK(model.A(2, 2) == 0.0);
  CHECK(model.Q(2, 2) == 0.0);
}

TEST_CASE("components: errors name the key") {
  CHECK(error_of(R"({"observations": ["y"], "R": 1, "components": [{"type": "leve", "variance": 1}]})") ==
        "model.json: components[0].type: unknown component \"leve\"; expected one of level, trend, seasonal, "
        "ar, "
        "constant_velocity, constant_acceleration, bias, regression; did you mean \"level\"?");
  CHECK(error_of(R"({"observations": ["y"], "R": 1, "components": [{"type": "level"}]})") ==
        "model.json: components[0].variance: missing; expected a variance or \"estimate\"");
  CHECK(error_of(R"({"observations": ["y"], "R": 1,
    "components": [{"type": "level", "variance": 1}, {"type": "level", "variance": 2}]})") ==
        "model.json: components[1]: its state \"level\" has the name of a state of an earlier component; "
        "give this "
        "component a different \"name\"");
  CHECK(
      error_of(R"({"observations": ["probe"], "R": 1,
    "components": [{"type": "bias", "channel": "prbe", "variance": 1}]})") ==
      "model.json: components[0].channel: \"prbe\" is not one of the observations; did you mean \"probe\"?");
  CHECK(error_of(R"({"observations": ["y"], "R": 1, "A": [[1]],
    "components": [{"type": "level", "variance": 1}]})") ==
        "model.json: A: given together with \"components\", which build the states, A, C and Q; give one or "
        "the other");
  CHECK(
      error_of(
          R"({"observations": ["y"], "R": 1, "components": [{"type": "level", "variance": 1, "chanels": ["y"]}]})") ==
      "model.json: components[0].chanels: unknown key; did you mean \"channels\"?");
  CHECK(error_of(R"({"observations": ["y"], "R": 1,
    "components": [{"type": "seasonal", "period": 4, "form": "trigonometric", "harmonics": 3, "variance": 1}]})") ==
        "model.json: components[0].harmonics: a period of 4 has at most 2 harmonics, got 3");
}

TEST_CASE("expand writes the same model as plain matrices") {
  const std::string text = R"({
    "description": "two probes",
    "observations": ["a", "b"],
    "components": [{"type": "trend", "level_variance": 2, "slope_variance": 0.5},
                   {"type": "bias", "channel": "a", "variance": 0.1}],
    "R": [1, 2],
    "initial": {"diffuse": ["level", "slope"], "covariance": [0, 0, 4]}
  })";
  const std::string expanded = expand_model_text(text, "model.json");
  CHECK(expanded.find("components") == std::string::npos);
  const StateSpaceModel a = parse_model(text, "model.json"), b = parse_model(expanded, "expanded.json");
  CHECK(a.state_names == b.state_names);
  CHECK(a.A == b.A);
  CHECK(a.C == b.C);
  CHECK(a.Q == b.Q);
  CHECK(a.R == b.R);
  CHECK(a.diffuse == b.diffuse);
  CHECK(a.initial_covariance == b.initial_covariance);
}

TEST_CASE("a diffuse model round-trips through write_model") {
  const StateSpaceModel model = parse(R"({"observations": ["y"], "R": 1,
    "components": [{"type": "trend", "level_variance": 2, "slope_variance": 0.5}],
    "initial": {"diffuse": ["slope"], "mean": [3, 7], "covariance": [5, 9]}})");
  // The diffuse state's mean and variance are unused and set to zero.
  CHECK(model.initial_mean == Eigen::Vector2d(3, 0));
  CHECK(model.initial_covariance == Eigen::Vector2d(5, 0).asDiagonal().toDenseMatrix());
  const StateSpaceModel again = parse_model(write_model(model), "again.json");
  CHECK(again.diffuse == model.diffuse);
  CHECK(again.initial_mean == model.initial_mean);
  CHECK(again.initial_covariance == model.initial_covariance);
  CHECK(error_of(
            R"({"observations": ["y"], "R": 1, "A": 1, "C": 1, "Q": 1, "initial": {"diffuse": ["levl"]}})") ==
        "model.json: initial.diffuse[0]: no state is named \"levl\"");
}
