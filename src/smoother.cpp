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

SmoothStatus rts_smooth(StateTrack& track, const TransitionSchedule& schedule, const double* inputs,
                        int input_count) {
  SmoothStatus status;
  const std::size_t rows = track.size();
  if (rows < 2) return status;
  const Eigen::Index n = track.states();
  Eigen::VectorXd filtered_mean(n), predicted_mean(n), mean_difference(n);
  Eigen::MatrixXd filtered_covariance(n, n), predicted_covariance(n, n), workspace(n, n);
  Eigen::MatrixXd gain(n, n), gain_transposed(n, n), covariance_difference(n, n), correction(n, n);
  Eigen::MatrixXd factor(n, n);

  for (std::size_t t = rows - 1; t-- > 0;) {
    const Transition& transition = schedule.step(t);
    filtered_mean = track.mean(t);
    filtered_covariance = track.covariance(t);
    const double* row_inputs =
        input_count > 0 && inputs != nullptr ? inputs + t * static_cast<std::size_t>(input_count) : nullptr;
    predict_moments(transition, filtered_mean, filtered_covariance, row_inputs, predicted_mean, predicted_covariance,
                    workspace);
    // J' = P_{t+1|t}^{-1} A P_{t|t}  (P_{t+1|t} and P_{t|t} are symmetric)
    gain_transposed.noalias() = transition.A.lazyProduct(filtered_covariance);
    factor = predicted_covariance;
    if (detail::cholesky_in_place(factor)) {
      detail::cholesky_solve_in_place(factor, gain_transposed);
    } else {
      // Singular prediction covariance: the minimum-norm solution is a valid gain (the smoothed moments
      // do not depend on which generalized inverse is used on the range of P_{t+1|t}).
      const Eigen::CompleteOrthogonalDecomposition<Eigen::MatrixXd> decomposition(predicted_covariance);
      gain_transposed = decomposition.solve(gain_transposed).eval();
      ++status.pseudo_inverse_rows;
    }
    gain = gain_transposed.transpose();
    mean_difference = track.mean(t + 1) - predicted_mean;
    track.mean(t).noalias() = filtered_mean + gain.lazyProduct(mean_difference);
    covariance_difference = track.covariance(t + 1) - predicted_covariance;
    correction.noalias() = gain.lazyProduct(covariance_difference);
    workspace.noalias() = correction.lazyProduct(gain_transposed);
    auto smoothed = track.covariance(t);
    smoothed = filtered_covariance + workspace;
    for (Eigen::Index i = 0; i < n; ++i)
      for (Eigen::Index j = i + 1; j < n; ++j) {
        const double average = 0.5 * (smoothed(i, j) + smoothed(j, i));
        smoothed(i, j) = average;
        smoothed(j, i) = average;
      }
    if (!smoothed.allFinite() || !track.mean(t).allFinite()) {
      status.ok = false;
      status.row = t;
      status.message = "the smoothed mean or covariance became NaN or infinite";
      return status;
    }
  }
  return status;
}

}  // namespace statewise
