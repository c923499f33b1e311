// The water-tank example (examples/water-tank): what its README says the commands report.

#include <doctest/doctest.h>

#include <nlohmann/json.hpp>
#include <string>

#include "cli_run.h"

using statewise::testing::CommandResult;
using statewise::testing::run_statewise;
using statewise::testing::ScratchFolder;

TEST_CASE("the water-tank example can work, and its log fits the model") {
  // Source: examples/water-tank/README.md (check exits 0 and names the 25-minute link drop as the
  // longest stretch without a reading; the smoothed run's NIS lies inside its 95% band).
  ScratchFolder folder;
  const std::string example = std::string(STATEWISE_SOURCE_DIR) + "/examples/water-tank/";
  const CommandResult check =
      run_statewise(folder, "check -m '" + example + "model.json' '" + example + "data.csv'");
  CHECK(check.status == 0);
  CHECK(check.out.find("1512.666 s (25.2 min) (lines 782 to 783)") != std::string::npos);
  CHECK(check.out.find("Observability of (F, C): rank 2 of 2, observable") != std::string::npos);
  const CommandResult smooth = run_statewise(folder, "smooth -m '" + example + "model.json' '" + example +
                                                         "data.csv' -o out.csv --report report.json");
  REQUIRE(smooth.status == 0);
  const nlohmann::json report = nlohmann::json::parse(folder.read("report.json"));
  const double nis = report["nis"]["mean"];
  CHECK(nis > report["nis"]["lower_95"].get<double>());
  CHECK(nis < report["nis"]["upper_95"].get<double>());
  CHECK(report["rows"] == 1291);
}
