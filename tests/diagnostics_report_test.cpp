// Checks of the diagnostics report: the JSON sections carry the forward pass's numbers, and the text of
// `statewise diagnose` and the warnings read exactly as documented.

#include "statewise/diagnostics_report.h"

#include <doctest/doctest.h>

#include <cmath>
#include <nlohmann/json.hpp>
#include <string>

#include "simulation.h"
#include "statewise/report.h"
#include "test_models.h"

using namespace statewise;
using testing::cold_room_model;

namespace {

// A hand-made report with every section filled, for the word-for-word checks.
RunReport sample_report() {
  RunReport report;
  report.command = "diagnose";
  report.model_path = "model.json";
  report.input_path = "log.csv";
  report.rows = 500;
  report.states = 2;
  report.log_likelihood = 812.3456789;
  DiagnosticsReport d;
  ChannelConsistency a;
  a.name = "probe_a";
  a.used = 497;
  a.missing = 1;
  a.rejected = 2;
  a.z_mean = 0.012;
  a.z_mean_p_value = 0.79;
  a.z_mean_square = 1.031;
  a.z_expected_mean_square = 0.98829;
  a.z_mean_square_p_value = 0.38;
  a.fraction_outside_1_96 = 0.0402;
  a.lag1_autocorrelation = -0.031;
  a.ljung_box = LjungBoxResult{8.25, 10, 10, 0.6, 4900};
  a.jarque_bera = JarqueBeraResult{1.5, 0.1, -0.12, 0.47, 497};
  d.consistency.channels = {a};
  d.consistency.nis = NisConsistency{500, 497, 1.02, 0.988, 0.87, 1.1, 0.59, 1.03, 0.046};
  d.verdicts = {Verdict{Finding::consistent, "", "The innovations look as the model predicts."}};
  d.reject_probability = 0.999;
  d.rejections.count = 2;
  d.rejections.row_count = 2;
  d.rejections.per_channel = {2};
  d.rejections.first = {RejectedValue{40, 41, 0, -12.5, 9.25}, RejectedValue{41, 42, 0, -12.5, 8.5}};
  d.stuck_run_length = 20;
  d.stuck_run_count = 1;
  d.stuck_runs = {StuckRun{0, -18.25, 25, 100, 124, 101, 125}};
  d.numerics_used = Numerics::square_root;
  d.numerics_switch = NumericsSwitch{7, 8, "the innovation covariance is singular"};
  report.diagnostics = d;
  report.warnings = diagnostics_warnings(d, "log.csv");
  return report;
}

}  // namespace

TEST_CASE("diagnostics warnings, word for word") {
  const RunReport report = sample_report();
  REQUIRE(report.warnings.size() == 2);
  CHECK(report.warnings[0] ==
        "the plain covariance update broke down at log.csv:8 (the innovation covariance is singular); the "
        "filter "
        "switched to the square-root form from that row on");
  CHECK(
      report.warnings[1] ==
      "channel \"probe_a\" repeats the value -18.25 exactly on 25 observations in a row (lines 101 to 125 of "
      "log.csv): the sensor may be stuck");
}

TEST_CASE("the text of statewise diagnose, word for word") {
  const std::string expected =
      "statewise diagnose\n"
      "  model                           model.json\n"
      "  log                             log.csv (500 rows, 2 states, 1 channels)\n"
      "  numerics                        square-root from row 7 (the plain form broke down there)\n"
      "  outlier gate                    P = 0.999, channel by channel: 2 values rejected on 2 rows\n"
      "  stuck sensors                   runs of 20 identical values; 1 found\n"
      "\n"
      "Verdicts\n"
      "  - The innovations look as the model predicts.\n"
      "\n"
      "Whole model\n"
      "  log-likelihood                  812.34568\n"
      "  average NIS per step            1.02 (expected 0.988, 95% range 0.87 to 1.1, p = 0.59)\n"
      "  steps with NIS outside 95%      4.6% (5% without a gate; fewer behind one)\n"
      "  z is the standardized innovation: measured minus predicted, over its standard deviation under the "
      "model.\n"
      "\n"
      "probe_a (497 values used, 1 missing, 2 rejected)\n"
      "  mean of z                       +0.012 (expected 0, p = 0.79)\n"
      "  mean square of z                1.03 (expected 0.988, p = 0.38)\n"
      "  share of |z| beyond 1.96        4% (expected 5% without a gate)\n"
      "  Ljung–Box on 10 lags            Q = 8.25, p = 0.6; lag-1 autocorrelation -0.031\n"
      "  Jarque–Bera                     JB = 1.5, p = 0.47; skewness +0.1, excess kurtosis -0.12\n"
      "\n"
      "Rejected values (2)\n"
      "  line 41: probe_a = -12.5, z = +9.25\n"
      "  line 42: probe_a = -12.5, z = +8.5\n"
      "\n"
      "Warnings\n"
      "  - the plain covariance update broke down at log.csv:8 (the innovation covariance is singular); the\n"
      "    filter switched to the square-root form from that row on\n"
      "  - channel \"probe_a\" repeats the value -18.25 exactly on 25 observations in a row (lines 101 to "
      "125\n"
      "    of log.csv): the sensor may be stuck\n";
  CHECK(write_diagnostics_text(sample_report()) == expected);
}

