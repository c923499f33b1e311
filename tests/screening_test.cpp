// Checks of the outlier gate and the stuck-value detector.

#include "statewise/screening.h"

#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "simulation.h"
#include "statewise/filter.h"
#include "test_models.h"

using namespace statewise;
using testing::cold_room_model;

namespace {

struct SpikeCounts {
  int spikes = 0, hits = 0, clean = 0, false_alarms = 0;
  double squared_error = 0.0;  // of the filtered temperature against the true one
  int rows = 0;
};

// Simulates `runs` logs from the model, replaces a share of the values by spikes of a random sign and a
// size uniform in [5, 15] measurement-noise standard deviations, filters them with (probability > 0)
// or without the gate, and counts.
SpikeCounts run_spikes(const StateSpaceModel& model, double probability, int runs, int rows) {
  SpikeCounts counts;
  const Transition transition = model_transition(model);
  const int m = model.channel_count();
  for (int run = 0; run < runs; ++run) {
    const testing::SimulatedLog log = testing::simulate(model, rows, 500 + static_cast<std::uint64_t>(run));
    testing::TestRandom random{77 + static_cast<std::uint64_t>(run)};
    KalmanFilter filter(model);
    OutlierGate gate(model, probability > 0.0 ? probability : 0.5);
    GateDecision decision;
    InnovationRecord record = make_innovation_record(m);
    std::vector<double> y(static_cast<std::size_t>(m));
    std::vector<unsigned char> spiked(static_cast<std::size_t>(m));
    for (int t = 0; t < rows; ++t) {
      if (t > 0) filter.predict(transition, nullptr);
      for (int c = 0; c < m; ++c) {
        y[static_cast<std::size_t>(c)] = log.values[static_cast<std::size_t>(t * m + c)];
        spiked[static_cast<std::size_t>(c)] = random.uniform() < 0.02;
        if (spiked[static_cast<std::size_t>(c)]) {
          const double size = (5.0 + 10.0 * random.uniform()) * std::sqrt(model.R(c, c));
          y[static_cast<std::size_t>(c)] += random.uniform() < 0.5 ? size : -size;
        }
      }
      const double* used = y.data();
      if (probability > 0.0) {
        gate.screen(y.data(), filter.mean(), filter.covariance(), decision);
        used = decision.kept.data();
        for (int c = 0; c < m; ++c) {
          const bool rejected = decision.rejected[static_cast<std::size_t>(c)] != 0;
          if (spiked[static_cast<std::size_t>(c)]) {
            ++counts.spikes;
            counts.hits += rejected;
          } else {
            ++counts.clean;
            counts.false_alarms += rejected;
          }
        }
      }
      if (filter.update(used, record) != StepStatus::ok) FAIL("the filter failed");
      if (t >= 50) {  // after the initial uncertainty has settled
        const double error = filter.mean()(0) - log.states[static_cast<std::size_t>(t * model.state_count())];
        counts.squared_error += error * error;
        ++counts.rows;
      }
    }
  }
  return counts;
}

}  // namespace

TEST_CASE("spikes are rejected with a high hit rate and few false alarms at P = 0.999") {
  const StateSpaceModel model = cold_room_model();
  const SpikeCounts gated = run_spikes(model, 0.999, 20, 2000);
  const double hit_rate = static_cast<double>(gated.hits) / gated.spikes;
  const double false_alarm_rate = static_cast<double>(gated.false_alarms) / gated.clean;
  MESSAGE("spikes " << gated.spikes << ", rejected " << gated.hits << " (hit rate " << hit_rate
                    << "); clean values " << gated.clean << ", rejected " << gated.false_alarms
                    << " (false-alarm rate " << false_alarm_rate << ")");
  // Hit rate. First principles: a spike of a measurement-noise standard deviations gives a standardized
  // innovation about N(a sqrt(R/S), 1); with S about 1.1 R here, the smallest spikes (a = 5) pass the
  // gate |z| < 3.29 less than 10% of the time and spikes above a = 7 almost never, so the average over
  // a uniform in [5, 15] is about 99%. Measured: 0.995 (1623 of 1631). Bound 0.98.
  CHECK(hit_rate >= 0.98);
  // False alarms. Under the model a good value passes with probability P, so 1 - P = 0.1% of clean
  // values are rejected: about 78 of 78 000 (binomial sd 9). A filter dragged away by spikes it
  // let through would raise more. Measured: 0.00100 (78 of 78 369). Bound: 0.1% plus 4 binomial sd.
  CHECK(false_alarm_rate <= 0.001 + 4.0 * std::sqrt(0.001 * 0.999 / gated.clean));

  // Why gate at all: the spikes let through wreck the estimate. First principles: with the spikes
  // rejected the temperature error is that of a filter with 2% missing values; without the gate it is
  // much larger. Measured rms errors: 0.051 gated, 0.080 without the gate.
  const SpikeCounts plain = run_spikes(model, 0.0, 20, 2000);
  const double gated_rms = std::sqrt(gated.squared_error / gated.rows);
  const double plain_rms = std::sqrt(plain.squared_error / plain.rows);
  MESSAGE("temperature rms error: gated " << gated_rms << ", no gate " << plain_rms);
  CHECK(plain_rms > 1.4 * gated_rms);
}

