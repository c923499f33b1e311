// `statewise forecast`, run through the binary.

#include <doctest/doctest.h>

#include <cmath>
#include <string>

#include "cli_run.h"

using statewise::testing::CommandResult;
using statewise::testing::parse_table;
using statewise::testing::run_statewise;
using statewise::testing::ScratchFolder;
using statewise::testing::Table;

namespace {

// A local level (random walk plus noise) logged once a minute; invented numbers.
const char* kLevel = R"({
  "states": ["level"], "observations": ["y"], "time": {"column": "time"}, "step": 60,
  "A": 1, "C": 1, "Q": 0.04, "R": 0.25, "initial": {"mean": 0, "covariance": 100}
})";

const char* kLevelLog =
    "time,y\n"
    "2026-11-02T23:57:00+01:00,4.1\n"
    "2026-11-02T23:58:00+01:00,3.7\n"
    "2026-11-02T23:59:00+01:00,\n"
    "2026-11-03T00:00:00+01:00,4.4\n";

}  // namespace

TEST_CASE("forecast rows of a local level: constant mean, variance growing by Q per step") {
  // First principles: for x_t = x_{t-1} + w_t the k-step prediction from N(m, P) is N(m, P + k Q), and
  // a new measurement y = x + v is N(m, P + k Q + R); z = 1.959963984540054 is
  // scipy.stats.norm.ppf(0.975) (scipy 1.10.1). m and P are the filter's estimate at the last row.
  ScratchFolder folder;
  folder.write("model.json", kLevel);
  folder.write("log.csv", kLevelLog);
  const CommandResult filtered = run_statewise(folder, "filter -m model.json log.csv");
  const CommandResult forecast = run_statewise(folder, "forecast -m model.json --horizon 3 log.csv");
  REQUIRE(filtered.status == 0);
  REQUIRE(forecast.status == 0);
  const Table last = parse_table(filtered.out);
  const double m = last.number(3, "level"), P = std::pow(last.number(3, "level_sd"), 2);
  const Table table = parse_table(forecast.out);
  CHECK(table.header == std::vector<std::string>{"time", "level", "level_sd", "y_est", "y_sd", "y_filled",
                                                 "y_imputed", "y_lo", "y_hi"});
  REQUIRE(table.rows.size() == 3);
  const char* times[] = {"2026-11-03T00:01:00+01:00", "2026-11-03T00:02:00+01:00",
                         "2026-11-03T00:03:00+01:00"};
  for (std::size_t r = 0; r < 3; ++r) {
    const double k = static_cast<double>(r + 1);
    INFO("forecast row " << k);
    CHECK(table.text(r, "time") == times[r]);
    CHECK(table.number(r, "level") == doctest::Approx(m).epsilon(1e-15));
    CHECK(table.number(r, "level_sd") == doctest::Approx(std::sqrt(P + 0.04 * k)).epsilon(1e-14));
    CHECK(table.number(r, "y_sd") == doctest::Approx(std::sqrt(P + 0.04 * k)).epsilon(1e-14));
    CHECK(table.text(r, "y_imputed") == "1");
    const double half = 1.959963984540054 * std::sqrt(P + 0.04 * k + 0.25);
    CHECK(table.number(r, "y_lo") == doctest::Approx(m - half).epsilon(1e-14));
    CHECK(table.number(r, "y_hi") == doctest::Approx(m + half).epsilon(1e-14));
  }
}

TEST_CASE("forecast --until and --step lay out the future rows") {
  // Specification: docs/cli.md, section "statewise forecast" (rows every --step up to --until).
  ScratchFolder folder;
  folder.write("model.json", kLevel);
  folder.write("log.csv", kLevelLog);
  const CommandResult until =
      run_statewise(folder, "forecast -m model.json --until 2026-11-03T00:10:00+01:00 --step 180 log.csv");
  REQUIRE(until.status == 0);
  const Table table = parse_table(until.out);
  REQUIRE(table.rows.size() == 3);
  CHECK(table.text(2, "time") == "2026-11-03T00:09:00+01:00");
  CHECK(run_statewise(folder, "forecast -m model.json --until 2026-11-03T00:00:30+01:00 log.csv").err ==
        "statewise: error: --until: is 30 s after the log's last row, less than one forecast step of 60 s; "
        "expected a later time\n");
  CHECK(
      run_statewise(folder, "forecast -m model.json --until 1793660000 log.csv").err ==
      "statewise: error: --until: expected an ISO 8601 date-time like the log's times, got \"1793660000\"\n");
  const CommandResult level = run_statewise(folder, "forecast -m model.json --horizon 1 --level 95 log.csv");
  CHECK(level.status == 2);
  CHECK(level.err == "statewise: error: --level: expected a coverage between 0 and 1 such as 0.95, got 95\n");
  CHECK(run_statewise(folder, "forecast -m model.json log.csv").err ==
        "statewise: error: --horizon: missing; give --horizon ROWS or --until TIME\n");
  folder.write("empty.csv", "time,y\n");
  CHECK(run_statewise(folder, "forecast -m model.json --horizon 2 empty.csv").err ==
        "statewise: error: empty.csv: the log has no data rows; a forecast starts from the estimate at its "
        "last "
        "row\n");
}
