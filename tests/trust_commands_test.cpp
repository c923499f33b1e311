// End-to-end checks of the command line for diagnostics, outlier rejection, numerics and plots
// (src/cli/trust_options.cpp, diagnose_command.cpp, plot_command.cpp and their use in filter/smooth):
// the statewise binary is run on small invented logs and its files and messages are read back.

#include <doctest/doctest.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cmath>
#include <cstdlib>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <vector>

#include "xml_check.h"

namespace {

// One folder per process: ctest runs the test cases in parallel, each in its own process.
const std::string kDirectory =
    std::string(STATEWISE_TEST_OUTPUT_DIR) + "/trust_commands/" + std::to_string(getpid());
const std::string kExample = std::string(STATEWISE_SOURCE_DIR) + "/examples/cold-room";

std::string read_file(const std::string& path) {
  std::ifstream file(path, std::ios::binary);
  std::ostringstream text;
  text << file.rdbuf();
  return text.str();
}

void write_file(const std::string& path, const std::string& text) {
  std::ofstream(path, std::ios::binary) << text;
}

struct Run {
  int status = -1;
  std::string out, err;
};

// Runs `statewise ARGUMENTS` in kDirectory, capturing standard output and error.
Run run_statewise(const std::string& arguments) {
  std::system(("mkdir -p \"" + kDirectory + "\"").c_str());
  const std::string out = kDirectory + "/stdout.txt", err = kDirectory + "/stderr.txt";
  const std::string command = "cd \"" + kDirectory + "\" && \"" + std::string(STATEWISE_BINARY) + "\" " +
                              arguments + " >\"" + out + "\" 2>\"" + err + "\"";
  const int raw = std::system(command.c_str());
  Run run;
  run.status = WIFEXITED(raw) ? WEXITSTATUS(raw) : -1;
  run.out = read_file(out);
  run.err = read_file(err);
  return run;
}

// A one-state, one-channel model and a log of 200 rows with a spike of +50 at row 100 (line 102).
void write_spike_log() {
  std::system(("mkdir -p \"" + kDirectory + "\"").c_str());
  write_file(kDirectory + "/level.json",
             R"({"states": ["level"], "observations": ["y"], "time": {"column": "t"},
                 "A": 1, "C": 1, "Q": 0.01, "R": 1, "initial": {"mean": [0], "covariance": 100}})");
  std::string csv = "t,y\n";
  for (int t = 0; t < 200; ++t) {
    const double y = (t == 100 ? 50.0 : 0.0) + std::sin(1.3 * t) * 0.8;  // within ±0.8 of the level
    csv += std::to_string(t) + "," + std::to_string(y) + "\n";
  }
  write_file(kDirectory + "/level.csv", csv);
}

std::vector<std::string> split(const std::string& line, char delimiter = ',') {
  std::vector<std::string> fields;
  std::string field;
  std::istringstream in(line);
  while (std::getline(in, field, delimiter)) fields.push_back(field);
  if (!line.empty() && line.back() == delimiter) fields.emplace_back();
  return fields;
}

std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> lines;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) lines.push_back(line);
  return lines;
}

}  // namespace

TEST_CASE("statewise diagnose prints the tests and verdicts, and writes the report on request") {
  const Run run = run_statewise("diagnose -m " + kExample + "/model.json " + kExample +
                                "/data.csv --missing -999 --report diagnose.json");
  REQUIRE(run.status == 0);
  CHECK(run.err.empty());
  const std::vector<std::string> lines = lines_of(run.out);
  REQUIRE(lines.size() > 20);
  CHECK(lines[0] == "statewise diagnose");
  CHECK(lines[3] == "  numerics                        plain");
  CHECK(lines[4] == "  outlier gate                    none");
  CHECK(lines[5] == "  stuck sensors                   runs of 20 identical values; 0 found");
  CHECK(lines[7] == "Verdicts");
  CHECK(run.out.find("\nWhole model\n") != std::string::npos);
  CHECK(run.out.find("\nprobe_a (2820 values used, 60 missing, 0 rejected)\n") != std::string::npos);
  const nlohmann::json report = nlohmann::json::parse(read_file(kDirectory + "/diagnose.json"));
  CHECK(report["command"] == "diagnose");
  CHECK(report["rows"] == 2880);
  CHECK(report["diagnostics"]["channels"].size() == 2);
  CHECK(report["verdicts"].is_array());
  CHECK(report["numerics"]["used"] == "plain");
  CHECK_FALSE(report.contains("rejected"));
}

