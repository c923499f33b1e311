// Checks of statewise fit (statewise/fit.h): published maximum-likelihood estimates, recovery of
// known parameters from simulated data, and properties of the EM algorithm.

#include "statewise/fit.h"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "statewise/csv.h"
#include "statewise/estimation_spec.h"
#include "statewise/series.h"
#include "test_random.h"

using namespace statewise;

namespace {

const char* kNileModel = R"({
  "observations": ["flow"],
  "time": {"column": "year"},
  "components": [{"type": "level", "variance": "estimate"}],
  "R": "estimate"
})";

ObservationSeries read_file(const std::string& path, const StateSpaceModel& model) {
  CsvReader reader = CsvReader::open(path, CsvOptions{});
  ObservationStream stream(reader, model);
  return read_series(stream, model);
}

}  // namespace

TEST_CASE("Nile local level: maximum-likelihood variances of Durbin and Koopman (2012), section 2.10") {
  // Durbin and Koopman (2012), section 2.10, fit the local level model with a diffuse initial level
  // to the Nile flow (tests/data/README.md) and report sigma2_eps ≈ 15099 and sigma2_eta ≈ 1469.1
  // (values recalled from the book; asserted within 1%). Both estimators must reach them.
  const ModelTemplate model = parse_model_template(kNileModel, "nile.json");
  const ObservationSeries series = read_file(STATEWISE_TEST_DATA_DIR "/nile.csv", model.model);
  REQUIRE(series.rows() == 100);
  for (const FitMethod method : {FitMethod::em, FitMethod::mle, FitMethod::automatic}) {
    FitOptions options;
    options.method = method;
    options.em_steps = 0;
    const FitResult fit = fit_model(model, series, options);
    INFO("method " << static_cast<int>(method) << ": " << fit.message << ", em " << fit.em_iterations
                   << ", mle " << fit.mle_iterations << ", log L " << fit.log_likelihood);
    REQUIRE(fit.estimates.size() == 2);
    // Parameters in file order: the level variance (components[0].variance), then R.
    INFO("level variance " << fit.estimates[0].value << " ± " << fit.estimates[0].standard_error);
    INFO("noise variance " << fit.estimates[1].value << " ± " << fit.estimates[1].standard_error);
    CHECK(fit.status == FitStatus::converged);
    CHECK(fit.estimates[0].name == "components[0].variance");
    CHECK(fit.estimates[1].name == "R");
    CHECK(fit.estimates[0].value == doctest::Approx(1469.1).epsilon(0.01));
    CHECK(fit.estimates[1].value == doctest::Approx(15099).epsilon(0.01));
    CHECK(fit.diffuse_states == 1);
    CHECK(std::isfinite(fit.estimates[0].standard_error));
  }
}

TEST_CASE("Nile: maximum, log-likelihood and standard errors against an independent computation") {
  // Reference: the diffuse local level log-likelihood written out directly in Python and maximized
  // with scipy 1.10.1 / numpy 1.24.2 (Debian):
  //   scipy.optimize.minimize(-loglik(exp(th)), method="Nelder-Mead", xatol=1e-12, fatol=1e-14)
  // gives q = 1469.1765247913158, r = 15098.51852520084, log L_d = -633.4645636362452; the standard
  // errors sqrt(diag(inv(-H))), H the central-difference Hessian in (q, r) with steps 0.125% of the
  // values, are 1280.37069176294 and 3145.5299380269307 (halving the step changes them by 1e-5).
  const ModelTemplate model = parse_model_template(kNileModel, "nile.json");
  const ObservationSeries series = read_file(STATEWISE_TEST_DATA_DIR "/nile.csv", model.model);
  FitOptions options;
  options.method = FitMethod::mle;
  options.em_steps = 0;
  const FitResult fit = fit_model(model, series, options);
  REQUIRE(fit.status == FitStatus::converged);
  CHECK(fit.log_likelihood == doctest::Approx(-633.4645636362452).epsilon(1e-9));
  // The likelihood is flat near its top: a 1e-9 relative change in log L moves q by about 1e-4.
  CHECK(fit.estimates[0].value == doctest::Approx(1469.1765247913158).epsilon(2e-4));
  CHECK(fit.estimates[1].value == doctest::Approx(15098.51852520084).epsilon(2e-4));
  // Both are numerical second differences: agree to a few parts in 1e4 at best.
  CHECK(fit.estimates[0].standard_error == doctest::Approx(1280.37069176294).epsilon(2e-3));
  CHECK(fit.estimates[1].standard_error == doctest::Approx(3145.5299380269307).epsilon(2e-3));
}

