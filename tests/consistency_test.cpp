// Checks of the online consistency tests: a short series worked by hand, equality with the batch
// functions of statistics.h, and their rejection rates on data simulated from the true model.

#include "statewise/consistency.h"

#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "simulation.h"
#include "statewise/screening.h"
#include "test_models.h"

using namespace statewise;
using testing::cold_room_model;

namespace {

// Feeds a single-channel series of standardized innovations (innovation = z, sd = 1, NIS = z²).
ConsistencySummary monitor_series(const std::vector<double>& z, ConsistencyOptions options = {}) {
  ConsistencyMonitor monitor({"y"}, options);
  InnovationRecord record = make_innovation_record(1);
  for (const double value : z) {
    record.innovation(0) = value;
    record.innovation_sd(0) = std::isnan(value) ? std::nan("") : 1.0;
    record.observed = std::isnan(value) ? 0 : 1;
    record.nis = value * value;
    monitor.add(record);
  }
  return monitor.summary();
}

}  // namespace

TEST_CASE("consistency tests on six values, worked by hand") {
  // z = 1, -1, 2, 0, -2, 0 (mean 0), two lags. By hand:
  //   S0 = 1 + 1 + 4 + 0 + 4 + 0 = 10
  //   S1 = (1)(-1) + (-1)(2) + (2)(0) + (0)(-2) + (-2)(0) = -3, r1 = -0.3
  //   S2 = (1)(2) + (-1)(0) + (2)(-2) + (0)(0) = -2, r2 = -0.2
  //   Q = n(n+2) (r1²/(n-1) + r2²/(n-2)) = 48 (0.09/5 + 0.04/4) = 1.344 (Ljung and Box 1978, eq. 2.1)
  //   p = exp(-Q/2) (chi-square with 2 degrees of freedom has survival exp(-x/2)) = exp(-0.672)
  //   m2 = 10/6, m3 = (1 - 1 + 8 - 8)/6 = 0, m4 = (1 + 1 + 16 + 16)/6 = 34/6
  //   skewness 0, kurtosis (34/6)/(10/6)² = 2.04, excess -0.96
  //   JB = n/6 (S² + (K-3)²/4) = 0.9216/4 = 0.2304, p = exp(-0.1152) (Jarque and Bera 1980)
  //   mean of z² = 10/6; NIS mean = 10/6 (one channel: NIS = z²)
  // The monitor sums values shifted by the first one (1 here), so this also checks the shift algebra.
  ConsistencyOptions options;
  options.ljung_box_lags = 2;
  const ConsistencySummary summary = monitor_series({1, -1, 2, 0, -2, 0}, options);
  const ChannelConsistency& c = summary.channels[0];
  CHECK(c.used == 6);
  CHECK(c.z_mean == doctest::Approx(0.0).scale(1.0).epsilon(1e-15));
  CHECK(c.lag1_autocorrelation == doctest::Approx(-0.3).epsilon(1e-14));
  CHECK(c.ljung_box.lags == 2);
  CHECK(c.ljung_box.statistic == doctest::Approx(1.344).epsilon(1e-14));
  CHECK(c.ljung_box.p_value == doctest::Approx(std::exp(-0.672)).epsilon(1e-14));
  CHECK(c.jarque_bera.skewness == doctest::Approx(0.0).scale(1.0).epsilon(1e-15));
  CHECK(c.jarque_bera.excess_kurtosis == doctest::Approx(-0.96).epsilon(1e-14));
  CHECK(c.jarque_bera.statistic == doctest::Approx(0.2304).epsilon(1e-14));
  CHECK(c.jarque_bera.p_value == doctest::Approx(std::exp(-0.1152)).epsilon(1e-14));
  CHECK(c.z_mean_square == doctest::Approx(10.0 / 6.0).epsilon(1e-15));
  CHECK(c.fraction_outside_1_96 == doctest::Approx(2.0 / 6.0));
  CHECK(summary.nis.mean == doctest::Approx(10.0 / 6.0).epsilon(1e-15));
  CHECK(summary.nis.expected == 1.0);
}

