#include "statewise/smoother.h"

#include <Eigen/Cholesky>
#include <Eigen/QR>

#include "detail/small_cholesky.h"

namespace statewise {

StateTrack::StateTrack(int states) : states_(states) {}

void StateTrack::reserve(std::size_t rows) {
  means_.reserve(rows * static_cast<std::size_t>(states_));
  covariances_.reserve(rows * square());
}

void StateTrack::push_back(const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance) {
  means_.insert(means_.end(), mean.data(), mean.data() + mean.size());
  covariances_.insert(covariances_.end(), covariance.data(), covariance.data() + covariance.size());
}

bool compute_smoother_gain(const Transition& transition, const Eigen::VectorXd& filtered_mean,
                           const Eigen::MatrixXd& filtered_covariance, const double* inputs, SmootherGain& gain,
                           SmootherWorkspace& workspace) {
  predict_moments(transition, filtered_mean, filtered_covariance, inputs, gain.predicted_mean,
                  gain.predicted_covariance, workspace.product);
  // J' = P_{t+1|t}^{-1} A P_{t|t}  (P_{t+1|t} and P_{t|t} are symmetric)
  gain.gain_transposed.noalias() = transition.A.lazyProduct(filtered_covariance);
  workspace.factor = gain.predicted_covariance;
  bool inverted = true;
  if (detail::cholesky_in_place(workspace.factor)) {
    detail::cholesky_solve_in_place(workspace.factor, gain.gain_transposed);
  } else {
    // Singular prediction covariance: the minimum-norm solution is a valid gain (the smoothed moments
    // do not depend on which generalized inverse is used on the range of P_{t+1|t}).
    const Eigen::CompleteOrthogonalDecomposition<Eigen::MatrixXd> decomposition(gain.predicted_covariance);
    gain.gain_transposed = decomposition.solve(gain.gain_transposed).eval();
    inverted = false;
  }
  gain.gain = gain.gain_transposed.transpose();
  return inverted;
}

bool apply_smoother_gain(const SmootherGain& gain, const Eigen::VectorXd& filtered_mean,
                         const Eigen::MatrixXd& filtered_covariance, const Eigen::Ref<const Eigen::VectorXd>& next_mean,
                         const Eigen::Ref<const Eigen::MatrixXd>& next_covariance,
                         Eigen::Ref<Eigen::VectorXd> smoothed_mean, Eigen::Ref<Eigen::MatrixXd> smoothed_covariance,
                         SmootherWorkspace& workspace) {
  const Eigen::Index n = filtered_mean.size();
  workspace.mean_difference = next_mean - gain.predicted_mean;
  smoothed_mean.noalias() = filtered_mean + gain.gain.lazyProduct(workspace.mean_difference);
  workspace.covariance_difference = next_covariance - gain.predicted_covariance;
  workspace.correction.noalias() = gain.gain.lazyProduct(workspace.covariance_difference);
  workspace.product.noalias() = workspace.correction.lazyProduct(gain.gain_transposed);
  smoothed_covariance = filtered_covariance + workspace.product;
  for (Eigen::Index i = 0; i < n; ++i)
    for (Eigen::Index j = i + 1; j < n; ++j) {
      const double average = 0.5 * (smoothed_covariance(i, j) + smoothed_covariance(j, i));
      smoothed_covariance(i, j) = average;
      smoothed_covariance(j, i) = average;
    }
  return smoothed_covariance.allFinite() && smoothed_mean.allFinite();
}

SmoothStatus rts_smooth(StateTrack& track, const TransitionSchedule& schedule, const double* inputs,
                        int input_count) {
  SmoothStatus status;
  const std::size_t rows = track.size();
  if (rows < 2) return status;
  const Eigen::Index n = track.states();
  Eigen::VectorXd filtered_mean(n);
  Eigen::MatrixXd filtered_covariance(n, n);
  SmootherGain gain;
  SmootherWorkspace workspace;
  for (std::size_t t = rows - 1; t-- > 0;) {
    filtered_mean = track.mean(t);
    filtered_covariance = track.covariance(t);
    const double* row_inputs =
        input_count > 0 && inputs != nullptr ? inputs + t * static_cast<std::size_t>(input_count) : nullptr;
    if (!compute_smoother_gain(schedule.step(t), filtered_mean, filtered_covariance, row_inputs, gain, workspace))
      ++status.pseudo_inverse_rows;
    if (!apply_smoother_gain(gain, filtered_mean, filtered_covariance, track.mean(t + 1), track.covariance(t + 1),
                             track.mean(t), track.covariance(t), workspace)) {
      status.ok = false;
      status.row = t;
      status.message = "the smoothed mean or covariance became NaN or infinite";
      return status;
    }
  }
  return status;
}

}  // namespace statewise