TEST_CASE("Nile: a far-off starting value still reaches the maximum") {
  // The same published values as above (Durbin and Koopman 2012, section 2.10), starting a
  // million times too high and a million times too low.
  const std::string text = R"({
    "observations": ["flow"],
    "components": [{"type": "level", "variance": {"estimate": true, "start": 1e9}}],
    "R": {"estimate": true, "start": 0.01}
  })";
  const ModelTemplate model = parse_model_template(text, "nile.json");
  const ObservationSeries series = read_file(STATEWISE_TEST_DATA_DIR "/nile.csv", model.model);
  const FitResult fit = fit_model(model, series, FitOptions{});
  CHECK(fit.status == FitStatus::converged);
  CHECK(fit.estimates[0].value == doctest::Approx(1469.1).epsilon(0.01));
  CHECK(fit.estimates[1].value == doctest::Approx(15099).epsilon(0.01));
}

namespace {

// Local linear trend (Durbin and Koopman 2012, section 3.2.1) seen by two probes with independent
// noise; the parameters to recover. Invented for the test.
constexpr double kLevelVariance = 0.5, kSlopeVariance = 0.1, kNoiseA = 1.0, kNoiseB = 2.0;

const char* kTrendModel = R"({
  "observations": ["a", "b"],
  "components": [{"type": "trend", "level_variance": "estimate", "slope_variance": "estimate"}],
  "R": {"estimate": "diagonal"}
})";

// Simulates the model with a deterministic generator (tests/test_random.h), each value missing
// with probability 0.2.
ObservationSeries simulate_trend(int rows, std::uint64_t seed) {
  testing::DeterministicRandom random{seed};
  ObservationSeries series;
  series.channels = 2;
  double level = 10.0, slope = 0.0;
  for (int t = 0; t < rows; ++t) {
    const double a = level + std::sqrt(kNoiseA) * random.normal();
    const double b = level + std::sqrt(kNoiseB) * random.normal();
    series.values.push_back(random.uniform() < 0.2 ? std::nan("") : a);
    series.values.push_back(random.uniform() < 0.2 ? std::nan("") : b);
    series.lines.push_back(static_cast<std::size_t>(t) + 2);
    level += slope + std::sqrt(kLevelVariance) * random.normal();
    slope += std::sqrt(kSlopeVariance) * random.normal();
  }
  return series;
}

}  // namespace

