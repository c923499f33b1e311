// Checks of the fixed-lag smoother: the estimate it hands out for row s once row s+K has arrived is,
// by definition, E[x_s | rows 1..s+K]; it is compared with the full RTS smoother run on the log cut
// after row s+K, and with the conditional moments of the joint Gaussian computed directly.

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <limits>
#include <vector>

#include "joint_gaussian.h"
#include "statewise/discretize.h"
#include "statewise/fixed_lag.h"
#include "statewise/smoother.h"
#include "test_models.h"

using namespace statewise;

namespace {

// A log as the smoothers see it: the transition from each row to the next, values and inputs.
struct Log {
  StateSpaceModel model;
  std::vector<Transition> steps;  // steps[t]: from row t to row t+1
  std::vector<double> values;     // rows × m, NaN = missing
  std::vector<double> inputs;     // rows × p
  int rows = 0;
  const double* row_inputs(int t) const {
    return model.input_count() > 0 ? &inputs[static_cast<std::size_t>(t * model.input_count())] : nullptr;
  }
};


// Rows one model step apart, with missing cells, a missing row and a pulsed input.
Log oscillator_log(int rows) {
  Log log;
  log.model = testing::three_state_model();
  log.rows = rows;
  log.steps.assign(static_cast<std::size_t>(rows), model_transition(log.model));
  log.values.resize(static_cast<std::size_t>(rows * 2));
  log.inputs.resize(static_cast<std::size_t>(rows));
  for (int t = 0; t < rows; ++t) {
    log.values[static_cast<std::size_t>(2 * t)] = std::sin(0.7 * t) + 1.0 + 0.1 * (t % 3);
    log.values[static_cast<std::size_t>(2 * t + 1)] = std::cos(0.7 * t) * 0.6 - 0.05 * (t % 4);
    log.inputs[static_cast<std::size_t>(t)] = (t % 5 == 0) ? 1.0 : 0.0;
  }
  for (int t = 4; t < 8 && t < rows; ++t) log.values[static_cast<std::size_t>(2 * t)] = std::nan("");
  if (rows > 12) log.values[3] = log.values[21] = log.values[24] = log.values[25] = std::nan("");
  return log;
}

// A continuous model (white-noise acceleration, gravity as input) on uneven gaps, each row's
// transition discretized exactly for its gap.
Log falling_log() {
  Log log;
  log.model = testing::kinematic_model(0.3);
  const StateSpaceModel& model = log.model;
  const std::vector<double> gaps = {0.4, 1.5, 0.1, 5.25, 0.4, 0.4, 2.0, 0.05, 0.7, 3.0, 0.2};
  log.values = {100.2, 99.1, 89.0, std::nan(""), -30.0, -38.5, -46.0, std::nan(""), -70.0, -75.0, -120.0, -121.0};
  log.inputs = {9.81, 9.81, 9.81, 9.81, 9.81, 0.0, 9.81, 9.81, 9.81, 0.0, 0.0, 9.81};
  log.rows = static_cast<int>(log.values.size());
  for (double gap : gaps) log.steps.push_back(discretize_continuous(model.A, model.B, model.Q, gap));
  log.steps.push_back(log.steps.back());
  return log;
}

struct Filtered {
  std::vector<Eigen::VectorXd> means;
  std::vector<Eigen::MatrixXd> covariances;
};

Filtered filter_log(const Log& log) {
  KalmanFilter filter(log.model);
  InnovationRecord record = make_innovation_record(log.model.channel_count());
  Filtered result;
  for (int t = 0; t < log.rows; ++t) {
    if (t > 0) filter.predict(log.steps[static_cast<std::size_t>(t - 1)], log.row_inputs(t - 1));
    REQUIRE(filter.update(&log.values[static_cast<std::size_t>(t * log.model.channel_count())], record) ==
            StepStatus::ok);
    result.means.push_back(filter.mean());
    result.covariances.push_back(filter.covariance());
  }
  return result;
}

// The full RTS smoother over the first `rows` rows.
StateTrack smooth_first_rows(const Log& log, const Filtered& filtered, int rows) {
  StateTrack track(log.model.state_count());
  TransitionSchedule schedule;
  schedule.transitions = log.steps;
  for (int t = 0; t < rows; ++t) {
    track.push_back(filtered.means[static_cast<std::size_t>(t)], filtered.covariances[static_cast<std::size_t>(t)]);
    schedule.index_of_step.push_back(static_cast<std::uint32_t>(t));
  }
  REQUIRE(rts_smooth(track, schedule, log.inputs.data(), log.model.input_count()).ok);
  return track;
}

// One row the fixed-lag smoother handed out, and how many rows it had seen then.
struct Emitted {
  std::size_t row = 0;
  int rows_seen = 0;
  Eigen::VectorXd mean;
  Eigen::MatrixXd covariance;
};

std::vector<Emitted> run_fixed_lag(const Log& log, const Filtered& filtered, std::size_t lag) {
  FixedLagSmoother smoother(log.model.state_count(), lag);
  std::vector<Emitted> emitted;
  for (int t = 0; t < log.rows; ++t) {
    const Transition* step = t > 0 ? &log.steps[static_cast<std::size_t>(t - 1)] : nullptr;
    const bool ready = smoother.push(step, t > 0 ? log.row_inputs(t - 1) : nullptr,
                                     filtered.means[static_cast<std::size_t>(t)],
                                     filtered.covariances[static_cast<std::size_t>(t)]);
    REQUIRE(smoother.status().ok);
    CHECK(ready == (static_cast<std::size_t>(t) >= lag));
    if (ready) emitted.push_back({smoother.row(), t + 1, smoother.mean(), smoother.covariance()});
  }
  while (smoother.flush()) emitted.push_back({smoother.row(), log.rows, smoother.mean(), smoother.covariance()});
  REQUIRE(smoother.status().ok);
  CHECK(smoother.status().pseudo_inverse_rows == 0);
  return emitted;
}

// Every row handed out once, in order, each equal to the full smoother on the log cut after the
// rows seen (first principles: the fixed-lag estimate is the fixed-interval one on that shorter log).
void check_against_truncated_smoother(const Log& log, std::size_t lag) {
  const Filtered filtered = filter_log(log);
  const std::vector<Emitted> emitted = run_fixed_lag(log, filtered, lag);
  REQUIRE(emitted.size() == static_cast<std::size_t>(log.rows));
  const Eigen::Index n = log.model.state_count();
  for (std::size_t i = 0; i < emitted.size(); ++i) {
    const Emitted& e = emitted[i];
    CHECK(e.row == i);
    CHECK(static_cast<std::size_t>(e.rows_seen) == std::min(static_cast<std::size_t>(log.rows), i + lag + 1));
    const StateTrack reference = smooth_first_rows(log, filtered, e.rows_seen);
    for (Eigen::Index a = 0; a < n; ++a) {
      INFO("lag " << lag << " row " << i << " state " << a);
      CHECK(e.mean(a) == doctest::Approx(reference.mean(i)(a)).epsilon(1e-12).scale(1.0));
      for (Eigen::Index b = 0; b < n; ++b)
        CHECK(e.covariance(a, b) == doctest::Approx(reference.covariance(i)(a, b)).epsilon(1e-12).scale(1.0));
    }
  }
}

}  // namespace

