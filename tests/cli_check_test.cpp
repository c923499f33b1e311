// `statewise check`, run through the binary.

#include <doctest/doctest.h>

#include <nlohmann/json.hpp>
#include <string>

#include "cli_run.h"

using statewise::testing::CommandResult;
using statewise::testing::run_statewise;
using statewise::testing::ScratchFolder;

namespace {

// A falling body (continuous time, gravity as a known input) seen by an altimeter, a speed sensor, or
// both. Invented numbers.
std::string falling_body(const std::string& observations, const std::string& C, const std::string& R) {
  return R"({"states": ["position", "velocity"], "observations": )" + observations +
         R"(, "inputs": ["g"], "time": {"column": "time"}, "domain": "continuous",
            "A": [[0, 1], [0, 0]], "B": [[0], [-1]], "C": )" +
         C + R"(, "Q": [[0, 0], [0, 0.3]], "R": )" + R + "}";
}

bool contains(const std::string& text, const std::string& part) {
  return text.find(part) != std::string::npos;
}

}  // namespace

TEST_CASE("check: a falling body seen by its height can work, seen by its speed cannot") {
  // First principles (rank test on [C; CF]): C = [1, 0] gives [[1, 0], [0, 1]], rank 2; C = [0, 1] gives
  // [[0, 1], [0, 0]], rank 1 with the position axis unseen, where F is 0 (no decay): exit status 3.
  ScratchFolder folder;
  folder.write("height.json", falling_body(R"(["height"])", "[[1, 0]]", "0.25"));
  folder.write("speed.json", falling_body(R"(["speed"])", "[[0, 1]]", "0.25"));
  const CommandResult height = run_statewise(folder, "check -m height.json --dt 0.5");
  CHECK(height.status == 0);
  CHECK(contains(height.out, "Observability of (F, C): rank 2 of 2, observable\n"));
  CHECK(contains(height.out,
                 "Verdict: The model can work: the channels see every direction of the state, and the "
                 "filter settles to a steady state.\n"));
  const CommandResult speed = run_statewise(folder, "check -m speed.json --report report.json");
  CHECK(speed.status == 3);
  CHECK(contains(speed.out,
                 "Observability of (F, C): rank 1 of 2, not observable\n"
                 "  cannot be seen from the channels: position\n"
                 "  eigenvalues of F there: 0 (on the stability boundary; not detectable)\n"));
  CHECK(contains(speed.out,
                 "Verdict: The model cannot work: the direction \"position\" cannot be seen from the "
                 "channels and does not decay on its own (eigenvalue 0 of F there), so its uncertainty "
                 "never shrinks.\n"));
  const nlohmann::json report = nlohmann::json::parse(folder.read("report.json"));
  CHECK(report["can_work"] == false);
  CHECK(report["observability"]["rank"] == 1);
  CHECK(report["observability"]["missing_directions"][0]["description"] == "position");
  CHECK(report["observability"]["detectable"] == false);
  CHECK(report["steady_state"]["status"] == "no_solution");
}

TEST_CASE("check with a log reports missing values and gaps, and leaves out channels with no value") {
  // Counted by hand from the log below; the model with both sensors is observable, but the altimeter
  // never reports, so the analysis uses the speed sensor alone and the position is unseen (exit 3).
  ScratchFolder folder;
  folder.write("both.json", falling_body(R"(["height", "speed"])", "[[1, 0], [0, 1]]", "[0.25, 0.04]"));
  folder.write("log.csv",
               "time,height,speed,g\n0,,0.1,9.81\n1,,-9.7,9.81\n2,,,9.81\n3,,,9.81\n10,,-98.2,9.81\n");
  const CommandResult result = run_statewise(folder, "check -m both.json log.csv --report report.json");
  CHECK(result.status == 3);
  CHECK(contains(result.out, "Log: log.csv, 5 rows over 10 s; median gap 1 s, largest 7 s before line 6\n"));
  CHECK(contains(result.out, "  speed    40%      2 rows (from line 4)         9 s (lines 3 to 6)\n"));
  CHECK(contains(result.out, "Warning: the analysis leaves out \"height\", which has no value in the log\n"));
  const nlohmann::json report = nlohmann::json::parse(folder.read("report.json"));
  CHECK(report["channels_left_out"] == nlohmann::json::parse(R"(["height"])"));
  CHECK(report["data"]["channels"][0]["missing_fraction"] == 1.0);
  CHECK(report["data"]["channels"][1]["longest_gap_seconds"] == 9.0);
  CHECK(report["steady_state"]["status"] == "no_solution");
  // With the altimeter reporting, the same model can work; its steady state is for the median gap.
  folder.write("full.csv", "time,height,speed,g\n0,100,0.1,9.81\n1,95.2,-9.7,9.81\n2,80.1,,9.81\n");
  const CommandResult full = run_statewise(folder, "check -m both.json full.csv --report full.json");
  CHECK(full.status == 0);
  CHECK(nlohmann::json::parse(folder.read("full.json"))["steady_state"]["step_seconds"] == 1.0);
}

TEST_CASE("check refuses --dt for a discrete model") {
  // Specification: docs/cli.md, section "statewise check".
  ScratchFolder folder;
  folder.write("model.json", R"({"observations": ["y"], "A": 1, "C": 1, "Q": 1, "R": 1})");
  const CommandResult result = run_statewise(folder, "check -m model.json --dt 2");
  CHECK(result.status == 2);
  CHECK(result.err ==
        "statewise: error: --dt: applies to continuous models only; a discrete model's steady state "
        "is per model step\n");
}
