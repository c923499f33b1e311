// Checks of the square-root (array) Kalman filter: against the plain filter on well-conditioned
// models, against the joint Gaussian computed directly, and on an ill-conditioned measurement where
// the plain form breaks down, against a reference computed in 113-bit (quadruple) precision.

#include "statewise/square_root_filter.h"

#include <doctest/doctest.h>

#include <Eigen/Eigenvalues>
#include <cmath>
#include <vector>

#include "joint_gaussian.h"
#include "simulation.h"
#include "test_models.h"

using namespace statewise;
using testing::ill_conditioned_model;
using testing::two_channel_model;

namespace {

double max_abs(const Eigen::MatrixXd& m) { return m.cwiseAbs().maxCoeff(); }

// ---- 113-bit reference arithmetic for the ill-conditioned case -------------------------------------
// GCC's __float128 (IEEE binary128, 113-bit significand, epsilon 1.9e-34), used only in this test.
__extension__ typedef __float128 Quad;

struct QuadMatrix {
  int rows = 0, cols = 0;
  std::vector<Quad> data;
  QuadMatrix(int r, int c) : rows(r), cols(c), data(static_cast<std::size_t>(r * c), Quad(0)) {}
  Quad& operator()(int i, int j) { return data[static_cast<std::size_t>(i * cols + j)]; }
  Quad operator()(int i, int j) const { return data[static_cast<std::size_t>(i * cols + j)]; }
};

QuadMatrix multiply(const QuadMatrix& a, const QuadMatrix& b) {
  QuadMatrix c(a.rows, b.cols);
  for (int i = 0; i < a.rows; ++i)
    for (int j = 0; j < b.cols; ++j)
      for (int k = 0; k < a.cols; ++k) c(i, j) += a(i, k) * b(k, j);
  return c;
}

QuadMatrix transpose(const QuadMatrix& a) {
  QuadMatrix t(a.cols, a.rows);
  for (int i = 0; i < a.rows; ++i)
    for (int j = 0; j < a.cols; ++j) t(j, i) = a(i, j);
  return t;
}

// The conventional Kalman update with two measurements, in quad precision, from its definition:
// S = H P H' + R, K = P H' S^-1 (2×2 inverse in closed form), x += K (y - H x), P -= K H P.
void quad_update(QuadMatrix& x, QuadMatrix& P, const QuadMatrix& H, Quad noise_variance, const Quad y[2]) {
  const QuadMatrix PHt = multiply(P, transpose(H));
  QuadMatrix S = multiply(H, PHt);
  S(0, 0) += noise_variance;
  S(1, 1) += noise_variance;
  const Quad det = S(0, 0) * S(1, 1) - S(0, 1) * S(1, 0);
  QuadMatrix inverse(2, 2);
  inverse(0, 0) = S(1, 1) / det;
  inverse(1, 1) = S(0, 0) / det;
  inverse(0, 1) = -S(0, 1) / det;
  inverse(1, 0) = -S(1, 0) / det;
  const QuadMatrix K = multiply(PHt, inverse);
  QuadMatrix v(2, 1);
  for (int a = 0; a < 2; ++a) {
    v(a, 0) = y[a];
    for (int i = 0; i < 3; ++i) v(a, 0) -= H(a, i) * x(i, 0);
  }
  const QuadMatrix Kv = multiply(K, v);
  for (int i = 0; i < 3; ++i) x(i, 0) += Kv(i, 0);
  const QuadMatrix KHP = multiply(K, multiply(H, P));
  for (int i = 0; i < 3; ++i)
    for (int j = 0; j < 3; ++j) P(i, j) -= KHP(i, j);
}

}  // namespace

