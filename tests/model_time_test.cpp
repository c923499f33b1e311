// The model file's time keys "domain" and "step" (docs/model-format.md, section "Time"): what they
// read as, what write_model writes back, and the exact words of every error.

#include <doctest/doctest.h>

#include <string>

#include "statewise/error.h"
#include "statewise/model.h"
#include "input_error.h"

using namespace statewise;

using statewise::testing::input_error_of;

namespace {

// A one-state model file with `extra` keys added at the top level.
std::string model_text(const std::string& extra) {
  return R"({"observations": ["y"], "A": 0.5, "C": 1, "Q": 1, "R": 1)" + extra + "}";
}

std::string error_of(const std::string& text) {
  return input_error_of([&] { (void)parse_model(text, "m.json"); });
}

}  // namespace

TEST_CASE("domain and step are read, defaulting to a discrete model with rows as steps") {
  // Specification: docs/model-format.md, section "Time": "domain" defaults to "discrete", "step" to none.
  const StateSpaceModel plain = parse_model(model_text(""), "m.json");
  CHECK(plain.domain == TimeDomain::discrete);
  CHECK(plain.step == 0.0);
  const StateSpaceModel stepped =
      parse_model(model_text(R"(, "time": {"column": "t"}, "step": 2.5)"), "m.json");
  CHECK(stepped.domain == TimeDomain::discrete);
  CHECK(stepped.step == 2.5);
  const StateSpaceModel continuous =
      parse_model(model_text(R"(, "time": {"column": "t"}, "domain": "continuous")"), "m.json");
  CHECK(continuous.domain == TimeDomain::continuous);
  const StateSpaceModel explicit_discrete = parse_model(model_text(R"(, "domain": "discrete")"), "m.json");
  CHECK(explicit_discrete.domain == TimeDomain::discrete);
}

TEST_CASE("write_model writes domain and step so that parsing gives the same model back") {
  // Specification: write_model's contract in model.h (parse_model(write_model(m)) reproduces m).
  for (const std::string& extra : {std::string(R"(, "time": {"column": "t"}, "domain": "continuous")"),
                                   std::string(R"(, "time": {"column": "t"}, "step": 0.1)")}) {
    const StateSpaceModel model = parse_model(model_text(extra), "m.json");
    const std::string written = write_model(model);
    const StateSpaceModel again = parse_model(written, "again.json");
    CHECK(again.domain == model.domain);
    CHECK(again.step == model.step);
    CHECK(again.time_column == "t");
  }
  const std::string continuous =
      write_model(parse_model(model_text(R"(, "time": {"column": "t"}, "domain": "continuous")"), "m.json"));
  CHECK(continuous.find("\"domain\": \"continuous\"") != std::string::npos);
  const std::string stepped =
      write_model(parse_model(model_text(R"(, "time": {"column": "t"}, "step": 0.1)"), "m.json"));
  CHECK(stepped.find("\"step\": 0.1") != std::string::npos);
}

TEST_CASE("bad domain and step values are errors naming the key") {
  // Specification: docs/model-format.md, section "Time"; messages are `file: key: what; expected X, got Y`.
  CHECK(error_of(model_text(R"(, "domain": "contineous")")) ==
        "m.json: domain: expected \"discrete\" or \"continuous\", got the text \"contineous\"; did you mean "
        "\"continuous\"?");
  CHECK(error_of(model_text(R"(, "domain": 1)")) ==
        "m.json: domain: expected \"discrete\" or \"continuous\", got the number 1");
  CHECK(error_of(model_text(R"(, "time": {"column": "t"}, "step": 0)")) ==
        "m.json: step: expected a positive number of seconds, got the number 0");
  CHECK(error_of(model_text(R"(, "time": {"column": "t"}, "step": -1)")) ==
        "m.json: step: expected a positive number of seconds, got the number -1");
  CHECK(error_of(model_text(R"(, "time": {"column": "t"}, "step": "1 min")")) ==
        "m.json: step: expected a positive number of seconds, got the text \"1 min\"");
}

TEST_CASE("time keys that contradict each other are errors naming the key") {
  // Specification: docs/model-format.md, section "Time".
  CHECK(error_of(model_text(R"(, "domain": "continuous")")) ==
        "m.json: time: missing; a continuous-time model needs a time column for the gaps between rows, e.g. "
        "\"time\": {\"column\": \"time\"}");
  CHECK(error_of(model_text(R"(, "time": {"column": "t"}, "domain": "continuous", "step": 1)")) ==
        "m.json: step: applies to discrete models only; a continuous model is discretized for each row's own "
        "time gap, so remove \"step\"");
  CHECK(error_of(model_text(R"(, "step": 1)")) ==
        "m.json: step: given, but the model has no time column to measure gaps with; add \"time\": "
        "{\"column\": ...} or remove \"step\"");
  CHECK(error_of(model_text(R"(, "steps": 1)")) == "m.json: steps: unknown key; did you mean \"step\"?");
}