TEST_CASE("simulated local linear trend: estimates scatter around the truth within their standard errors") {
  // First principles: at the maximum, z = (estimate - truth) / standard error is roughly standard
  // normal when the standard errors come from the observed information (Durbin and Koopman 2012,
  // section 7.3.1). Over 5 simulated logs × 4 parameters: every |z| below 4, and the median |z|
  // (0.674 for a standard normal; about [0.35, 1.1] for 20 draws) in that range, which standard
  // errors off by a factor of two would leave. The median, not the mean of z², because variance
  // estimates have a heavy tail.
  const ModelTemplate model = parse_model_template(kTrendModel, "trend.json");
  const double truth[4] = {kLevelVariance, kSlopeVariance, kNoiseA, kNoiseB};
  std::vector<double> absolute_z;
  for (std::uint64_t seed = 1; seed <= 5; ++seed) {
    const ObservationSeries series = simulate_trend(400, seed * 7919);
    const FitResult fit = fit_model(model, series, FitOptions{});
    REQUIRE(fit.status == FitStatus::converged);
    REQUIRE(fit.estimates.size() == 4);
    for (int p = 0; p < 4; ++p) {
      const ParameterEstimate& e = fit.estimates[static_cast<std::size_t>(p)];
      INFO("seed " << seed << " " << e.name << " = " << e.value << " ± " << e.standard_error << ", truth "
                   << truth[p]);
      REQUIRE(std::isfinite(e.standard_error));
      const double z = (e.value - truth[p]) / e.standard_error;
      CHECK(std::abs(z) < 4.0);
      absolute_z.push_back(std::abs(z));
    }
  }
  std::sort(absolute_z.begin(), absolute_z.end());
  const double median = 0.5 * (absolute_z[9] + absolute_z[10]);
  INFO("median |z| " << median);
  CHECK(median > 0.35);
  CHECK(median < 1.1);
}

TEST_CASE("EM never decreases the log-likelihood") {
  // A property of the algorithm (Dempster, Laird and Rubin 1977; Meng and Rubin 1993 for the
  // conditional M-steps used here): checked on a model that exercises every EM update with missing
  // values: a level, an AR(1) with its coefficient, a whole 2×2 R with correlated noise, and a
  // loading in C.
  const std::string text = R"({
    "observations": ["a", "b"],
    "components": [
      {"type": "level", "variance": "estimate"},
      {"type": "ar", "coefficients": ["estimate"], "variance": "estimate", "channels": ["b"]}
    ],
    "R": "estimate"
  })";
  const ModelTemplate model = parse_model_template(text, "em.json");
  testing::DeterministicRandom random{99};
  ObservationSeries series;
  series.channels = 2;
  double level = 0.0, ar = 0.0;
  for (int t = 0; t < 200; ++t) {
    const double common = random.normal();
    series.values.push_back(random.uniform() < 0.15 ? std::nan("") : level + common + 0.5 * random.normal());
    series.values.push_back(random.uniform() < 0.15 ? std::nan("")
                                                    : level + ar + 0.6 * common + random.normal());
    series.lines.push_back(static_cast<std::size_t>(t) + 2);
    level += 0.3 * random.normal();
    ar = 0.7 * ar + random.normal();
  }
  FitOptions options;
  options.method = FitMethod::em;
  options.max_em_iterations = 300;
  options.keep_em_trace = true;
  const FitResult em = fit_model(model, series, options);
  REQUIRE(em.em_trace.size() > 20);
  for (std::size_t i = 1; i < em.em_trace.size(); ++i) {
    INFO("step " << i << ": " << em.em_trace[i - 1] << " -> " << em.em_trace[i]);
    CHECK(em.em_trace[i] >= em.em_trace[i - 1] - 1e-9 * std::abs(em.em_trace[i - 1]));
  }
  CHECK(em.em_trace.back() - em.em_trace.front() > 1.0);  // it did climb
  // And it climbs to the maximum L-BFGS-B finds.
  options.method = FitMethod::mle;
  options.em_steps = 0;
  const FitResult mle = fit_model(model, series, options);
  INFO("EM " << em.log_likelihood << " (" << em.message << "), L-BFGS-B " << mle.log_likelihood);
  CHECK(em.log_likelihood == doctest::Approx(mle.log_likelihood).epsilon(1e-5));
}

TEST_CASE("a fit stopped by its iteration limit says so and returns its best model") {
  const ModelTemplate model = parse_model_template(kTrendModel, "trend.json");
  FitOptions options;
  options.method = FitMethod::em;
  options.max_em_iterations = 2;
  const FitResult fit = fit_model(model, simulate_trend(100, 3), options);
  CHECK(fit.status == FitStatus::iteration_limit);
  CHECK(fit.em_iterations == 2);
  CHECK(std::isfinite(fit.log_likelihood));
  CHECK(fit.model.Q.allFinite());
  CHECK_FALSE(fit.warnings.empty());
}

