// Checks of the exact diffuse filter and smoother (statewise/diffuse.h) against first principles:
// Durbin and Koopman (2012), section 5.1 and 7.2.2, define the diffuse results as the limit kappa → ∞
// of a proper prior with covariance P_* + kappa P_inf, and the diffuse log-likelihood as
// lim [log L_kappa + (q/2) log kappa]. The proper-prior results come from the dense joint Gaussian
// of tests/joint_gaussian.h (no recursion shared with the library) at kappa = 1e7, where the
// limit is reached to O(1/kappa).

#include "statewise/diffuse.h"
#include "statewise/output_table.h"

#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "joint_gaussian.h"
#include "statewise/smoother.h"
#include "test_random.h"

using namespace statewise;

namespace {

constexpr double kKappa = 1e7;

// Local linear trend seen by two probes with correlated noise; the slope has a proper prior and the
// level is diffuse, or both are diffuse. Invented for the test.
StateSpaceModel trend_two_probes(bool slope_diffuse) {
  StateSpaceModel model;
  model.state_names = {"level", "slope"};
  model.observation_names = {"a", "b"};
  model.A.resize(2, 2);
  model.A << 1, 1, 0, 1;
  model.B = Eigen::MatrixXd::Zero(2, 0);
  model.C.resize(2, 2);
  model.C << 1, 0, 1, 0;
  model.Q = Eigen::Vector2d(0.3, 0.02).asDiagonal();
  model.R.resize(2, 2);
  model.R << 1.0, 0.4, 0.4, 2.0;
  model.initial_mean = Eigen::Vector2d(0.0, slope_diffuse ? 0.0 : 0.1);
  model.initial_covariance = Eigen::Vector2d(0.0, slope_diffuse ? 0.0 : 0.5).asDiagonal();
  model.diffuse = {true, slope_diffuse};
  validate_model(model, "test");
  return model;
}

// The same model with the diffuse states given variance kappa instead.
StateSpaceModel with_large_prior(StateSpaceModel model) {
  for (std::size_t i = 0; i < model.diffuse.size(); ++i)
    if (model.diffuse[i])
      model.initial_covariance(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(i)) = kKappa;
  model.diffuse.clear();
  return model;
}

ObservationSeries make_series(const std::vector<double>& values, int channels) {
  ObservationSeries series;
  series.channels = channels;
  series.values = values;
  for (std::size_t t = 0; t < values.size() / static_cast<std::size_t>(channels); ++t)
    series.lines.push_back(t + 2);
  return series;
}

std::vector<double> trend_data(int rows, std::uint64_t seed) {
  testing::DeterministicRandom random{seed};
  std::vector<double> values;
  double level = 5.0, slope = 0.2;
  for (int t = 0; t < rows; ++t) {
    values.push_back(level + random.normal());
    values.push_back(level + 1.4 * random.normal());
    level += slope + 0.5 * random.normal();
    slope += 0.1 * random.normal();
  }
  return values;
}

}  // namespace

TEST_CASE("diffuse log-likelihood is the limit of a large proper prior plus (q/2) log kappa") {
  for (const bool slope_diffuse : {false, true}) {
    const StateSpaceModel model = trend_two_probes(slope_diffuse);
    std::vector<double> values = trend_data(12, 11);
    values[1] = std::nan("");              // row 0 has one probe only
    values[4] = values[5] = std::nan("");  // row 2 has none
    values[13] = std::nan("");
    const ObservationSeries series = make_series(values, 2);
    const SeriesLikelihood exact = exact_log_likelihood(model, series);
    REQUIRE(exact.status == StepStatus::ok);
    CHECK(exact.diffuse_resolved);
    const auto reference = testing::joint_gaussian_reference(with_large_prior(model), values, {}, 12);
    const double q = slope_diffuse ? 2.0 : 1.0;
    const double limit = reference.log_likelihood + 0.5 * q * std::log(kKappa);
    INFO("slope diffuse " << slope_diffuse << ": exact " << exact.log_likelihood << ", limit " << limit);
    // O(1/kappa) from the limit, plus rounding of the dense determinant of entries near kappa.
    CHECK(exact.log_likelihood == doctest::Approx(limit).epsilon(1e-6));
  }
}

TEST_CASE("the streaming filter's diffuse phase gives the same log-likelihood as the series filter") {
  const StateSpaceModel model = trend_two_probes(true);
  const std::vector<double> values = trend_data(20, 5);
  KalmanFilter filter(model);
  InnovationRecord record = make_innovation_record(2);
  const Transition transition = model_transition(model);
  double total = 0.0;
  for (int t = 0; t < 20; ++t) {
    if (t > 0) filter.predict(transition, nullptr);
    REQUIRE(filter.update(&values[static_cast<std::size_t>(2 * t)], record) == StepStatus::ok);
    total += record.log_likelihood;
    // Level and slope of a trend seen by level probes: two rows resolve them.
    CHECK((filter.diffuse_covariance() != nullptr) == (t == 0));
    if (t == 0) CHECK(std::isnan(record.nis));
  }
  const SeriesLikelihood exact = exact_log_likelihood(model, make_series(values, 2));
  CHECK(total == doctest::Approx(exact.log_likelihood).epsilon(1e-12));
  CHECK(exact.diffuse_rows == 2);
}