TEST_CASE("square-root filter agrees with the plain filter to 1e-9 on a well-conditioned model") {
  // Reference: the plain Joseph-form filter (filter.h), itself checked against the joint Gaussian and
  // scipy's Riccati solution in filter_test.cpp. Both are exact algorithms for the same moments; on
  // this model (condition numbers of P and S below 100) their rounding differs by a few 1e-15, so
  // 1e-9 is the agreement bound with a wide margin.
  const StateSpaceModel model = two_channel_model();
  KalmanFilter plain(model);
  SquareRootKalmanFilter root(model);
  const Transition transition = model_transition(model);
  InnovationRecord plain_record = make_innovation_record(2), root_record = make_innovation_record(2);
  testing::TestRandom random{11};
  for (int t = 0; t < 1000; ++t) {
    const double u = random.normal();
    if (t > 0) {
      plain.predict(transition, &u);
      root.predict(transition, &u);
    }
    double y[2] = {random.normal() * 2.0, random.normal()};
    if (t % 7 == 3) y[0] = std::nan("");
    if (t % 11 == 5) y[1] = std::nan("");
    REQUIRE(plain.update(y, plain_record) == StepStatus::ok);
    REQUIRE(root.update(y, root_record) == StepStatus::ok);
    INFO("row " << t);
    REQUIRE(max_abs(root.mean() - plain.mean()) <= 1e-9 * std::max(1.0, max_abs(plain.mean())));
    REQUIRE(max_abs(root.covariance() - plain.covariance()) <= 1e-9 * max_abs(plain.covariance()));
    REQUIRE(root_record.observed == plain_record.observed);
    if (plain_record.observed > 0) {
      CHECK(root_record.nis == doctest::Approx(plain_record.nis).epsilon(1e-9));
      CHECK(root_record.log_likelihood == doctest::Approx(plain_record.log_likelihood).epsilon(1e-9));
      for (int c = 0; c < 2; ++c) {
        if (std::isnan(y[c])) {
          CHECK(std::isnan(root_record.innovation(c)));
          continue;
        }
        CHECK(root_record.innovation(c) ==
              doctest::Approx(plain_record.innovation(c)).epsilon(1e-9).scale(1.0));
        CHECK(root_record.innovation_sd(c) == doctest::Approx(plain_record.innovation_sd(c)).epsilon(1e-9));
      }
    }
  }
}

TEST_CASE("square-root filter moments equal the conditional moments of the joint Gaussian") {
  // First principles (tests/joint_gaussian.h): E[x_t | y_0..y_t] and its covariance by conditioning
  // the stacked joint Gaussian directly; also the log-likelihood of all observed values.
  const StateSpaceModel model = two_channel_model();
  const int rows = 8;
  testing::TestRandom random{5};
  std::vector<double> values(static_cast<std::size_t>(rows * 2)), inputs(static_cast<std::size_t>(rows));
  for (auto& v : values) v = random.normal();
  for (auto& u : inputs) u = random.normal();
  values[3] = std::nan("");
  values[8] = values[9] = std::nan("");
  SquareRootKalmanFilter filter(model);
  const Transition transition = model_transition(model);
  InnovationRecord record = make_innovation_record(2);
  double log_likelihood = 0.0;
  for (int t = 0; t < rows; ++t) {
    if (t > 0) filter.predict(transition, &inputs[static_cast<std::size_t>(t - 1)]);
    REQUIRE(filter.update(&values[static_cast<std::size_t>(2 * t)], record) == StepStatus::ok);
    log_likelihood += record.log_likelihood;
    const auto reference = testing::joint_gaussian_reference(model, values, inputs, t + 1);
    for (int i = 0; i < 2; ++i) {
      CHECK(filter.mean()(i) == doctest::Approx(reference.conditional_mean(2 * t + i)).epsilon(1e-10));
      for (int j = 0; j < 2; ++j)
        CHECK(filter.covariance()(i, j) ==
              doctest::Approx(reference.conditional_covariance(2 * t + i, 2 * t + j)).epsilon(1e-10));
    }
  }
  const auto reference = testing::joint_gaussian_reference(model, values, inputs, rows);
  CHECK(log_likelihood == doctest::Approx(reference.log_likelihood).epsilon(1e-11));
}

