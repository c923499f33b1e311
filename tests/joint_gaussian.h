#pragma once
// A first-principles reference for the filter and smoother tests: the joint Gaussian of all states
// and all observed values of a short series, built directly with dense matrices, with no recursion
// shared with the library.
//
// States stacked as X = (x_0, ..., x_{T-1}): x_0 ~ N(m0, P0), x_t = A x_{t-1} + B u_{t-1} + w_t, so
//   E[x_t] = A E[x_{t-1}] + B u_{t-1},  Cov(x_t, x_s) = A^{t-s} Var(x_s) for t >= s,
//   Var(x_t) = A Var(x_{t-1}) A' + Q.
// Observed values Y (the present entries of y_t = C x_t + v_t): E[Y] = C E[x_t] rows,
//   Cov(Y, X) = rows of C Cov(x_t, X), Cov(Y, Y) = C Cov(x_t, x_s) C' + [t = s] R.
// Then E[X | Y] = E[X] + Σ_XY Σ_YY^-1 (Y - E[Y]) and Var(X | Y) = Σ_XX - Σ_XY Σ_YY^-1 Σ_YX, and
// the log-likelihood is log N(Y; E[Y], Σ_YY).

#include <cmath>
#include <numbers>
#include <vector>

#include <Eigen/Dense>

#include "statewise/model.h"

namespace statewise::testing {

struct JointGaussianReference {
  Eigen::VectorXd conditional_mean;        // nT, stacked E[X | Y]
  Eigen::MatrixXd conditional_covariance;  // nT × nT
  double log_likelihood = 0.0;             // log N(Y; E[Y], Σ_YY)
};

// `values` is T×m row-major with NaN for missing; `inputs` T×p row-major.
inline JointGaussianReference joint_gaussian_reference(const StateSpaceModel& model, const std::vector<double>& values,
                                                       const std::vector<double>& inputs, int rows) {
  const int n = model.state_count(), m = model.channel_count(), p = model.input_count();
  const int N = n * rows;
  Eigen::VectorXd mean_x(N);
  Eigen::MatrixXd cov_x(N, N);
  // Marginal moments row by row.
  std::vector<Eigen::MatrixXd> variance(static_cast<std::size_t>(rows));
  mean_x.segment(0, n) = model.initial_mean;
  variance[0] = model.initial_covariance;
  for (int t = 1; t < rows; ++t) {
    Eigen::VectorXd u = Eigen::VectorXd::Zero(p);
    for (int i = 0; i < p; ++i) u(i) = inputs[static_cast<std::size_t>((t - 1) * p + i)];
    mean_x.segment(t * n, n) = model.A * mean_x.segment((t - 1) * n, n) + model.B * u;
    variance[static_cast<std::size_t>(t)] =
        model.A * variance[static_cast<std::size_t>(t - 1)] * model.A.transpose() + model.Q;
  }
  for (int s = 0; s < rows; ++s) {
    Eigen::MatrixXd propagated = variance[static_cast<std::size_t>(s)];  // Cov(x_t, x_s) for t = s
    for (int t = s; t < rows; ++t) {
      if (t > s) propagated = model.A * propagated;
      cov_x.block(t * n, s * n, n, n) = propagated;
      cov_x.block(s * n, t * n, n, n) = propagated.transpose();
    }
  }
  // Observed entries.
  std::vector<std::pair<int, int>> observed;  // (row, channel)
  for (int t = 0; t < rows; ++t)
    for (int c = 0; c < m; ++c)
      if (!std::isnan(values[static_cast<std::size_t>(t * m + c)])) observed.emplace_back(t, c);
  const int K = static_cast<int>(observed.size());
  Eigen::VectorXd y(K), mean_y(K);
  Eigen::MatrixXd cov_yx(K, N), cov_yy(K, K);
  for (int a = 0; a < K; ++a) {
    const auto [t, c] = observed[static_cast<std::size_t>(a)];
    y(a) = values[static_cast<std::size_t>(t * m + c)];
    mean_y(a) = model.C.row(c).dot(mean_x.segment(t * n, n));
    cov_yx.row(a) = model.C.row(c) * cov_x.middleRows(t * n, n);
  }
  for (int a = 0; a < K; ++a)
    for (int b = 0; b < K; ++b) {
      const auto [t, c] = observed[static_cast<std::size_t>(a)];
      const auto [s, d] = observed[static_cast<std::size_t>(b)];
      cov_yy(a, b) = cov_yx.row(a).segment(s * n, n).dot(model.C.row(d)) + (t == s ? model.R(c, d) : 0.0);
    }
  const Eigen::LDLT<Eigen::MatrixXd> solver(cov_yy);
  JointGaussianReference reference;
  reference.conditional_mean = mean_x + cov_yx.transpose() * solver.solve(y - mean_y);
  reference.conditional_covariance = cov_x - cov_yx.transpose() * solver.solve(cov_yx);
  const Eigen::VectorXd residual = y - mean_y;
  double log_determinant = 0.0;
  for (int a = 0; a < K; ++a) log_determinant += std::log(solver.vectorD()(a));
  reference.log_likelihood =
      -0.5 * (K * std::log(2.0 * std::numbers::pi) + log_determinant + residual.dot(solver.solve(residual)));
  return reference;
}

}  // namespace statewise::testing
