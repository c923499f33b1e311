// Structural checks of a model: rank tests, unseen directions, stability, the steady-state Riccati
// solution, and the coverage of a log.

#include "statewise/structure.h"

#include <doctest/doctest.h>

#include <cmath>
#include <string>
#include <vector>

using namespace statewise;

namespace {

StateSpaceModel make_model(const Eigen::MatrixXd& A, const Eigen::MatrixXd& C, const Eigen::MatrixXd& Q,
                           const Eigen::MatrixXd& R, std::vector<std::string> names = {}) {
  StateSpaceModel model;
  const Eigen::Index n = A.rows();
  if (names.empty())
    for (Eigen::Index i = 0; i < n; ++i) names.push_back("x" + std::to_string(i + 1));
  model.state_names = names;
  for (Eigen::Index c = 0; c < C.rows(); ++c) model.observation_names.push_back("y" + std::to_string(c + 1));
  model.A = A;
  model.B = Eigen::MatrixXd::Zero(n, 0);
  model.C = C;
  model.Q = Q;
  model.R = R;
  model.initial_mean = Eigen::VectorXd::Zero(n);
  model.initial_covariance = Eigen::MatrixXd::Identity(n, n);
  validate_model(model, "test");
  return model;
}

Eigen::MatrixXd matrix(Eigen::Index rows, Eigen::Index cols, std::initializer_list<double> values) {
  Eigen::MatrixXd m(rows, cols);
  auto it = values.begin();
  for (Eigen::Index i = 0; i < rows; ++i)
    for (Eigen::Index j = 0; j < cols; ++j) m(i, j) = *it++;
  return m;
}

// One-second falling body: A = [[1, 1], [0, 1]] with white-noise acceleration.
StateSpaceModel falling_body(const Eigen::MatrixXd& C) {
  return make_model(matrix(2, 2, {1, 1, 0, 1}), C, matrix(2, 2, {1.0 / 3, 0.5, 0.5, 1}),
                    Eigen::MatrixXd::Identity(C.rows(), C.rows()), {"position", "velocity"});
}

}  // namespace

TEST_CASE("falling body: observable from position, not from velocity") {
  // First principles (Kalman's rank condition): with C = [1, 0], [C; CA] = [[1, 0], [1, 1]] has rank 2;
  // with C = [0, 1], [C; CA] = [[0, 1], [0, 1]] has rank 1 and its null space is the position axis,
  // on which A acts as the eigenvalue 1 (a constant offset that never decays): not detectable.
  const StructureReport position = analyze_structure(falling_body(matrix(1, 2, {1, 0})), 0.0);
  CHECK(position.observability.rank == 2);
  CHECK(position.observability.directions.empty());
  CHECK(position.detectable);
  CHECK(position.can_work);
  CHECK(
      position.verdict ==
      "The model can work: the channels see every direction of the state, and the filter settles to a steady "
      "state.");
  const StructureReport velocity = analyze_structure(falling_body(matrix(1, 2, {0, 1})), 0.0);
  CHECK(velocity.observability.rank == 1);
  REQUIRE(velocity.observability.directions.size() == 1);
  CHECK(velocity.observability.directions[0].description == "position");
  CHECK(velocity.observability.directions[0].vector == Eigen::Vector2d(1, 0));
  REQUIRE(velocity.observability.modes.size() == 1);
  CHECK(velocity.observability.modes[0].real() == doctest::Approx(1.0).epsilon(1e-12));
  CHECK(!velocity.detectable);
  CHECK(!velocity.can_work);
  CHECK(velocity.verdict ==
        "The model cannot work: the direction \"position\" cannot be seen from the channels and does not "
        "decay on "
        "its own (eigenvalue 1 of A there), so its uncertainty never shrinks.");
  CHECK(velocity.riccati.status == RiccatiStatus::no_solution);
  CHECK(velocity.stability == Stability::marginal);
}

TEST_CASE("the continuous falling body has the same unseen direction") {
  // First principles: with F = [[0, 1], [0, 0]] and C = [0, 1], [C; CF] = [[0, 1], [0, 0]] has rank 1;
  // F is 0 on the position axis, on the imaginary axis: not detectable.
  StateSpaceModel model = falling_body(matrix(1, 2, {0, 1}));
  model.A << 0, 1, 0, 0;
  model.Q << 0, 0, 0, 1;
  model.domain = TimeDomain::continuous;
  model.time_column = "time";
  const StructureReport report = analyze_structure(model, 0.5);
  CHECK(report.observability.rank == 1);
  CHECK(report.observability.directions[0].description == "position");
  CHECK(!report.can_work);
  CHECK(report.riccati_step == 0.5);
}