TEST_CASE("the gate's thresholds are chi-square quantiles and its mode follows R") {
  // scipy 1.10.1: scipy.stats.chi2.ppf(0.999, 1) = 10.827566170662733 (= norm.ppf(0.9995)**2) and
  // scipy.stats.chi2.ppf(0.999, 2) = 13.815510557964274 (= -2 ln 0.001, the closed form for 2 dof).
  StateSpaceModel model = cold_room_model();
  const OutlierGate diagonal(model, 0.999);
  CHECK(diagonal.mode() == GateMode::per_channel);
  CHECK(diagonal.threshold(1) == doctest::Approx(10.827566170662733).epsilon(1e-14));
  model.R(0, 1) = model.R(1, 0) = 0.005;
  const OutlierGate correlated(model, 0.999);
  CHECK(correlated.mode() == GateMode::joint);
  CHECK(correlated.threshold(2) == doctest::Approx(13.815510557964274).epsilon(1e-14));
}

TEST_CASE("per-channel gating tests each channel against the prediction updated with the ones before") {
  // Worked by hand: two channels seeing the same state, predicted mean 0 and variance 1, R = I.
  // Channel 1, y = -3: s = 1 + 1 = 2, e²/s = 4.5 < 10.83, accepted; the update gives x = -1.5, P = 0.5.
  // Channel 2, y = 3.5: s = 0.5 + 1 = 1.5, e = 5, e²/s = 16.7 > 10.83, rejected, although against the
  // prediction alone it would pass (3.5²/2 = 6.1). Its reported innovation is the one against the
  // prediction: v = 3.5, sd = sqrt(2).
  StateSpaceModel model;
  model.state_names = {"level"};
  model.observation_names = {"a", "b"};
  model.A = Eigen::MatrixXd::Identity(1, 1);
  model.B = Eigen::MatrixXd::Zero(1, 0);
  model.C = Eigen::MatrixXd::Ones(2, 1);
  model.Q = Eigen::MatrixXd::Identity(1, 1);
  model.R = Eigen::MatrixXd::Identity(2, 2);
  model.initial_mean = Eigen::VectorXd::Zero(1);
  model.initial_covariance = Eigen::MatrixXd::Identity(1, 1);
  OutlierGate gate(model, 0.999);
  GateDecision decision;
  const double row[2] = {-3.0, 3.5};
  gate.screen(row, model.initial_mean, model.initial_covariance, decision);
  CHECK(decision.rejected_count == 1);
  CHECK(decision.rejected[0] == 0);
  CHECK(decision.rejected[1] == 1);
  CHECK(decision.kept[0] == -3.0);
  CHECK(std::isnan(decision.kept[1]));
  CHECK(std::isnan(decision.innovation(0)));
  CHECK(decision.innovation(1) == 3.5);
  CHECK(decision.innovation_sd(1) == doctest::Approx(std::sqrt(2.0)));
  // The order matters: with the values swapped, the first (3.5) passes against the prediction (6.1), the
  // update gives x = 1.75, P = 0.5, and the second (-3) is rejected: e = -4.75, 22.6/1.5 = 15.0 > 10.83.
  const double swapped[2] = {3.5, -3.0};
  gate.screen(swapped, model.initial_mean, model.initial_covariance, decision);
  CHECK(decision.rejected[0] == 0);
  CHECK(decision.rejected[1] == 1);
  // Missing values are neither tested nor rejected.
  const double gap[2] = {std::nan(""), 3.5};
  gate.screen(gap, model.initial_mean, model.initial_covariance, decision);
  CHECK(decision.rejected_count == 0);
  CHECK(std::isnan(decision.kept[0]));
  CHECK(decision.kept[1] == 3.5);
}

