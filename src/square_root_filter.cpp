#include "statewise/square_root_filter.h"

#include <Eigen/Cholesky>
#include <Eigen/Eigenvalues>
#include <cmath>
#include <numbers>

#include "detail/observed_channels.h"

namespace statewise {

namespace {

// The lower-triangular L with L L' = M' M, from the Householder QR of the tall or square `pre_transposed`
// (rows >= cols): M = Q R gives M' M = R' R, so L = R' restricted to the first `size` rows. Rows of R
// are negated where needed so that L has a non-negative diagonal (multiplying Q by a diagonal of ±1
// keeps it orthogonal).
void lower_factor_from_qr(const Eigen::HouseholderQR<Eigen::MatrixXd>& qr, Eigen::Index size,
                          Eigen::MatrixXd& lower) {
  const Eigen::MatrixXd& packed = qr.matrixQR();
  lower.setZero(size, size);
  for (Eigen::Index i = 0; i < size; ++i) {
    const double sign = packed(i, i) < 0.0 ? -1.0 : 1.0;
    for (Eigen::Index j = i; j < size; ++j) lower(j, i) = sign * packed(i, j);
  }
}
}  // namespace

Eigen::MatrixXd psd_square_root(const Eigen::MatrixXd& matrix) {
  if (matrix.size() == 0) return matrix;
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> solver(matrix);
  const Eigen::VectorXd roots = solver.eigenvalues().cwiseMax(0.0).cwiseSqrt();
  return solver.eigenvectors() * roots.asDiagonal();
}

SquareRootKalmanFilter::SquareRootKalmanFilter(const StateSpaceModel& model)
    : model_(model), time_qr_(2 * model.A.rows(), model.A.rows()) {
  const Eigen::Index n = model.A.rows();
  const Eigen::Index m = model.C.rows();
  predicted_mean_.resize(n);
  time_pre_transposed_.resize(2 * n, n);
  workspaces_.resize(static_cast<std::size_t>(m) + 1);
  for (Eigen::Index k = 1; k <= m; ++k) {
    Workspace& w = workspaces_[static_cast<std::size_t>(k)];
    w.C.resize(k, n);
    w.R.resize(k, k);
    w.R_factor.resize(k, k);
    w.pre_transposed.resize(k + n, k + n);
    w.v.resize(k);
    w.whitened.resize(k);
    w.qr = Eigen::HouseholderQR<Eigen::MatrixXd>(k + n, k + n);
  }
  observed_index_.resize(static_cast<std::size_t>(m));
  reset();
}

void SquareRootKalmanFilter::reset() { set_state(model_.initial_mean, model_.initial_covariance); }

void SquareRootKalmanFilter::set_state(const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance) {
  mean_ = mean;
  // Any factor F (F F' = P), then triangular: QR of F'.
  const Eigen::MatrixXd root = psd_square_root(0.5 * (covariance + covariance.transpose()));
  const Eigen::HouseholderQR<Eigen::MatrixXd> qr(root.transpose());
  lower_factor_from_qr(qr, covariance.rows(), factor_);
  refresh_covariance();
}

void SquareRootKalmanFilter::set_factor(const Eigen::VectorXd& mean, const Eigen::MatrixXd& factor) {
  mean_ = mean;
  factor_ = factor;
  refresh_covariance();
}

void SquareRootKalmanFilter::refresh_covariance() {
  // P = S S', written so that the result is exactly symmetric.
  covariance_.noalias() = factor_ * factor_.transpose();
  for (Eigen::Index i = 0; i < covariance_.rows(); ++i)
    for (Eigen::Index j = i + 1; j < covariance_.cols(); ++j) covariance_(i, j) = covariance_(j, i);
}

void SquareRootKalmanFilter::predict(const Transition& transition, const double* previous_inputs) {
  const Eigen::Index n = factor_.rows();
  // x = A x + B u
  predicted_mean_.noalias() = transition.A * mean_;
  if (transition.B.cols() > 0 && previous_inputs != nullptr)
    predicted_mean_.noalias() +=
        transition.B * Eigen::Map<const Eigen::VectorXd>(previous_inputs, transition.B.cols());
  mean_.swap(predicted_mean_);
  // A factor of Q, recomputed only when the transition's Q changes.
  if (!has_process_noise_factor_ || process_noise_.rows() != transition.Q.rows() ||
      process_noise_ != transition.Q) {
    process_noise_ = transition.Q;
    process_noise_factor_ = psd_square_root(transition.Q);
    has_process_noise_factor_ = true;
  }
  // Time update (Kailath, Sayed, Hassibi 2000, section 12.3; Grewal and Andrews 2001, section 6.5):
  // A P A' + Q = [A S, Q^(1/2)] [A S, Q^(1/2)]', so the new factor is R' from the QR of the stacked
  // transpose [(A S)' ; (Q^(1/2))'] (2n × n).
  time_pre_transposed_.topRows(n).noalias() = (transition.A * factor_).transpose();
  time_pre_transposed_.bottomRows(n) = process_noise_factor_.transpose();
  time_qr_.compute(time_pre_transposed_);
  lower_factor_from_qr(time_qr_, n, factor_);
  refresh_covariance();
}

StepStatus SquareRootKalmanFilter::update(const double* values, InnovationRecord& record) {
  const Eigen::Index n = factor_.rows();
  const int k = detail::begin_measurement_update(values, model_.C.rows(), record, observed_index_);
  if (k == 0) return mean_.allFinite() && factor_.allFinite() ? StepStatus::ok : StepStatus::not_finite;

  Workspace& w = workspaces_[static_cast<std::size_t>(k)];
  // Rows of C and the block of R for the observed channels; v = y_o - C_o x.
  detail::gather_observed_block(model_.C, model_.R, mean_, values, observed_index_, k, w);
  // A factor of the observed block of R: Cholesky when it is positive definite (the usual case), else
  // the eigen factor (a channel with zero noise).
  const Eigen::LLT<Eigen::MatrixXd> llt(w.R);
  if (llt.info() == Eigen::Success) {
    w.R_factor = llt.matrixL();
  } else {
    w.R_factor = psd_square_root(w.R);
  }

  // Measurement update as an array algorithm (Kailath, Sayed, Hassibi 2000, section 12.3, the
  // "measurement-update array"; Grewal and Andrews 2001, section 6.5): an orthogonal Θ takes
  //   [ R^(1/2)  C S ]      [ S_e^(1/2)  0  ]
  //   [ 0        S   ]  Θ = [ K̄          S⁺ ]
  // where S_e = C P C' + R, K̄ = P C' S_e^(-T/2), and S⁺ is a factor of the updated covariance
  // P - K̄ K̄'. Equating pre·pre' with post·post' proves it. With the QR of pre' = Q R, Θ = Q and
  // post = R'. The gain is K = K̄ S_e^(-1/2), so the mean update is x + K̄ (S_e^(-1/2) v).
  auto& pre_t = w.pre_transposed;
  pre_t.setZero();
  pre_t.topLeftCorner(k, k) = w.R_factor.transpose();
  pre_t.bottomLeftCorner(n, k).noalias() = (w.C * factor_).transpose();
  pre_t.bottomRightCorner(n, n) = factor_.transpose();
  w.qr.compute(pre_t);
  const Eigen::MatrixXd& packed = w.qr.matrixQR();
  // post = R' with the signs of R's rows chosen so that the diagonal is non-negative.
  Eigen::MatrixXd& post = pre_t;  // reuse: the QR keeps its own copy
  post.setZero();
  for (Eigen::Index i = 0; i < k + n; ++i) {
    const double sign = packed(i, i) < 0.0 ? -1.0 : 1.0;
    for (Eigen::Index j = i; j < k + n; ++j) post(j, i) = sign * packed(i, j);
  }
  const auto innovation_factor = post.topLeftCorner(k, k);  // S_e^(1/2), lower triangular
  // Overflow is not a singular S (as in KalmanFilter::update).
  if (!innovation_factor.allFinite() || !w.v.allFinite()) return StepStatus::not_finite;
  for (int a = 0; a < k; ++a)
    if (!(innovation_factor(a, a) > 0.0) || !std::isfinite(innovation_factor(a, a)))
      return StepStatus::singular_innovation_covariance;
  // whitened = S_e^(-1/2) v by forward substitution; NIS = |whitened|^2.
  double log_determinant = 0.0;
  for (int a = 0; a < k; ++a) {
    double value = w.v(a);
    for (int b = 0; b < a; ++b) value -= innovation_factor(a, b) * w.whitened(b);
    w.whitened(a) = value / innovation_factor(a, a);
    log_determinant += 2.0 * std::log(innovation_factor(a, a));
  }
  const double nis = w.whitened.squaredNorm();
  predicted_mean_ = mean_;
  predicted_mean_.noalias() += post.bottomLeftCorner(n, k) * w.whitened;
  if (!predicted_mean_.allFinite() || !post.bottomRightCorner(n, n).allFinite())
    return StepStatus::not_finite;
  mean_.swap(predicted_mean_);
  factor_ = post.bottomRightCorner(n, n);
  refresh_covariance();

  for (int a = 0; a < k; ++a) {
    const int ca = observed_index_[static_cast<std::size_t>(a)];
    record.innovation(ca) = w.v(a);
    // sqrt(S_aa) is the norm of row a of S_e^(1/2).
    record.innovation_sd(ca) = innovation_factor.row(a).norm();
  }
  record.nis = nis;
  // log N(v; 0, S) = -(k log 2π + log det S + v' S^-1 v) / 2
  record.log_likelihood = -0.5 * (k * std::log(2.0 * std::numbers::pi) + log_determinant + nis);
  return StepStatus::ok;
}

}  // namespace statewise
