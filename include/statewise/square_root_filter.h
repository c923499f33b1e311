#pragma once
/// \file square_root_filter.h
/// The Kalman filter in square-root (array) form. It carries a lower-triangular factor S of the state
/// covariance, P = S S', and computes both updates by orthogonal triangularization (Householder QR) of
/// a pre-array, so the covariance it implies is symmetric and positive semidefinite by construction,
/// and the rounding error depends on the condition of S, the square root of the condition of P.
/// Array algorithms: T. Kailath, A. H. Sayed, B. Hassibi, Linear Estimation, 2000, chapter 12; see
/// also M. S. Grewal and A. P. Andrews, Kalman Filtering: Theory and Practice, 2nd ed., 2001,
/// chapter 6. Same step interface and results as KalmanFilter (filter.h); docs/algorithms.md has
/// the equations.

#include <Eigen/Core>
#include <Eigen/QR>
#include <vector>

#include "statewise/filter.h"
#include "statewise/model.h"

namespace statewise {

/// A factor F with F F' = M for a symmetric positive semidefinite M (any square factor, not
/// necessarily triangular), from the symmetric eigendecomposition M = V diag(λ) V': F = V diag(sqrt λ).
/// Eigenvalues below zero (rounding in a PSD matrix, or a matrix that has lost definiteness) are
/// taken as zero.
Eigen::MatrixXd psd_square_root(const Eigen::MatrixXd& matrix);

/// The online square-root Kalman filter for one model. Use exactly as KalmanFilter:
/// `if (t > 0) filter.predict(transition, inputs_of_row_t_minus_1); filter.update(values_of_row_t, record);`
class SquareRootKalmanFilter {
 public:
  /// Prepares a filter at the model's initial prior.
  explicit SquareRootKalmanFilter(const StateSpaceModel& model);

  /// Returns to the initial prior.
  void reset();
  /// Replaces the current mean and covariance. The covariance is factored with psd_square_root and
  /// triangularized, so a covariance that has lost definiteness through rounding (tiny negative
  /// eigenvalues) is accepted, its negative part dropped.
  void set_state(const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance);
  /// Replaces the current mean and factor S (n×n lower triangular, as returned by factor()), so that a
  /// saved filter resumes with the very same numbers.
  void set_factor(const Eigen::VectorXd& mean, const Eigen::MatrixXd& factor);

  /// Time update: x = A x + B u; the factor of A P A' + Q is the triangular factor of [A S, Q^(1/2)].
  void predict(const Transition& transition, const double* previous_inputs);

  /// Measurement update with one row of m values (NaN = missing); the channels present are used
  /// jointly, a row with none is a pure prediction. On a non-ok status the state is left as it was
  /// before the call. Fills `record` exactly as KalmanFilter::update does.
  StepStatus update(const double* values, InnovationRecord& record);

  /// Current mean.
  const Eigen::VectorXd& mean() const { return mean_; }
  /// Current covariance S S' (recomputed after every step).
  const Eigen::MatrixXd& covariance() const { return covariance_; }
  /// Current lower-triangular factor S (non-negative diagonal).
  const Eigen::MatrixXd& factor() const { return factor_; }
  /// The model the filter runs.
  const StateSpaceModel& model() const { return model_; }

 private:
  // Work arrays for k observed channels, allocated once per k.
  struct Workspace {
    Eigen::MatrixXd C, R, R_factor, pre_transposed;
    Eigen::VectorXd v, whitened;
    Eigen::HouseholderQR<Eigen::MatrixXd> qr;
  };
  void refresh_covariance();
  StateSpaceModel model_;
  Eigen::VectorXd mean_, predicted_mean_;
  Eigen::MatrixXd factor_, covariance_;
  Eigen::MatrixXd time_pre_transposed_;
  Eigen::HouseholderQR<Eigen::MatrixXd> time_qr_;
  Eigen::MatrixXd process_noise_;         // the Q last seen by predict
  Eigen::MatrixXd process_noise_factor_;  // psd_square_root of it
  bool has_process_noise_factor_ = false;
  std::vector<Workspace> workspaces_;  // index k = number of observed channels
  std::vector<int> observed_index_;
};

}  // namespace statewise