TEST_CASE("--reject adds c_rejected and treats a rejected value as missing") {
  write_spike_log();
  const Run run = run_statewise(
      "filter -m level.json level.csv --reject 0.999 -o level-filtered.csv --report level.json.report");
  REQUIRE(run.status == 0);
  const std::vector<std::string> rows = lines_of(read_file(kDirectory + "/level-filtered.csv"));
  REQUIRE(rows.size() == 201);
  CHECK(rows[0] == "t,level,level_sd,y_est,y_sd,y_filled,y_imputed,y_rejected,y_innov,y_z");
  const std::vector<std::string> spike = split(rows[101]);
  CHECK(spike[0] == "100");
  CHECK(spike[5] == spike[3]);        // y_filled is the estimate
  CHECK(spike[6] == "1");             // imputed
  CHECK(spike[7] == "1");             // rejected
  CHECK(std::stod(spike[9]) > 10.0);  // its z against the prediction
  for (std::size_t r = 1; r < rows.size(); ++r)
    if (r != 101) CHECK(split(rows[r])[7] == "0");
  const nlohmann::json report = nlohmann::json::parse(read_file(kDirectory + "/level.json.report"));
  CHECK(report["rejected"]["count"] == 1);
  CHECK(report["rejected"]["first"][0]["line"] == 102);
  CHECK(report["rejected"]["first"][0]["value"] ==
        std::stod(split(lines_of(read_file(kDirectory + "/level.csv"))[101])[1]));
}

TEST_CASE("smooth writes the same columns as before unless asked for more") {
  // Regression guard for the shared table writer: without --reject and --innovations the smooth table
  // keeps exactly the documented columns (docs/outputs.md).
  write_spike_log();
  REQUIRE(run_statewise("smooth -m level.json level.csv -o plain.csv").status == 0);
  CHECK(lines_of(read_file(kDirectory + "/plain.csv"))[0] ==
        "t,level,level_sd,y_est,y_sd,y_filled,y_imputed");
  REQUIRE(run_statewise("smooth -m level.json level.csv --innovations --reject 0.999 -o more.csv").status ==
          0);
  const std::vector<std::string> rows = lines_of(read_file(kDirectory + "/more.csv"));
  CHECK(rows[0] == "t,level,level_sd,y_est,y_sd,y_filled,y_imputed,y_rejected,y_innov,y_z");
  CHECK(split(rows[101])[7] == "1");
}

TEST_CASE("--numerics square-root gives the plain results to 1e-9") {
  // The cold-room example is well conditioned: both numerics must agree (square_root_filter_test.cpp).
  REQUIRE(run_statewise("smooth -m " + kExample + "/model.json " + kExample +
                        "/data.csv --missing -999 -o plain.csv")
              .status == 0);
  REQUIRE(run_statewise("smooth -m " + kExample + "/model.json " + kExample +
                        "/data.csv --missing -999 --numerics square-root -o root.csv --report root.json")
              .status == 0);
  const std::vector<std::string> plain = lines_of(read_file(kDirectory + "/plain.csv"));
  const std::vector<std::string> root = lines_of(read_file(kDirectory + "/root.csv"));
  REQUIRE(plain.size() == root.size());
  CHECK(plain[0] == root[0]);
  double largest = 0.0;
  for (std::size_t r = 1; r < plain.size(); ++r) {
    const auto a = split(plain[r]), b = split(root[r]);
    for (std::size_t c = 1; c < a.size(); ++c)
      largest = std::max(
          largest, std::abs(std::stod(a[c]) - std::stod(b[c])) / std::max(1.0, std::abs(std::stod(a[c]))));
  }
  CHECK(largest <= 1e-9);
  CHECK(nlohmann::json::parse(read_file(kDirectory + "/root.json"))["numerics"]["used"] == "square-root");
}

TEST_CASE("the plain form falls back to square-root by itself and says so") {
  // The ill-conditioned measurement of square_root_filter_test.cpp (δ = 2^-27 = 7.450580596923828e-09):
  // the plain update cannot factor S on the first row.
  std::system(("mkdir -p \"" + kDirectory + "\"").c_str());
  write_file(kDirectory + "/ill.json",
             R"({"observations": ["y1", "y2"], "A": [[1,0,0],[0,1,0],[0,0,1]],
                 "C": [[1,1,1],[1,1,1.000000007450580596923828125]], "Q": [9.5367431640625e-07, 9.5367431640625e-07, 9.5367431640625e-07],
                 "R": [5.5511151231257827e-17, 5.5511151231257827e-17],
                 "initial": {"mean": [0,0,0], "covariance": [1,1,1]}})");
  write_file(kDirectory + "/ill.csv", "y1,y2\n1,1.0000000037252903\n1.25,1.2500000055879354\n");
  const Run run = run_statewise("filter -m ill.json ill.csv -o ill-out.csv --report ill-report.json");
  REQUIRE(run.status == 0);
  const nlohmann::json report = nlohmann::json::parse(read_file(kDirectory + "/ill-report.json"));
  CHECK(report["numerics"]["requested"] == "plain");
  CHECK(report["numerics"]["used"] == "square-root");
  CHECK(report["numerics"]["switched"]["row"] == 1);
  CHECK(report["numerics"]["switched"]["line"] == 2);
  CHECK(report["warnings"][0] ==
        "the plain covariance update broke down at ill.csv:2 (the innovation covariance C P C' + R of the "
        "observed "
        "channels is singular (not positive definite)); the filter switched to the square-root form from "
        "that row on");
}