TEST_CASE("square-root filter stays correct on an ill-conditioned measurement where the plain form fails") {
  // The classic ill-conditioned measurement (M. S. Grewal and A. P. Andrews, Kalman Filtering: Theory
  // and Practice, 2nd ed., 2001, section 6.2 — recalled from memory): P0 = I (3 states), two channels
  // H = [[1, 1, 1], [1, 1, 1 + δ]], R = δ² I, with δ² below double precision's resolution near 3
  // (δ = 2^-27, δ² = 2^-54). In double, S = H P H' + R rounds to a matrix with determinant -δ²
  // instead of +8δ² + O(δ³): the plain update cannot even factor S. The square-root form never forms
  // S. Reference: the conventional update evaluated in 113-bit arithmetic from the exactly
  // representable inputs (quad_update above), where S's determinant keeps about 60 correct bits.
  // Cross-check (Python's exact rational arithmetic, fractions.Fraction, on the same inputs, one
  // update): P(0,0) = 0.6250000006984919, P(2,2) = 0.4999999990686774, x(2) = 0.37500000069849193.
  const double delta = std::ldexp(1.0, -27);
  const StateSpaceModel model = ill_conditioned_model(delta);
  const Transition transition = model_transition(model);

  // Three rows of exactly representable measurements.
  const double measured[3][2] = {{1.0, 1.0 + std::ldexp(1.0, -28)},
                                 {1.25, 1.25 + std::ldexp(3.0, -29)},
                                 {0.75, 0.75 - std::ldexp(1.0, -30)}};

  KalmanFilter plain(model);
  InnovationRecord record = make_innovation_record(2);
  CHECK(plain.update(measured[0], record) == StepStatus::singular_innovation_covariance);

  QuadMatrix x(3, 1), P(3, 3), H(2, 3);
  for (int i = 0; i < 3; ++i) P(i, i) = 1;
  for (int i = 0; i < 3; ++i) H(0, i) = H(1, i) = 1;
  H(1, 2) = Quad(1) + Quad(delta);
  const Quad noise = Quad(delta) * Quad(delta);
  SquareRootKalmanFilter root(model);
  for (int t = 0; t < 3; ++t) {
    if (t > 0) {
      root.predict(transition, nullptr);
      for (int i = 0; i < 3; ++i) P(i, i) += Quad(std::ldexp(1.0, -20));  // A = I
    }
    const Quad y[2] = {Quad(measured[t][0]), Quad(measured[t][1])};
    REQUIRE(root.update(measured[t], record) == StepStatus::ok);
    quad_update(x, P, H, noise, y);
    if (t == 0) {
      // The exact rational values quoted above.
      CHECK(static_cast<double>(P(0, 0)) == doctest::Approx(0.6250000006984919).epsilon(1e-15));
      CHECK(static_cast<double>(P(2, 2)) == doctest::Approx(0.4999999990686774).epsilon(1e-15));
      CHECK(static_cast<double>(x(2, 0)) == doctest::Approx(0.37500000069849193).epsilon(1e-15));
    }
    // A backward-stable array algorithm errs by a small multiple of epsilon times the condition of the
    // pre-array, here about 1/δ = 1.3e8: 4 * 2.2e-16 / δ = 1.2e-7 (measured: up to 5e-9).
    const double tolerance = 4.0 * std::numeric_limits<double>::epsilon() / delta;
    for (int i = 0; i < 3; ++i) {
      INFO("row " << t << ", state " << i << ": square-root " << root.mean()(i) << ", quad "
                  << static_cast<double>(x(i, 0)));
      CHECK(std::abs(root.mean()(i) - static_cast<double>(x(i, 0))) <= tolerance);
      for (int j = 0; j < 3; ++j)
        CHECK(std::abs(root.covariance()(i, j) - static_cast<double>(P(i, j))) <= tolerance);
    }
    // Positive semidefinite and symmetric by construction.
    CHECK(root.covariance() == root.covariance().transpose());
    const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> eigen(root.covariance(), Eigen::EigenvaluesOnly);
    CHECK(eigen.eigenvalues().minCoeff() >= -1e-15);
  }
}