TEST_CASE("fixed-lag estimates equal the full smoother on the log cut K rows later") {
  const Log log = oscillator_log(20);
  for (std::size_t lag : {0u, 1u, 2u, 5u, 19u, 20u, 25u}) check_against_truncated_smoother(log, lag);
}

TEST_CASE("fixed-lag estimates of a continuous model on uneven gaps equal the full smoother cut K rows later") {
  const Log log = falling_log();
  for (std::size_t lag : {0u, 1u, 3u, 5u, 12u, 40u}) check_against_truncated_smoother(log, lag);
}

TEST_CASE("fixed-lag estimates equal the conditional moments of the joint Gaussian") {
  // First principles: the estimate of row s handed out once row s+K has arrived is E[x_s | rows up to
  // s+K] with its covariance, computed here by conditioning the stacked joint Gaussian of that
  // shorter log directly (tests/joint_gaussian.h).
  const Log log = oscillator_log(12);
  const std::size_t lag = 3;
  const Filtered filtered = filter_log(log);
  const std::vector<Emitted> emitted = run_fixed_lag(log, filtered, lag);
  REQUIRE(emitted.size() == 12);
  for (const Emitted& e : emitted) {
    const auto reference = testing::joint_gaussian_reference(log.model, log.values, log.inputs, e.rows_seen);
    const int s = static_cast<int>(e.row);
    for (int i = 0; i < 3; ++i) {
      INFO("row " << s << " state " << i << " given " << e.rows_seen << " rows");
      CHECK(e.mean(i) == doctest::Approx(reference.conditional_mean(3 * s + i)).epsilon(1e-10));
      for (int j = 0; j < 3; ++j)
        CHECK(e.covariance(i, j) ==
              doctest::Approx(reference.conditional_covariance(3 * s + i, 3 * s + j)).epsilon(1e-9).scale(1e-3));
    }
  }
}

