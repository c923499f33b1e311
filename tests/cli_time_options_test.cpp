// `statewise filter` and `statewise smooth` on real time axes: step gaps, continuous models,
// --regular, --sort and --duplicates, run through the binary.

#include <doctest/doctest.h>

#include <cmath>
#include <string>

#include "cli_models.h"
#include "cli_run.h"

using statewise::testing::CommandResult;
using statewise::testing::kFallingBodyModel;
using statewise::testing::parse_table;
using statewise::testing::run_statewise;
using statewise::testing::ScratchFolder;
using statewise::testing::Table;

namespace {

const char* kFallingLog =
    "time,height,g\n"
    "2026-11-02T08:00:00Z,100.2,9.81\n"
    "2026-11-02T08:00:00.4Z,99.1,9.81\n"
    "2026-11-02T08:00:01.9Z,89.0,9.81\n"
    "2026-11-02T08:00:02Z,,9.81\n"
    "2026-11-02T08:00:07.25Z,-30.0,9.81\n";

// A discrete model with a one-minute step (the cold-room demo's matrices).
const char* kColdRoom = R"({
  "states": ["air_temp", "warming_rate"], "observations": ["probe"], "inputs": ["compressor"],
  "time": {"column": "time"}, "step": 60,
  "A": [[1, 1], [0, 0.98]], "B": [[-0.06], [0]], "C": [[1, 0]], "Q": [0.0004, 0.00002], "R": 0.01,
  "initial": {"mean": [-18, 0], "covariance": [4, 0.01]}
})";

// Largest relative difference between the named numeric column of two tables at matching rows.
double column_difference(const Table& a, const std::vector<std::size_t>& rows_a, const Table& b,
                         const std::vector<std::size_t>& rows_b, const std::string& column) {
  double worst = 0.0;
  for (std::size_t k = 0; k < rows_a.size(); ++k) {
    const double x = a.number(rows_a[k], column), y = b.number(rows_b[k], column);
    worst = std::max(worst, std::abs(x - y) / std::max(1.0, std::abs(y)));
  }
  return worst;
}

}  // namespace

TEST_CASE("rows inserted by --regular leave the smoothed estimates at the log's rows unchanged") {
  // First principles: an inserted row carries no measurement, and the transition over a gap split in
  // two is the composition of the two (the flow of the linear SDE), so the joint distribution of the
  // states at the log's rows, and hence their smoothed moments, are the same with or without it.
  ScratchFolder folder;
  folder.write("model.json", kFallingBodyModel);
  folder.write("log.csv", kFallingLog);
  const CommandResult plain = run_statewise(folder, "smooth -m model.json log.csv");
  const CommandResult regular =
      run_statewise(folder, "smooth -m model.json --regular 1 log.csv --report r.json");
  REQUIRE(plain.status == 0);
  REQUIRE(regular.status == 0);
  const Table a = parse_table(plain.out), b = parse_table(regular.out);
  REQUIRE(a.rows.size() == 5);
  REQUIRE(b.rows.size() == 11);  // 08:00:01 and 08:00:03 to :07 were skipped by the logger
  const std::vector<std::size_t> log_rows = {0, 1, 3, 4, 10};
  for (const char* column : {"position", "position_sd", "velocity", "velocity_sd"})
    CHECK(column_difference(a, {0, 1, 2, 3, 4}, b, log_rows, column) < 1e-12);
  CHECK(b.text(2, "time") == "2026-11-02T08:00:01.0Z");
  CHECK(b.text(2, "height_imputed") == "1");
  CHECK(b.text(2, "height_filled") == b.text(2, "height_est"));
  CHECK(b.text(9, "time") == "2026-11-02T08:00:07Z");  // in the style of the row before (08:00:02Z)
  CHECK(
      folder.read("r.json").find("\"6 rows were inserted on the --regular grid where the log had none; every "
                                 "channel is imputed there\"") != std::string::npos);
  // The same holds for the filtered moments, which condition on the rows up to each row only.
  const CommandResult filtered = run_statewise(folder, "filter -m model.json log.csv");
  const CommandResult filtered_regular = run_statewise(folder, "filter -m model.json --regular 1 log.csv");
  REQUIRE(filtered_regular.status == 0);
  const Table c = parse_table(filtered.out), d = parse_table(filtered_regular.out);
  REQUIRE(d.rows.size() == 11);
  for (const char* column : {"position", "position_sd", "velocity", "velocity_sd"})
    CHECK(column_difference(c, {0, 1, 2, 3, 4}, d, log_rows, column) < 1e-12);
  CHECK(d.text(2, "height_innov").empty());
}