TEST_CASE("a flat likelihood gives no standard errors and says why") {
  // Two random walks seen only through their sum: only the sum of their variances is determined.
  const std::string text = R"({
    "observations": ["y"],
    "components": [{"type": "level", "name": "one", "variance": "estimate"},
                   {"type": "level", "name": "two", "variance": "estimate"}],
    "R": "estimate"
  })";
  const ModelTemplate model = parse_model_template(text, "flat.json");
  testing::DeterministicRandom random{5};
  ObservationSeries series;
  series.channels = 1;
  double level = 0.0;
  for (int t = 0; t < 150; ++t) {
    series.values.push_back(level + random.normal());
    series.lines.push_back(static_cast<std::size_t>(t) + 2);
    level += random.normal();
  }
  FitOptions options;
  options.em_steps = 0;
  const FitResult fit = fit_model(model, series, options);
  CHECK(std::isfinite(fit.log_likelihood));
  bool said = false;
  for (const auto& warning : fit.warnings)
    said = said || warning.find("not determined by the data") != std::string::npos;
  CHECK(said);
  for (const auto& e : fit.estimates) CHECK(std::isfinite(e.value));
}

TEST_CASE("EM is refused, with the reason, where it has no closed-form update") {
  // A regression coefficient sits in a state without process noise (docs/algorithms.md).
  const std::string text = R"({
    "observations": ["y"], "inputs": ["u"],
    "components": [{"type": "level", "variance": 1}, {"type": "regression", "coefficients": ["estimate"]}],
    "R": 1
  })";
  const ModelTemplate model = parse_model_template(text, "reg.json");
  CHECK(em_unavailable_reason(model) ==
        "components[1].coefficients[0]: the state row 1 has no Q noise, so EM cannot update its entries");
}

TEST_CASE("EM's update of A and B entries reaches the maximum L-BFGS finds") {
  // Both maximize the same exact log-likelihood (first principles): EM through its constrained
  // regression of x_t on (x_{t-1}, u_{t-1}), L-BFGS directly. An AR(1) state driven by an input.
  const std::string text = R"({"observations": ["y"], "inputs": ["u"], "states": ["x"],
    "A": "estimate", "B": "estimate", "C": 1, "Q": "estimate", "R": "estimate",
    "initial": {"mean": 0, "covariance": 10}})";
  const ModelTemplate model = parse_model_template(text, "ab.json");
  testing::DeterministicRandom random{17};
  ObservationSeries series;
  series.channels = 1;
  series.input_count = 1;
  double x = 0.0;
  for (int t = 0; t < 300; ++t) {
    const double u = random.uniform() < 0.5 ? 1.0 : 0.0;
    series.values.push_back(x + 0.5 * random.normal());
    series.inputs.push_back(u);
    series.lines.push_back(static_cast<std::size_t>(t) + 2);
    x = 0.8 * x + 1.5 * u + random.normal();
  }
  FitOptions options;
  options.method = FitMethod::em;
  const FitResult em = fit_model(model, series, options);
  options.method = FitMethod::mle;
  options.em_steps = 0;
  const FitResult mle = fit_model(model, series, options);
  REQUIRE(em.status == FitStatus::converged);
  REQUIRE(mle.status == FitStatus::converged);
  CHECK(em.log_likelihood == doctest::Approx(mle.log_likelihood).epsilon(1e-7));
  for (std::size_t p = 0; p < 4; ++p) {
    INFO(em.estimates[p].name << ": EM " << em.estimates[p].value << ", L-BFGS " << mle.estimates[p].value);
    CHECK(em.estimates[p].value == doctest::Approx(mle.estimates[p].value).epsilon(2e-3));
  }
}