TEST_CASE("bad values of the new options are reported word for word") {
  write_spike_log();
  const std::vector<std::pair<std::string, std::string>> cases = {
      {"--reject 1.5",
       "statewise: error: --reject: expected a probability between 0 and 1 (exclusive) such as 0.999, got "
       "\"1.5\"\n"},
      {"--reject 0.99x",
       "statewise: error: --reject: expected a probability between 0 and 1 (exclusive) such as 0.999, got "
       "\"0.99x\"\n"},
      {"--numerics squareroot",
       "statewise: error: --numerics: expected \"plain\" or \"square-root\", got \"squareroot\"; did you "
       "mean "
       "\"square-root\"?\n"},
      {"--stuck 1", "statewise: error: --stuck: expected 0 (off) or a run length of at least 2, got 1\n"},
      {"--lags 101",
       "statewise: error: --lags: expected 0 (automatic) or a number of lags from 1 to 100, got 101\n"},
  };
  for (const auto& [option, message] : cases) {
    const Run run = run_statewise("filter -m level.json level.csv -o /dev/null " + option);
    INFO(option);
    CHECK(run.status == 2);
    CHECK(run.err == message);
  }
}

TEST_CASE("statewise plot and --plot write a well-formed page of the table") {
  write_spike_log();
  REQUIRE(run_statewise("filter -m level.json level.csv --reject 0.999 -o results.csv --plot direct.html")
              .status == 0);
  const Run run = run_statewise("plot results.csv -o report.html");
  REQUIRE(run.status == 0);
  const std::string page = read_file(kDirectory + "/report.html");
  std::vector<statewise::testing::XmlElement> elements;
  REQUIRE_NOTHROW(elements = statewise::testing::XmlChecker::parse(page));
  CHECK(page.find("<h2>y</h2>") != std::string::npos);
  CHECK(page.find("<title>statewise estimates: results.csv</title>") != std::string::npos);
  // --plot draws the same table, with the run's verdicts on the page.
  const std::string direct = read_file(kDirectory + "/direct.html");
  REQUIRE_NOTHROW(statewise::testing::XmlChecker::parse(direct));
  CHECK(direct.find("<h2>Verdicts</h2>") != std::string::npos);
  const auto circles = [](const std::string& text) {
    std::size_t count = 0;
    // Measured points have r="1.5" (the legend's key has another radius).
    for (std::size_t at = text.find("r=\"1.5\"/>"); at != std::string::npos;
         at = text.find("r=\"1.5\"/>", at + 1))
      ++count;
    return count;
  };
  CHECK(circles(direct) == 199);  // 200 rows, one rejected
  CHECK(circles(page) == circles(direct));
  // smooth --plot includes the innovations' panels even though its table has none.
  REQUIRE(run_statewise("smooth -m level.json level.csv -o smoothed.csv --plot smoothed.html").status == 0);
  CHECK(read_file(kDirectory + "/smoothed.html").find("class=\"autocorrelation\"") != std::string::npos);
  CHECK(lines_of(read_file(kDirectory + "/smoothed.csv"))[0] ==
        "t,level,level_sd,y_est,y_sd,y_filled,y_imputed");
}

TEST_CASE("a stuck channel is a warning with its lines") {
  std::system(("mkdir -p \"" + kDirectory + "\"").c_str());
  std::string csv = "t,y\n";
  for (int t = 0; t < 100; ++t)
    csv += std::to_string(t) + "," +
           (t >= 30 && t < 55 ? std::string("2.5") : std::to_string(std::sin(t * 0.7))) + "\n";
  write_file(kDirectory + "/stuck.csv", csv);
  write_spike_log();
  const Run run = run_statewise("filter -m level.json stuck.csv -o /dev/null --report stuck.json");
  REQUIRE(run.status == 0);
  const nlohmann::json report = nlohmann::json::parse(read_file(kDirectory + "/stuck.json"));
  CHECK(report["stuck"]["runs"][0]["first_line"] == 32);
  CHECK(report["stuck"]["runs"][0]["last_line"] == 56);
  CHECK(report["warnings"][0] ==
        "channel \"y\" repeats the value 2.5 exactly on 25 observations in a row (lines 32 to 56 of "
        "stuck.csv): the "
        "sensor may be stuck");
  // --stuck 0 turns it off, --stuck 30 does not count a run of 25.
  CHECK(
      run_statewise("filter -m level.json stuck.csv -o /dev/null --stuck 30 --report stuck30.json").status ==
      0);
  CHECK(nlohmann::json::parse(read_file(kDirectory + "/stuck30.json"))["stuck"]["count"] == 0);
}