TEST_CASE("a gap of k steps in a discrete model equals k steps through empty rows") {
  // First principles: with "step" the model propagates a gap of k steps as A^k, sum A^i B u,
  // sum A^i Q A^i' with the inputs held; a log that writes the skipped steps as empty rows (inputs
  // repeated) gives the filter k one-step predictions with no update, the same numbers.
  ScratchFolder folder;
  folder.write("model.json", kColdRoom);
  folder.write("gap.csv", "time,probe,compressor\n0,-18.1,1\n60,-18.2,0\n240,-17.9,1\n300,-18.0,1\n");
  folder.write("rows.csv",
               "time,probe,compressor\n0,-18.1,1\n60,-18.2,0\n120,,0\n180,,0\n240,-17.9,1\n300,-18.0,1\n");
  for (const char* command : {"filter", "smooth"}) {
    const CommandResult gap = run_statewise(folder, std::string(command) + " -m model.json gap.csv");
    const CommandResult rows = run_statewise(folder, std::string(command) + " -m model.json rows.csv");
    REQUIRE(gap.status == 0);
    REQUIRE(rows.status == 0);
    const Table a = parse_table(gap.out), b = parse_table(rows.out);
    INFO(command);
    for (const char* column : {"air_temp", "air_temp_sd", "warming_rate", "warming_rate_sd"})
      CHECK(column_difference(a, {0, 1, 2, 3}, b, {0, 1, 4, 5}, column) < 1e-12);
  }
  // --regular 60 writes the skipped steps itself.
  const CommandResult regular = run_statewise(folder, "smooth -m model.json --regular 60 gap.csv");
  const CommandResult rows = run_statewise(folder, "smooth -m model.json rows.csv");
  REQUIRE(regular.status == 0);
  CHECK(column_difference(parse_table(regular.out), {0, 1, 2, 3, 4, 5}, parse_table(rows.out),
                          {0, 1, 2, 3, 4, 5}, "air_temp") < 1e-12);
}