TEST_CASE("exact diffuse smoother equals the limit of the conditional moments") {
  const StateSpaceModel model = trend_two_probes(true);
  const int rows = 10;
  std::vector<double> values = trend_data(rows, 23);
  values[3] = std::nan("");  // row 1 has probe a only
  const ObservationSeries series = make_series(values, 2);
  const ExactSmoothing smoothed = exact_smooth(model, series, true);
  REQUIRE(smoothed.likelihood.status == StepStatus::ok);
  const auto reference = testing::joint_gaussian_reference(with_large_prior(model), values, {}, rows);
  for (int t = 0; t < rows; ++t) {
    for (int i = 0; i < 2; ++i) {
      INFO("row " << t << " state " << i);
      CHECK(smoothed.track.mean(static_cast<std::size_t>(t))(i) ==
            doctest::Approx(reference.conditional_mean(2 * t + i)).epsilon(1e-6));
      for (int j = 0; j < 2; ++j) {
        CHECK(
            smoothed.track.covariance(static_cast<std::size_t>(t))(i, j) ==
            doctest::Approx(reference.conditional_covariance(2 * t + i, 2 * t + j)).epsilon(1e-6).scale(1.0));
        if (t > 0)
          CHECK(smoothed.lag_one[static_cast<std::size_t>(t)](i, j) ==
                doctest::Approx(reference.conditional_covariance(2 * t + i, 2 * (t - 1) + j))
                    .epsilon(1e-6)
                    .scale(1.0));
      }
    }
  }
}

TEST_CASE("without diffuse states the exact smoother is the RTS smoother, lag-one covariances included") {
  // First principles again: the joint Gaussian's conditional moments, now with a proper prior.
  StateSpaceModel model = trend_two_probes(false);
  model.diffuse.clear();
  model.initial_covariance = Eigen::Vector2d(4.0, 0.5).asDiagonal();
  const int rows = 9;
  std::vector<double> values = trend_data(rows, 3);
  values[6] = values[7] = std::nan("");
  const ExactSmoothing smoothed = exact_smooth(model, make_series(values, 2), true);
  REQUIRE(smoothed.likelihood.status == StepStatus::ok);
  const auto reference = testing::joint_gaussian_reference(model, values, {}, rows);
  CHECK(smoothed.likelihood.log_likelihood == doctest::Approx(reference.log_likelihood).epsilon(1e-11));
  for (int t = 0; t < rows; ++t)
    for (int i = 0; i < 2; ++i) {
      CHECK(smoothed.track.mean(static_cast<std::size_t>(t))(i) ==
            doctest::Approx(reference.conditional_mean(2 * t + i)).epsilon(1e-10));
      for (int j = 0; j < 2; ++j) {
        CHECK(smoothed.track.covariance(static_cast<std::size_t>(t))(i, j) ==
              doctest::Approx(reference.conditional_covariance(2 * t + i, 2 * t + j)).epsilon(1e-10));
        if (t > 0)
          CHECK(smoothed.lag_one[static_cast<std::size_t>(t)](i, j) ==
                doctest::Approx(reference.conditional_covariance(2 * t + i, 2 * (t - 1) + j)).epsilon(1e-10));
      }
    }
}

TEST_CASE("a diffuse state no channel sees is reported unresolved, not as an error") {
  StateSpaceModel model = trend_two_probes(true);
  model.C.setZero();
  model.C(0, 1) = 1.0;  // only the slope is seen... by one probe
  model.C(1, 1) = 1.0;
  model.A << 1, 0, 0, 1;  // and the level never reaches it
  const SeriesLikelihood exact = exact_log_likelihood(model, make_series(trend_data(6, 1), 2));
  CHECK(exact.status == StepStatus::ok);
  CHECK_FALSE(exact.diffuse_resolved);
  CHECK(exact.diffuse_rows == 6);
}

TEST_CASE("a diffuse state given a prior is refused, naming the state") {
  StateSpaceModel model = trend_two_probes(true);
  model.initial_covariance(1, 1) = 3.0;
  CHECK_THROWS_WITH(validate_model(model, "model.json"),
                    "model.json: initial: the diffuse state \"slope\" has a prior mean or covariance; a diffuse "
                    "state has none, so its entries must be zero");
}

TEST_CASE("filter output: a state still undetermined has standard deviation inf, its channel no innovation") {
  // A local linear trend seen by one channel: after the first value the level is known but the
  // slope is not (one value cannot tell a slope); after the second both are.
  StateSpaceModel model = trend_two_probes(true);
  model.observation_names = {"a"};
  model.C = model.C.topRows(1).eval();
  model.R = Eigen::MatrixXd::Constant(1, 1, 1.0);
  validate_model(model, "test");
  KalmanFilter filter(model);
  InnovationRecord record = make_innovation_record(1);
  const EstimateTableWriter writer(model, EstimateKind::filtered, TableFormat{});
  std::string rows;
  const double first = 3.0, second = 4.0;
  REQUIRE(filter.update(&first, record) == StepStatus::ok);
  REQUIRE(filter.diffuse_covariance() != nullptr);
  writer.append_row(rows, "", &first, filter.mean(), filter.covariance(), &record, nullptr, filter.diffuse_covariance());
  filter.predict(model_transition(model), nullptr);
  REQUIRE(filter.update(&second, record) == StepStatus::ok);
  CHECK(filter.diffuse_covariance() == nullptr);
  writer.append_row(rows, "", &second, filter.mean(), filter.covariance(), &record, nullptr, filter.diffuse_covariance());
  // Columns: level, level_sd, slope, slope_sd, a_est, a_sd, a_filled, a_imputed, a_innov, a_z.
  const std::string row0 = rows.substr(0, rows.find('\n'));
  CHECK(row0.rfind("3,1,0,inf,3,1,3,0,,") == 0);
  CHECK(rows.substr(rows.find('\n') + 1).find("inf") == std::string::npos);
}
