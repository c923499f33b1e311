// Checks of the "estimate" markers (statewise/estimation_spec.h): what becomes a parameter, how
// the fitted model is written back, and the exact words of the error messages.

#include "statewise/estimation_spec.h"

#include <doctest/doctest.h>

#include <string>

#include "statewise/error.h"
#include "statewise/fit.h"
#include "statewise/model.h"

using namespace statewise;

namespace {

std::string template_error(const std::string& text) {
  try {
    (void)parse_model_template(text, "model.json");
  } catch (const InputError& error) {
    return error.what();
  }
  return "no error";
}

std::vector<std::string> names(const EstimationSpec& spec) {
  std::vector<std::string> result;
  for (const auto& p : spec.parameters) result.push_back(p.name);
  return result;
}

}  // namespace

TEST_CASE("whole-matrix markers: full, diagonal and scalar") {
  const ModelTemplate t = parse_model_template(R"({
    "observations": ["a", "b"], "states": ["x", "y"],
    "A": [[1, 0], [0, 1]], "C": [[1, 0], [0, 1]],
    "Q": {"estimate": "scalar", "start": 0.5},
    "R": "estimate"
  })",
                                               "model.json");
  CHECK(names(t.spec) == std::vector<std::string>{"Q", "R[0][0]", "R[1][0]", "R[1][1]"});
  CHECK(t.spec.parameters[0].kind == ParameterKind::variance);
  CHECK(t.spec.parameters[1].kind == ParameterKind::full_covariance);
  CHECK(t.model.Q == (0.5 * Eigen::Matrix2d::Identity()).eval());  // the start
  StateSpaceModel model = t.model;
  Eigen::VectorXd values(4);
  values << 2.0, 3.0, 0.5, 4.0;
  t.spec.apply(values, model);
  CHECK(model.Q == (2.0 * Eigen::Matrix2d::Identity()).eval());
  CHECK(model.R(1, 0) == 0.5);
  CHECK(model.R(0, 1) == 0.5);
  CHECK(t.spec.values(model) == values);

  const ModelTemplate d = parse_model_template(R"({"observations": ["a", "b"], "A": [[1, 0], [0, 1]],
    "C": [[1, 0], [0, 1]], "Q": [1, 1], "R": {"estimate": "diagonal"}})",
                                               "model.json");
  CHECK(names(d.spec) == std::vector<std::string>{"R[0]", "R[1]"});
}

TEST_CASE("entry markers, shared parameters and where the fitted values go") {
  const std::string text = R"({
  "description": "kept as it is",
  "observations": ["a", "b"],
  "states": ["x", "v"],
  "A": [[1, {"estimate": true, "parameter": "dt"}], [0, 1]],
  "C": [[1, 0], ["estimate", 0]],
  "Q": [[{"estimate": true, "parameter": "q", "times": 0.25}, {"estimate": true, "parameter": "q", "times": 0.5}],
        [{"estimate": true, "parameter": "q", "times": 0.5}, {"estimate": true, "parameter": "q"}]],
  "R": [0.5, {"estimate": true, "start": 2}]
})";
  const ModelTemplate t = parse_model_template(text, "model.json");
  CHECK(names(t.spec) == std::vector<std::string>{"dt", "C[1][0]", "q", "R[1]"});
  CHECK(t.spec.parameters[2].kind == ParameterKind::variance);
  CHECK(t.spec.parameters[3].start == 2.0);
  StateSpaceModel fitted = t.model;
  Eigen::VectorXd values(4);
  values << 0.1, 0.9, 4.0, 3.0;
  t.spec.apply(values, fitted);
  CHECK(fitted.Q(0, 1) == 2.0);
  const std::string written = write_fitted_model(t, fitted);
  CHECK(written.find("\"description\": \"kept as it is\"") != std::string::npos);
  CHECK(written.find("estimate") == std::string::npos);
  const StateSpaceModel again = parse_model(written, "fitted.json");
  CHECK(again.A(0, 1) == 0.1);
  CHECK(again.C(1, 0) == 0.9);
  CHECK(again.Q == fitted.Q);
  CHECK(again.R(1, 1) == 3.0);
}