TEST_CASE("joint gating rejects all channels of a row together") {
  // Worked by hand: two channels on two independent states, prior N(0, I), R = [[1, 0.5], [0.5, 1]]:
  // S = I + R = [[2, 0.5], [0.5, 2]], det 3.75, S^-1 = [[2, -0.5], [-0.5, 2]] / 3.75.
  // y = (4, 0): NIS = 2 * 16 / 3.75 = 8.53 < 13.82, accepted.
  // y = (5, -1): NIS = (2 * 25 - 2 * 0.5 * 5 * (-1) + 2 * 1) / 3.75 = 57 / 3.75 = 15.2 > 13.82, both
  // rejected.
  StateSpaceModel model;
  model.state_names = {"a", "b"};
  model.observation_names = {"ya", "yb"};
  model.A = Eigen::MatrixXd::Identity(2, 2);
  model.B = Eigen::MatrixXd::Zero(2, 0);
  model.C = Eigen::MatrixXd::Identity(2, 2);
  model.Q = Eigen::MatrixXd::Identity(2, 2);
  model.R.resize(2, 2);
  model.R << 1.0, 0.5, 0.5, 1.0;
  model.initial_mean = Eigen::VectorXd::Zero(2);
  model.initial_covariance = Eigen::MatrixXd::Identity(2, 2);
  OutlierGate gate(model, 0.999);
  GateDecision decision;
  const double accepted[2] = {4.0, 0.0};
  gate.screen(accepted, model.initial_mean, model.initial_covariance, decision);
  CHECK(decision.rejected_count == 0);
  const double rejected[2] = {5.0, -1.0};
  gate.screen(rejected, model.initial_mean, model.initial_covariance, decision);
  CHECK(decision.rejected_count == 2);
  CHECK(decision.innovation(0) == 5.0);
  CHECK(decision.innovation_sd(1) == doctest::Approx(std::sqrt(2.0)));
}

TEST_CASE("a run of identical values is reported with its rows and lines once it reaches the length") {
  StuckValueDetector detector(2, 5);
  const double nan = std::nan("");
  // Channel 0: 1 1 1 1 (4 only), then 2 2 _ 2 2 2 (5 values with a gap), then 3.
  // Channel 1: varies, then 7 on the last 6 rows (still going at the end).
  const std::vector<std::vector<double>> rows = {{1, 0.1}, {1, 0.2}, {1, 0.3}, {1, 0.4}, {2, 0.5}, {2, 7},
                                                 {nan, 7}, {2, 7},   {2, 7},   {2, 7},   {3, 7}};
  for (std::size_t t = 0; t < rows.size(); ++t) detector.add(rows[t].data(), t + 2);  // line 1 is the header
  const std::vector<StuckRun> runs = detector.runs();
  REQUIRE(runs.size() == 2);
  CHECK(detector.run_count() == 2);
  CHECK(runs[0].channel == 0);
  CHECK(runs[0].value == 2.0);
  CHECK(runs[0].count == 5);
  CHECK(runs[0].first_row == 5);
  CHECK(runs[0].last_row == 10);
  CHECK(runs[0].first_line == 6);
  CHECK(runs[0].last_line == 11);
  CHECK(runs[1].channel == 1);
  CHECK(runs[1].value == 7.0);
  CHECK(runs[1].count == 6);
  CHECK(runs[1].first_row == 6);
  CHECK(runs[1].last_row == 11);

  StuckValueDetector off(2, 0);
  for (const auto& row : rows) off.add(row.data(), 0);
  CHECK(off.runs().empty());
}
