// `statewise discretize`, run through the binary.

#include <doctest/doctest.h>

#include <nlohmann/json.hpp>
#include <string>

#include "cli_models.h"
#include "cli_run.h"

using statewise::testing::CommandResult;
using statewise::testing::kFallingBodyModel;
using statewise::testing::run_statewise;
using statewise::testing::ScratchFolder;

TEST_CASE("discretize prints the discrete model file with the step") {
  // Elementary kinematics and Bar-Shalom, Li, Kirubarajan 2001, section 6.2.2: over T = 0.5 s,
  // A = [[1, T], [0, 1]], B = [-T^2/2, -T], Q = q [[T^3/3, T^2/2], [T^2/2, T]] with q = 0.3.
  ScratchFolder folder;
  folder.write("model.json", kFallingBodyModel);
  const CommandResult result = run_statewise(folder, "discretize -m model.json --dt 0.5");
  REQUIRE(result.status == 0);
  const nlohmann::json model = nlohmann::json::parse(result.out);
  CHECK(model["step"] == 0.5);
  CHECK(!model.contains("domain"));
  CHECK(model["time"]["column"] == "time");
  CHECK(model["A"] == nlohmann::json::parse("[[1, 0.5], [0, 1]]"));
  CHECK(model["B"] == nlohmann::json::parse("[[-0.125], [-0.5]]"));
  CHECK(model["Q"][0][0].get<double>() == doctest::Approx(0.3 * 0.125 / 3).epsilon(1e-15));
  CHECK(model["Q"][0][1].get<double>() == doctest::Approx(0.3 * 0.25 / 2).epsilon(1e-15));
  CHECK(model["Q"][1][1].get<double>() == doctest::Approx(0.3 * 0.5).epsilon(1e-15));
}

TEST_CASE("the discretized model smooths a regular log exactly as the continuous one") {
  // First principles: the discretization is exact, so on rows 0.5 s apart the discrete model with
  // step 0.5 and the continuous model define the same joint distribution.
  ScratchFolder folder;
  folder.write("model.json", kFallingBodyModel);
  REQUIRE(run_statewise(folder, "discretize -m model.json --dt 0.5 -o discrete.json").status == 0);
  folder.write("log.csv",
               "time,height,g\n0,100.1,9.81\n0.5,98.9,9.81\n1,95.2,9.81\n1.5,,9.81\n2,80.3,9.81\n");
  const CommandResult continuous = run_statewise(folder, "smooth -m model.json --digits 12 log.csv");
  const CommandResult discrete = run_statewise(folder, "smooth -m discrete.json --digits 12 log.csv");
  REQUIRE(continuous.status == 0);
  CHECK(discrete.out == continuous.out);
}

TEST_CASE("discretize refuses what it cannot do, with exit status 2") {
  // Specification: docs/cli.md, section "statewise discretize".
  ScratchFolder folder;
  folder.write("rows.json", R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1})");
  const CommandResult stepless = run_statewise(folder, "discretize -m rows.json --dt 1");
  CHECK(stepless.status == 2);
  CHECK(
      stepless.err ==
      "statewise: error: --dt: the model is already discrete and has no \"step\" to count 1 s in; expected a "
      "continuous model or a discrete one with a step\n");
  folder.write("model.json", kFallingBodyModel);
  CHECK(run_statewise(folder, "discretize -m model.json --dt -2").err ==
        "statewise: error: --dt: expected a positive number of seconds, got -2\n");
  CHECK(run_statewise(folder, "discretize -m model.json").status == 2);
  CHECK(run_statewise(folder, "discretize -m model.json --dt 1 -o model.json").status == 4);
}