TEST_CASE("unseen directions that decay on their own leave the model workable") {
  // First principles: A = diag(1, 0.5), C = [1, 0]: x2 is unseen but |0.5| < 1, so (A, C) is
  // detectable and the Riccati solution is stabilizing.
  const StructureReport report =
      analyze_structure(make_model(matrix(2, 2, {1, 0, 0, 0.5}), matrix(1, 2, {1, 0}),
                                   Eigen::MatrixXd::Identity(2, 2), Eigen::MatrixXd::Identity(1, 1)),
                        0.0);
  CHECK(report.observability.rank == 1);
  CHECK(report.observability.directions[0].description == "x2");
  CHECK(report.detectable);
  CHECK(report.can_work);
  CHECK(report.riccati.status == RiccatiStatus::stabilizing);
  CHECK(report.verdict ==
        "The model can work: the directions the channels cannot see (\"x2\") decay on their own, and the "
        "filter "
        "settles to a steady state.");
  // Steady state of the unseen part: p = 0.25 p + 1, so p = 4/3 (first principles).
  CHECK(report.riccati.predicted_covariance(1, 1) == doctest::Approx(4.0 / 3.0).epsilon(1e-13));
}

TEST_CASE("a direction mixing states is written in the state names") {
  // First principles: two random walks seen only through their sum, C = [1, 1]: the difference
  // (1, -1)/sqrt(2) is unseen and, with eigenvalue 1, not detectable.
  const StructureReport report = analyze_structure(
      make_model(Eigen::MatrixXd::Identity(2, 2), matrix(1, 2, {1, 1}), Eigen::MatrixXd::Identity(2, 2),
                 Eigen::MatrixXd::Identity(1, 1), {"level", "offset"}),
      0.0);
  REQUIRE(report.observability.directions.size() == 1);
  CHECK(report.observability.directions[0].description == "0.7071*level - 0.7071*offset");
  CHECK(!report.can_work);
}

TEST_CASE("a nearly unseen direction gives a condition-number warning") {
  // First principles: C = [1, 1e-9] with A = diag(1, 0.5) gives [C; CA] = [[1, 1e-9], [1, 5e-10]], whose
  // smallest singular value is about 3.5e-10: full rank, condition number about 4e9 > 1e8.
  const StructureReport report =
      analyze_structure(make_model(matrix(2, 2, {1, 0, 0, 0.5}), matrix(1, 2, {1, 1e-9}),
                                   Eigen::MatrixXd::Identity(2, 2), Eigen::MatrixXd::Identity(1, 1)),
                        0.0);
  CHECK(report.observability.rank == 2);
  CHECK(report.observability.condition_number > 1e9);
  CHECK(report.observability.condition_number < 1e10);
  REQUIRE(!report.warnings.empty());
  CHECK(report.warnings[0].rfind("the observability matrix is nearly singular (condition number 4", 0) == 0);
}

TEST_CASE("local level: the Riccati solution matches the closed form") {
  // Harvey (1989), Forecasting, Structural Time Series Models and the Kalman Filter, section 3.3:
  // with q = Q/R the steady-state predicted variance is P = R (q + sqrt(q^2 + 4q)) / 2.
  for (const double q : {1e-6, 0.01, 0.5, 1.0, 4.0, 100.0, 1e6}) {
    const double R = 2.0;
    const RiccatiSolution solution =
        solve_filter_riccati(Eigen::MatrixXd::Identity(1, 1), Eigen::MatrixXd::Identity(1, 1),
                             Eigen::MatrixXd::Constant(1, 1, q * R), Eigen::MatrixXd::Constant(1, 1, R));
    const double expected = R * (q + std::sqrt(q * q + 4.0 * q)) / 2.0;
    INFO("q = " << q << ": " << solution.predicted_covariance(0, 0) << " after " << solution.doublings
                << " doublings");
    REQUIRE(solution.status == RiccatiStatus::stabilizing);
    CHECK(solution.predicted_covariance(0, 0) == doctest::Approx(expected).epsilon(1e-12));
    // Gain K = P / (P + R) and filtered variance P R / (P + R) (first principles).
    CHECK(solution.gain(0, 0) == doctest::Approx(expected / (expected + R)).epsilon(1e-12));
    CHECK(solution.filtered_covariance(0, 0) ==
          doctest::Approx(expected * R / (expected + R)).epsilon(1e-12));
  }
}