TEST_CASE("the report's JSON sections carry the forward pass's numbers") {
  // A simulated cold-room log with two spikes and a stuck stretch, through a gated pass.
  const StateSpaceModel model = cold_room_model();
  const Transition transition = model_transition(model);
  testing::SimulatedLog log = testing::simulate(model, 300, 21);
  log.values[2 * 50] += 4.0;
  log.values[2 * 120 + 1] -= 4.0;
  for (int t = 200; t < 230; ++t) log.values[static_cast<std::size_t>(2 * t)] = -17.5;
  ForwardPassOptions options;
  options.reject_probability = 0.999;
  ForwardPass pass(model, options);
  for (int t = 0; t < log.rows; ++t) {
    if (t > 0) pass.predict(transition, nullptr);
    REQUIRE(pass.update(&log.values[static_cast<std::size_t>(2 * t)], static_cast<std::size_t>(t + 2)) ==
            StepStatus::ok);
  }
  RunReport report;
  report.command = "filter";
  report.diagnostics = make_diagnostics_report(pass);
  const nlohmann::json json = nlohmann::json::parse(write_report_json(report));
  const ConsistencySummary summary = pass.consistency();

  CHECK(json["numerics"]["requested"] == "plain");
  CHECK(json["numerics"]["used"] == "plain");
  CHECK(json["numerics"]["switched"].is_null());
  const auto& channel = json["diagnostics"]["channels"][0];
  CHECK(channel["name"] == "probe_a");
  CHECK(channel["used"] == summary.channels[0].used);
  CHECK(channel["rejected"] == summary.channels[0].rejected);
  CHECK(channel["ljung_box"]["statistic"].get<double>() == summary.channels[0].ljung_box.statistic);
  CHECK(channel["ljung_box"]["lags"] == 10);
  CHECK(channel["jarque_bera"]["p_value"].get<double>() == summary.channels[0].jarque_bera.p_value);
  CHECK(channel["z_mean_square"].get<double>() == summary.channels[0].z_mean_square);
  CHECK(json["diagnostics"]["nis"]["mean"].get<double>() == summary.nis.mean);
  CHECK(json["diagnostics"]["consistent"] == all_consistent(report.diagnostics->verdicts));
  REQUIRE(json["verdicts"].is_array());
  CHECK(json["verdicts"].size() == report.diagnostics->verdicts.size());
  CHECK(json["verdicts"][0]["text"] == report.diagnostics->verdicts[0].text);
  CHECK(json["rejected"]["probability"] == 0.999);
  CHECK(json["rejected"]["mode"] == "per_channel");
  CHECK(json["rejected"]["count"] == pass.rejections().count);
  CHECK(json["rejected"]["per_channel"]["probe_b"] == pass.rejections().per_channel[1]);
  REQUIRE(json["rejected"]["first"].size() >= 2);
  CHECK(json["rejected"]["first"][0]["line"] == 52);
  CHECK(json["rejected"]["first"][0]["channel"] == "probe_a");
  CHECK(json["stuck"]["run_length"] == 20);
  REQUIRE(json["stuck"]["runs"].size() == 1);
  CHECK(json["stuck"]["runs"][0]["channel"] == "probe_a");
  CHECK(json["stuck"]["runs"][0]["value"] == -17.5);
  CHECK(json["stuck"]["runs"][0]["first_line"] == 202);
  CHECK(json["stuck"]["runs"][0]["count"] == 30);
}