TEST_CASE("a lag of zero hands out the filtered moments of each row as it arrives") {
  // By definition E[x_t | rows 1..t] is the filter's estimate.
  const Log log = oscillator_log(8);
  const Filtered filtered = filter_log(log);
  const std::vector<Emitted> emitted = run_fixed_lag(log, filtered, 0);
  REQUIRE(emitted.size() == 8);
  for (std::size_t t = 0; t < 8; ++t) {
    CHECK(emitted[t].rows_seen == static_cast<int>(t) + 1);
    CHECK(emitted[t].mean == filtered.means[t]);
    CHECK(emitted[t].covariance == filtered.covariances[t]);
  }
}

TEST_CASE("the largest lag keeps every row and hands them out at the end") {
  // Regression guard: lag + 1 must not wrap around to a ring of size 0.
  const Log log = oscillator_log(6);
  const Filtered filtered = filter_log(log);
  const std::vector<Emitted> emitted = run_fixed_lag(log, filtered, std::numeric_limits<std::size_t>::max());
  REQUIRE(emitted.size() == 6);
  const StateTrack reference = smooth_first_rows(log, filtered, 6);
  for (std::size_t t = 0; t < 6; ++t) CHECK(emitted[t].mean == reference.mean(t));
}

TEST_CASE("the fixed-lag smoother counts rows with a singular predicted covariance") {
  // Q = 0 and a zero initial variance for the offset: every P_{t+1|t} is singular (see rts_smooth);
  // each row's gain is computed once, so each such row is counted once, and the estimates still
  // equal the conditional moments of the joint Gaussian (tests/joint_gaussian.h).
  Log log = oscillator_log(7);
  log.model.Q(2, 2) = 0.0;
  log.model.initial_covariance(2, 2) = 0.0;
  log.steps.assign(7, model_transition(log.model));
  const Filtered filtered = filter_log(log);
  FixedLagSmoother smoother(3, 2);
  std::vector<Emitted> emitted;
  for (int t = 0; t < 7; ++t) {
    const auto u = static_cast<std::size_t>(t);
    if (smoother.push(t > 0 ? &log.steps[u - 1] : nullptr, t > 0 ? log.row_inputs(t - 1) : nullptr,
                      filtered.means[u], filtered.covariances[u]))
      emitted.push_back({smoother.row(), t + 1, smoother.mean(), smoother.covariance()});
  }
  while (smoother.flush()) emitted.push_back({smoother.row(), 7, smoother.mean(), smoother.covariance()});
  REQUIRE(smoother.status().ok);
  CHECK(smoother.status().pseudo_inverse_rows == 6);
  REQUIRE(emitted.size() == 7);
  for (const Emitted& e : emitted) {
    const auto reference = testing::joint_gaussian_reference(log.model, log.values, log.inputs, e.rows_seen);
    for (int i = 0; i < 3; ++i)
      CHECK(e.mean(i) ==
            doctest::Approx(reference.conditional_mean(3 * static_cast<int>(e.row) + i)).epsilon(1e-9).scale(1.0));
  }
}