TEST_CASE("the Riccati solution matches scipy's solve_discrete_are") {
  // Reference values: scipy 1.10.1 (numpy 1.24.2), scipy.linalg.solve_discrete_are(A.T, C.T, Q, R),
  // which solves X = A X A' - A X C' (C X C' + R)^-1 C X A' + Q.
  SUBCASE("three states, two channels with correlated noise") {
    const Eigen::MatrixXd A = matrix(3, 3, {0.95, 0.1, 0.0, -0.2, 0.9, 0.0, 0.0, 0.0, 1.0});
    const Eigen::MatrixXd C = matrix(2, 3, {1.0, 0.0, 1.0, 0.0, 1.0, 0.0});
    const Eigen::MatrixXd Q = Eigen::Vector3d(0.01, 0.04, 0.001).asDiagonal();
    const Eigen::MatrixXd R = matrix(2, 2, {0.2, 0.05, 0.05, 0.3});
    const RiccatiSolution solution = solve_filter_riccati(A, C, Q, R);
    REQUIRE(solution.status == RiccatiStatus::stabilizing);
    const Eigen::MatrixXd expected =
        matrix(3, 3,
               {0.05374737063248862, -0.0032582109609591665, -0.016632096017526996, -0.0032582109609591665,
                0.10549403370996274, 0.011970292819604558, -0.016632096017526996, 0.011970292819604558,
                0.030897416567659403});
    INFO(solution.predicted_covariance);
    CHECK((solution.predicted_covariance - expected).cwiseAbs().maxCoeff() < 1e-13);
    CHECK(solution.relative_residual < 1e-13);
  }
  SUBCASE("an unstable but detectable model") {
    const RiccatiSolution solution =
        solve_filter_riccati(matrix(2, 2, {1.1, 0.3, 0.0, 0.7}), matrix(1, 2, {1, 0}),
                             Eigen::Vector2d(0.2, 0.1).asDiagonal(), Eigen::MatrixXd::Constant(1, 1, 0.5));
    REQUIRE(solution.status == RiccatiStatus::stabilizing);
    const Eigen::MatrixXd expected =
        matrix(2, 2, {0.554730283926188, 0.06244934952117745, 0.06244934952117745, 0.19252588033247234});
    CHECK((solution.predicted_covariance - expected).cwiseAbs().maxCoeff() < 1e-13);
    CHECK(solution.spectral_radius < 1.0);
  }
}

TEST_CASE("a noise-free constant is learned ever more precisely: not stabilizing, but workable") {
  // First principles: x_t = x_{t-1} (Q = 0), y = x + v. The Riccati solution is P = 0 with gain 0, so
  // A (I - K C) = 1: not stabilizing, yet the filter's variance P_t = 1 / (1/P_0 + t/R) shrinks to 0.
  const StructureReport report =
      analyze_structure(make_model(Eigen::MatrixXd::Identity(1, 1), Eigen::MatrixXd::Identity(1, 1),
                                   Eigen::MatrixXd::Zero(1, 1), Eigen::MatrixXd::Identity(1, 1), {"offset"}),
                        0.0);
  CHECK(report.riccati.status == RiccatiStatus::not_stabilizing);
  CHECK(report.riccati.predicted_covariance(0, 0) == 0.0);
  CHECK(report.can_work);
  CHECK(!report.stabilizable);
  CHECK(report.noise_controllability.directions[0].description == "offset");
  REQUIRE(report.warnings.size() == 1);
  CHECK(report.warnings[0] ==
        "the steady-state solution is not stabilizing (the error dynamics A(I - KC) have spectral radius 1): "
        "directions without process noise sit on the stability boundary (\"offset\"), so the filter keeps "
        "learning them ever more precisely instead of settling; expected for constant or noise-free states");
}