TEST_CASE("where the plain form silently loses accuracy the square-root form stays correct") {
  // The same model with δ = 2^-25: δ² = 2^-50 is only 2 units in the last place of 3, so the plain
  // update still factors S and returns ok, and the Joseph form keeps P positive semidefinite, but S's
  // determinant (8δ² exactly) carries no correct digit and the updated P is off by about 2%. No
  // status can reveal it; only the square-root form avoids it. Reference: quad_update (113 bits).
  const double delta = std::ldexp(1.0, -25);
  const StateSpaceModel model = ill_conditioned_model(delta);
  const double y[2] = {1.0, 1.0 + delta / 2.0};
  KalmanFilter plain(model);
  SquareRootKalmanFilter root(model);
  InnovationRecord record = make_innovation_record(2);
  REQUIRE(plain.update(y, record) == StepStatus::ok);
  REQUIRE(root.update(y, record) == StepStatus::ok);
  QuadMatrix x(3, 1), P(3, 3), H(2, 3);
  for (int i = 0; i < 3; ++i) P(i, i) = 1;
  for (int i = 0; i < 3; ++i) H(0, i) = H(1, i) = 1;
  H(1, 2) = Quad(1) + Quad(delta);
  const Quad quad_y[2] = {Quad(y[0]), Quad(y[1])};
  quad_update(x, P, H, Quad(delta) * Quad(delta), quad_y);
  double plain_error = 0.0, root_error = 0.0;
  for (int i = 0; i < 3; ++i)
    for (int j = 0; j < 3; ++j) {
      plain_error = std::max(plain_error, std::abs(plain.covariance()(i, j) - static_cast<double>(P(i, j))));
      root_error = std::max(root_error, std::abs(root.covariance()(i, j) - static_cast<double>(P(i, j))));
    }
  MESSAGE("largest covariance error against the 113-bit reference: plain " << plain_error << ", square-root "
                                                                           << root_error);
  // Bounds: the plain error is far above rounding (measured 0.0094); the square-root error within the
  // backward-stability bound of the test above, 4 eps / δ = 3e-8 (measured 4e-9).
  CHECK(plain_error > 1e-3);
  CHECK(root_error <= 4.0 * std::numeric_limits<double>::epsilon() / delta);
}

TEST_CASE("square-root filter reports a singular innovation covariance and keeps the state") {
  // R = 0 and a zero prior variance: S = C P C' + R = 0 (as in filter_test.cpp for the plain form).
  StateSpaceModel model;
  model.state_names = {"level"};
  model.observation_names = {"y"};
  model.A = Eigen::MatrixXd::Identity(1, 1);
  model.B = Eigen::MatrixXd::Zero(1, 0);
  model.C = Eigen::MatrixXd::Identity(1, 1);
  model.Q = Eigen::MatrixXd::Zero(1, 1);
  model.R = Eigen::MatrixXd::Zero(1, 1);
  model.initial_mean = Eigen::VectorXd::Constant(1, 2.0);
  model.initial_covariance = Eigen::MatrixXd::Zero(1, 1);
  SquareRootKalmanFilter filter(model);
  InnovationRecord record = make_innovation_record(1);
  const double y = 1.0;
  CHECK(filter.update(&y, record) == StepStatus::singular_innovation_covariance);
  CHECK(filter.mean()(0) == 2.0);
  CHECK(filter.covariance()(0, 0) == 0.0);
}

TEST_CASE("set_state accepts a covariance that lost definiteness by rounding") {
  // A covariance with a tiny negative eigenvalue (what a failing plain update leaves behind) is
  // factored with the negative part dropped: the implied covariance is the nearest PSD matrix in the
  // eigenbasis (first principles: V max(Λ, 0) V').
  StateSpaceModel model;
  model.state_names = {"a", "b"};
  model.observation_names = {"y"};
  model.A = Eigen::MatrixXd::Identity(2, 2);
  model.B = Eigen::MatrixXd::Zero(2, 0);
  model.C = Eigen::MatrixXd::Ones(1, 2);
  model.Q = Eigen::MatrixXd::Zero(2, 2);
  model.R = Eigen::MatrixXd::Identity(1, 1);
  model.initial_mean = Eigen::VectorXd::Zero(2);
  model.initial_covariance = Eigen::MatrixXd::Identity(2, 2);
  SquareRootKalmanFilter filter(model);
  Eigen::MatrixXd indefinite(2, 2);
  indefinite << 1.0, 1.0 + 1e-12, 1.0 + 1e-12, 1.0;  // eigenvalues 2 + 1e-12 and -1e-12
  filter.set_state(Eigen::VectorXd::Zero(2), indefinite);
  Eigen::MatrixXd expected(2, 2);
  expected << 1.0 + 5e-13, 1.0 + 5e-13, 1.0 + 5e-13, 1.0 + 5e-13;
  CHECK(max_abs(filter.covariance() - expected) <= 1e-15);
  CHECK((filter.factor().diagonal().array() >= 0.0).all());
}