TEST_CASE("online Ljung-Box and Jarque-Bera equal the batch functions, missing values included") {
  // Reference: ljung_box, autocorrelation and jarque_bera of statistics.h on the whole series (checked
  // against hand-worked values, numpy and scipy in statistics_test.cpp). The series has a mean far from
  // zero (5), missing values at both ends and inside, and heavy-ish tails; the online sums must agree to
  // rounding.
  testing::TestRandom random{99};
  std::vector<double> z(600);
  for (std::size_t t = 0; t < z.size(); ++t) {
    const double e = random.normal();
    z[t] =
        5.0 + e + 0.4 * (t > 0 && !std::isnan(z[t - 1]) ? z[t - 1] - 5.0 : 0.0) + (t % 53 == 0 ? 6.0 : 0.0);
    if (random.uniform() < 0.1 || t < 3 || t > 590) z[t] = std::nan("");
  }
  for (const int lags : {0, 1, 7, 25}) {
    ConsistencyOptions options;
    options.ljung_box_lags = lags;
    const ChannelConsistency c = monitor_series(z, options).channels[0];
    const int h = lags > 0 ? lags : default_ljung_box_lags(c.used);
    const LjungBoxResult batch = ljung_box(z, h);
    INFO("lags " << h);
    CHECK(c.ljung_box.lags == h);
    CHECK(c.ljung_box.pairs_used == batch.pairs_used);
    CHECK(c.ljung_box.statistic == doctest::Approx(batch.statistic).epsilon(1e-11));
    CHECK(c.ljung_box.p_value == doctest::Approx(batch.p_value).epsilon(1e-9));
    CHECK(c.lag1_autocorrelation == doctest::Approx(autocorrelation(z, 1)[1]).epsilon(1e-12));
  }
  const ChannelConsistency c = monitor_series(z).channels[0];
  const JarqueBeraResult batch = jarque_bera(z);
  CHECK(c.used == batch.n);
  CHECK(c.jarque_bera.statistic == doctest::Approx(batch.statistic).epsilon(1e-11));
  CHECK(c.jarque_bera.skewness == doctest::Approx(batch.skewness).epsilon(1e-11));
  CHECK(c.jarque_bera.excess_kurtosis == doctest::Approx(batch.excess_kurtosis).epsilon(1e-11));
}

TEST_CASE("too few values and a constant series give no test, not a wrong one") {
  // As the batch functions (statistics.h): undefined statistics are NaN.
  const ChannelConsistency empty = monitor_series({}).channels[0];
  CHECK(empty.used == 0);
  CHECK(std::isnan(empty.ljung_box.statistic));
  CHECK(std::isnan(empty.z_mean));
  const ChannelConsistency constant = monitor_series({0.5, 0.5, 0.5, 0.5}).channels[0];
  CHECK(std::isnan(constant.ljung_box.statistic));
  CHECK(std::isnan(constant.jarque_bera.statistic));
  CHECK(constant.z_mean == 0.5);
  ConsistencyOptions options;
  options.ljung_box_lags = 5;
  const ChannelConsistency short_series = monitor_series({1, -1, 2}, options).channels[0];
  CHECK(std::isnan(short_series.ljung_box.statistic));
  CHECK(short_series.ljung_box.lags == 5);
}

TEST_CASE("rejected values are counted apart and left out of the tests") {
  ConsistencyMonitor monitor({"a"});
  InnovationRecord record = make_innovation_record(1);
  const unsigned char rejected = 1, kept = 0;
  record.innovation(0) = std::nan("");
  record.innovation_sd(0) = std::nan("");
  record.observed = 0;
  monitor.add(record, &rejected);
  monitor.add(record, &kept);
  record.innovation(0) = 0.5;
  record.innovation_sd(0) = 0.25;
  record.observed = 1;
  record.nis = 4.0;
  monitor.add(record, &kept);
  const ConsistencySummary summary = monitor.summary();
  CHECK(summary.channels[0].rejected == 1);
  CHECK(summary.channels[0].missing == 1);
  CHECK(summary.channels[0].used == 1);
  CHECK(summary.channels[0].z_mean == 2.0);
  CHECK(summary.nis.steps == 1);
}

TEST_CASE("on data from the true model the tests reject at their nominal 5% rate") {
  // First principles: when the data come from the model, each channel's z are independent N(0, 1)
  // over time, so each test's p-value is (asymptotically) uniform and p < 0.05 happens in 5% of runs.
  // 200 independent simulated logs of 1000 rows (one channel missing on 10% of rows): the number of
  // rejections of each test is Binomial(200, 0.05), mean 10; the region 2..20 holds it with
  // probability 0.999, and a wrong statistic (a factor off, wrong degrees of freedom) lands far
  // outside. The shares of |z| > 1.96 and of per-step NIS outside their 95% interval, pooled over
  // 200 000 values, are 0.05 within 0.002 (4 standard deviations of a binomial share).
  const StateSpaceModel model = cold_room_model();
  const Transition transition = model_transition(model);
  const int runs = 200, rows = 1000;
  int ljung_box_a = 0, ljung_box_b = 0, jarque_bera_a = 0, mean_a = 0, size_b = 0, nis = 0;
  double outside = 0.0, steps_outside = 0.0;
  for (int run = 0; run < runs; ++run) {
    const testing::SimulatedLog log = testing::simulate(model, rows, 1000 + static_cast<std::uint64_t>(run));
    testing::TestRandom gaps{static_cast<std::uint64_t>(run)};
    KalmanFilter filter(model);
    ConsistencyMonitor monitor(model.observation_names);
    InnovationRecord record = make_innovation_record(2);
    for (int t = 0; t < rows; ++t) {
      if (t > 0) filter.predict(transition, nullptr);
      double y[2] = {log.values[static_cast<std::size_t>(2 * t)],
                     log.values[static_cast<std::size_t>(2 * t + 1)]};
      if (gaps.uniform() < 0.1) y[1] = std::nan("");
      if (filter.update(y, record) != StepStatus::ok) FAIL("the filter failed");
      monitor.add(record);
    }
    const ConsistencySummary s = monitor.summary();
    ljung_box_a += s.channels[0].ljung_box.p_value < 0.05;
    ljung_box_b += s.channels[1].ljung_box.p_value < 0.05;
    jarque_bera_a += s.channels[0].jarque_bera.p_value < 0.05;
    mean_a += s.channels[0].z_mean_p_value < 0.05;
    size_b += s.channels[1].z_mean_square_p_value < 0.05;
    nis += s.nis.p_value < 0.05;
    outside += s.channels[0].fraction_outside_1_96;
    steps_outside += s.nis.fraction_steps_outside_95;
  }
  INFO("rejections of 200: Ljung-Box a " << ljung_box_a << ", b " << ljung_box_b << "; Jarque-Bera "
                                         << jarque_bera_a << "; mean " << mean_a << "; mean square " << size_b
                                         << "; NIS " << nis);
  for (const int count : {ljung_box_a, ljung_box_b, jarque_bera_a, mean_a, size_b, nis}) {
    CHECK(count >= 2);
    CHECK(count <= 20);
  }
  CHECK(outside / runs == doctest::Approx(0.05).epsilon(0.04));
  CHECK(steps_outside / runs == doctest::Approx(0.05).epsilon(0.04));
}