TEST_CASE("an unstable direction without process noise still gets the stabilizing solution") {
  // First principles: x_t = a x_{t-1} with a = 1.5 and Q = 0, y = x + v. The scalar DARE
  // P = a^2 P R / (P + R) has the roots 0 (not stabilizing: the gain is 0 and the error grows by a) and
  // R (a^2 - 1), the stabilizing one, which the filter reaches from any positive start. Regression
  // test: the doubling started from Q = 0 stops at P = 0.
  const double a = 1.5, R = 0.4;
  const RiccatiSolution solution =
      solve_filter_riccati(Eigen::MatrixXd::Constant(1, 1, a), Eigen::MatrixXd::Identity(1, 1),
                           Eigen::MatrixXd::Zero(1, 1), Eigen::MatrixXd::Constant(1, 1, R));
  CHECK(solution.status == RiccatiStatus::stabilizing);
  CHECK(solution.predicted_covariance(0, 0) == doctest::Approx(R * (a * a - 1)).epsilon(1e-12));
  CHECK(solution.spectral_radius == doctest::Approx(1 / a).epsilon(1e-12));
}

TEST_CASE("stability verdicts of eigenvalues") {
  // Definitions: discrete |λ| < 1 stable; continuous Re λ < 0; on the boundary within 1e-6.
  using C = std::complex<double>;
  CHECK(classify({C(0.5, 0.5)}, TimeDomain::discrete, 1.0) == Stability::stable);
  CHECK(classify({C(0.6, 0.8)}, TimeDomain::discrete, 1.0) == Stability::marginal);
  CHECK(classify({C(1.01, 0)}, TimeDomain::discrete, 1.0) == Stability::unstable);
  CHECK(classify({C(-0.1, 3)}, TimeDomain::continuous, 3.0) == Stability::stable);
  CHECK(classify({C(0, 3)}, TimeDomain::continuous, 3.0) == Stability::marginal);
  CHECK(classify({C(0.01, 0)}, TimeDomain::continuous, 3.0) == Stability::unstable);
  CHECK(classify({}, TimeDomain::discrete, 0.0) == Stability::stable);
}

TEST_CASE("log coverage: missing fraction, longest run and longest gap per channel") {
  // First principles, counted by hand: channel y1 is missing on rows 3-5 (lines 4-6), so its longest
  // run is 3 rows and its longest time without a value is from t = 20 (line 3) to t = 90 (line 7);
  // y2 has no value at all, so its gap is the whole span.
  StateSpaceModel model = make_model(Eigen::MatrixXd::Identity(1, 1), matrix(2, 1, {1, 1}),
                                     Eigen::MatrixXd::Identity(1, 1), Eigen::MatrixXd::Identity(2, 2));
  model.time_column = "time";
  CoverageAccumulator accumulator(model);
  const double nan = std::nan("");
  const std::vector<double> times = {0, 10, 20, 30, 40, 80, 90};
  const std::vector<double> y1 = {1, 2, 3, nan, nan, nan, 7};
  for (std::size_t i = 0; i < times.size(); ++i) {
    TimelineRow row;
    row.row.values = {y1[i], nan};
    row.row.line = i + 2;
    row.time = times[i];
    row.gap.seconds = i == 0 ? 0.0 : times[i] - times[i - 1];
    accumulator.add(row);
  }
  const LogCoverage coverage = accumulator.result();
  CHECK(coverage.rows == 7);
  CHECK(coverage.span_seconds == 90.0);
  CHECK(coverage.median_gap_seconds == 10.0);
  CHECK(coverage.largest_gap_seconds == 40.0);
  CHECK(coverage.largest_gap_line == 7);
  const ChannelCoverage& a = coverage.channels[0];
  CHECK(a.missing == 3);
  CHECK(a.missing_fraction == doctest::Approx(3.0 / 7.0));
  CHECK(a.longest_missing_run == 3);
  CHECK(a.longest_run_first_line == 5);
  CHECK(a.longest_gap_seconds == 70.0);
  CHECK(a.longest_gap_from_line == 4);
  CHECK(a.longest_gap_to_line == 8);
  const ChannelCoverage& b = coverage.channels[1];
  CHECK(b.missing_fraction == 1.0);
  CHECK(b.longest_missing_run == 7);
  CHECK(b.longest_gap_seconds == 90.0);
  CHECK(b.longest_gap_from_line == 2);
  CHECK(b.longest_gap_to_line == 8);
}