TEST_CASE("component markers are written back into the component") {
  const ModelTemplate t = parse_model_template(R"({"observations": ["y"],
    "components": [{"type": "ar", "order": 2, "coefficients": "estimate", "variance": "estimate"}],
    "R": 1})",
                                               "model.json");
  CHECK(names(t.spec) == std::vector<std::string>{"components[0].coefficients[0]",
                                                  "components[0].coefficients[1]", "components[0].variance"});
  StateSpaceModel fitted = t.model;
  Eigen::VectorXd values(3);
  values << 0.5, -0.25, 2.0;
  t.spec.apply(values, fitted);
  const std::string written = write_fitted_model(t, fitted);
  CHECK(written.find("\"coefficients\": [0.5, -0.25]") != std::string::npos);
  CHECK(written.find("\"variance\": 2") != std::string::npos);
  CHECK(parse_model(written, "fitted.json").A == fitted.A);
}

TEST_CASE("marker errors name the key") {
  CHECK_THROWS_WITH(
      parse_model(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": "estimate"})", "model.json"),
      "model.json: R: is marked \"estimate\"; estimate it first with `statewise fit -m model.json "
      "data.csv -o fitted.json` and use the fitted model file");
  CHECK(template_error(R"({"observations": ["a", "b"], "A": 1, "C": [[1], [1]], "Q": 1,
    "R": [[1, "estimate"], [0, 1]]})") ==
        "model.json: R[0][1]: is marked \"estimate\" but R[1][0] is not; a covariance matrix is symmetric, "
        "so mark both");
  CHECK(template_error(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1,
    "initial": {"covariance": "estimate"}})") ==
        "model.json: initial.covariance: cannot be estimated from one series; give it, or mark the states "
        "\"diffuse\" when nothing is known about them");
  CHECK(template_error(R"({"observations": ["y"], "A": [[{"estimate": true, "parameter": "k"}]], "C": 1,
    "Q": [[{"estimate": true, "parameter": "k"}]], "R": 1})") ==
        "model.json: Q[0][0].parameter: the parameter \"k\" is also used in A; a parameter may appear in one "
        "matrix only");
  CHECK(template_error(R"({"observations": ["y"], "A": {"estimate": "diagonal"}, "C": 1, "Q": 1, "R": 1})") ==
        "model.json: A.estimate: \"diagonal\" applies to the covariances Q and R only; write \"estimate\" to "
        "estimate every entry of A");
  CHECK(template_error(R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1,
    "initial": {"mean": "estimate", "diffuse": true}})") ==
        "model.json: initial.mean[0]: is marked \"estimate\", but the state \"x1\" is diffuse and has no "
        "mean; remove "
        "one or the other");
}

// Found by the model_file fuzz target (docs/hardening.md, finding 4): without A and states, a
// whole-matrix scalar marker on Q was sized by zero states and read past the end of its starts.
TEST_CASE("a template without states or channels is refused before its markers are sized") {
  CHECK(template_error(R"({"observations": ["a", "b"], "Ax": [[1, 0], [0, 1]], "C": [[1, 0], [0, 1]],
    "Q": {"estimate": "scalar", "start": 0.5}, "R": {"estimate": "diagonal"}})") ==
        "model.json: A: missing; expected the states × states transition matrix");
  CHECK(template_error(R"({"states": [], "observations": ["y"], "A": [], "C": 1, "Q": {"estimate": "scalar"},
    "R": 1})") == "model.json: states: the model has no states; expected at least one");
  CHECK(template_error(R"({"A": 1, "C": 1, "Q": 1, "R": {"estimate": "scalar"}})") ==
        "model.json: observations: missing; expected the list of measured CSV columns");
  CHECK(template_error(R"({"observations": [], "A": 1, "C": 1, "Q": 1, "R": {"estimate": "scalar"}})") ==
        "model.json: observations: expected a list of at least one observed channel");
}

TEST_CASE("EM availability: a covariance estimated alone has no closed-form update") {
  const ModelTemplate t =
      parse_model_template(R"({"observations": ["a", "b"], "A": 1, "C": [[1], [1]], "Q": 1,
    "R": [[1, "estimate"], ["estimate", 1]]})",
                           "model.json");
  CHECK(em_unavailable_reason(t) ==
        "R[1][0]: a covariance estimated on its own has no closed-form EM update");
}