TEST_CASE("time-axis errors stop the command with exit status 2 and name the line") {
  // Specification: docs/cli.md, sections "Exit status" and "Time axis options".
  ScratchFolder folder;
  folder.write("model.json", kColdRoom);
  folder.write("back.csv", "time,probe,compressor\n0,-18.1,1\n120,-18.2,0\n60,-17.9,1\n");
  const CommandResult back = run_statewise(folder, "filter -m model.json back.csv");
  CHECK(back.status == 2);
  CHECK(
      back.err ==
      "statewise: error: back.csv:4:1: the time \"60\" is earlier than \"120\" on line 3; expected times in "
      "non-decreasing order (--sort sorts the rows first)\n");
  folder.write("odd.csv", "time,probe,compressor\n0,-18.1,1\n90,-18.2,0\n");
  CHECK(run_statewise(folder, "smooth -m model.json odd.csv").err ==
        "statewise: error: odd.csv:3:1: the gap of 90 s since line 2 is not a whole number of model steps of "
        "60 "
        "s (1.5 steps); expected a multiple of the step to within 1e-06 of a step\n");
  folder.write("twice.csv", "time,probe,compressor\n0,-18.1,1\n0,-18.2,0\n");
  CHECK(
      run_statewise(folder, "smooth -m model.json twice.csv").err ==
      "statewise: error: twice.csv:3:1: the time \"0\" repeats the time of line 2; expected increasing times "
      "(--duplicates first|last|mean merges rows with the same time)\n");
  const CommandResult policy = run_statewise(folder, "smooth -m model.json --duplicates average twice.csv");
  CHECK(policy.status == 2);
  CHECK(policy.err ==
        "statewise: error: --duplicates: expected first, last, mean or error, got \"average\"\n");
  CHECK(run_statewise(folder, "smooth -m model.json --regular 90 back.csv").err ==
        "statewise: error: --regular: expected a whole multiple of the model's step of 60 s, got 90\n");
  folder.write("untimed.json", R"({"observations": ["probe"], "A": 1, "C": 1, "Q": 1, "R": 1})");
  CHECK(run_statewise(folder, "filter -m untimed.json --sort back.csv").err ==
        "statewise: error: --sort: needs a time column; the model declares none (add \"time\": {\"column\": "
        "...} "
        "to the model file)\n");
  folder.write("garbled.csv", "time,probe,compressor\n0,-18.1,1\n1 min,-18.2,0\n");
  CHECK(run_statewise(folder, "filter -m model.json garbled.csv").err ==
        "statewise: error: garbled.csv:3:1: cannot read \"1 min\" in column \"time\" as a time; expected "
        "seconds "
        "(a number) or an ISO 8601 date-time such as 2026-11-02T08:30:00Z\n");
}

TEST_CASE("--sort and --duplicates put an unordered log with repeats in shape") {
  // Specification: docs/cli.md, section "Time axis options" (--sort is stable; --duplicates mean
  // averages each channel's present values). Reference: the same log written sorted and merged by hand.
  ScratchFolder folder;
  folder.write("model.json", kColdRoom);
  folder.write("messy.csv", "time,probe,compressor\n120,-17.8,1\n0,-18.1,1\n60,-18.4,0\n60,,0\n60,-18.0,0\n");
  folder.write("clean.csv", "time,probe,compressor\n0,-18.1,1\n60,-18.2,0\n120,-17.8,1\n");
  const CommandResult messy =
      run_statewise(folder, "smooth -m model.json --sort --duplicates mean messy.csv --report r.json");
  const CommandResult clean = run_statewise(folder, "smooth -m model.json clean.csv");
  REQUIRE(messy.status == 0);
  CHECK(messy.out == clean.out);
  CHECK(folder.read("r.json").find("\"2 rows repeated an earlier row's time and were merged into it "
                                   "(--duplicates mean)\"") != std::string::npos);
}

TEST_CASE("a discrete model without a step warns when its rows are unevenly spaced") {
  // Specification: docs/model-format.md, section "Time" (rows are steps; uneven gaps are pointed out).
  ScratchFolder folder;
  folder.write("model.json",
               R"({"observations": ["probe"], "time": {"column": "time"}, "A": 1, "C": 1, "Q": 1,
                                 "R": 1})");
  folder.write("log.csv", "time,probe\n0,1\n60,2\n120,3\n1320,4\n1380,5\n");
  const CommandResult result = run_statewise(folder, "filter -m model.json log.csv --report r.json");
  REQUIRE(result.status == 0);
  CHECK(folder.read("r.json").find(
            "\"the rows are unevenly spaced in time (gaps from 60 s to 1200 s, the largest "
            "before line 5), but the model has no \\\"step\\\", so each row counts as one "
            "model step; give the model a \\\"step\\\", make it continuous, or use "
            "--regular\"") != std::string::npos);
  folder.write("even.csv", "time,probe\n0,1\n60,2\n120,3\n");
  REQUIRE(run_statewise(folder, "filter -m model.json even.csv --report even.json").status == 0);
  CHECK(folder.read("even.json").find("unevenly") == std::string::npos);
}