TEST_CASE("behind a gate the size tests use the truncated moments and keep their nominal rate") {
  // Values that pass a gate at P = 0.999 are a truncated sample. Known answers (scipy 1.10.1, with
  // q1 = chi2.ppf(0.999, 1), q2 = chi2.ppf(0.999, 2)): E[z²] behind a per-channel gate =
  // chi2.cdf(q1, 3) / chi2.cdf(q1, 1) = 0.9882925078207947; behind a joint gate on two channels
  // E[NIS] = 2 chi2.cdf(q2, 4) / chi2.cdf(q2, 2) = 1.9861706601021378, so E[z²] is half of it.
  const StateSpaceModel model = cold_room_model();
  const Transition transition = model_transition(model);
  const int runs = 60, rows = 10000;
  int corrected = 0, nis = 0;
  double expected_mean_square = 0.0, pooled_sum = 0.0, pooled_count = 0.0;
  for (int run = 0; run < runs; ++run) {
    const testing::SimulatedLog log = testing::simulate(model, rows, 7000 + static_cast<std::uint64_t>(run));
    KalmanFilter filter(model);
    OutlierGate gate(model, 0.999);
    GateDecision decision;
    ConsistencyOptions options;
    options.gate_probability = 0.999;
    ConsistencyMonitor monitor(model.observation_names, options);
    InnovationRecord record = make_innovation_record(2);
    for (int t = 0; t < rows; ++t) {
      if (t > 0) filter.predict(transition, nullptr);
      gate.screen(&log.values[static_cast<std::size_t>(2 * t)], filter.mean(), filter.covariance(), decision);
      if (filter.update(decision.kept.data(), record) != StepStatus::ok) FAIL("the filter failed");
      monitor.add(record, decision.rejected.data());
    }
    const ConsistencySummary s = monitor.summary();
    const ChannelConsistency& a = s.channels[0];
    expected_mean_square = a.z_expected_mean_square;
    corrected += a.z_mean_square_p_value < 0.05;
    nis += s.nis.p_value < 0.05;
    pooled_sum += a.z_mean_square * static_cast<double>(a.used);
    pooled_count += static_cast<double>(a.used);
  }
  CHECK(expected_mean_square == doctest::Approx(0.9882925078207947).epsilon(1e-13));
  // The pooled mean square of about 600 000 accepted z is the truncated expectation within 4 standard
  // deviations (Var z² = E[z⁴] - E[z²]² = 2.8381 - 0.9767 = 1.861 by the same identity, scipy:
  // 3 chi2.cdf(q1, 5) / chi2.cdf(q1, 1) = 2.8381138771995214), and so 6 standard deviations below 1,
  // the expectation without the gate.
  const double pooled = pooled_sum / pooled_count;
  const double sd = std::sqrt(1.861 / pooled_count);
  INFO("pooled mean square " << pooled << " (sd " << sd << "); test rejections of 60: " << corrected
                             << ", NIS " << nis);
  CHECK(std::abs(pooled - 0.9882925078207947) <= 4.0 * sd);
  // Binomial(60, 0.05): mean 3, P(X >= 11) = 0.0004.
  CHECK(corrected <= 10);
  CHECK(nis <= 10);

  StateSpaceModel correlated = model;
  correlated.R(0, 1) = correlated.R(1, 0) = 0.01;
  ConsistencyOptions joint;
  joint.gate_probability = 0.999;
  joint.gate_per_channel = false;
  ConsistencyMonitor monitor(correlated.observation_names, joint);
  InnovationRecord record = make_innovation_record(2);
  record.innovation << 0.5, -0.5;
  record.innovation_sd << 1.0, 1.0;
  record.observed = 2;
  record.nis = 0.5;
  monitor.add(record);
  CHECK(monitor.summary().channels[0].z_expected_mean_square ==
        doctest::Approx(1.9861706601021378 / 2.0).epsilon(1e-13));
  CHECK(monitor.summary().nis.expected == doctest::Approx(1.9861706601021378).epsilon(1e-13));
}
