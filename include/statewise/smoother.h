#pragma once
/// \file smoother.h
/// The Rauch–Tung–Striebel fixed-interval smoother (H. E. Rauch, F. Tung, C. T. Striebel, Maximum
/// likelihood estimates of linear dynamic systems, AIAA Journal 3(8), 1965), run backwards over the
/// filtered means and covariances stored by the forward pass. It overwrites them in place with the
/// smoothed ones, so a whole-series smooth holds one mean and one covariance per row, no more.

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "statewise/filter.h"

namespace statewise {

/// Filtered (then, after rts_smooth, smoothed) means and covariances of every row, stored
/// contiguously: row t's mean is n doubles, its covariance n×n doubles (column-major).
class StateTrack {
 public:
  /// An empty track for n states; reserve() ahead when the row count is known.
  explicit StateTrack(int states);
  /// Reserves room for `rows` rows.
  void reserve(std::size_t rows);
  /// Appends a row's mean and covariance.
  void push_back(const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance);
  /// Number of rows stored.
  std::size_t size() const { return means_.size() / static_cast<std::size_t>(states_); }
  /// Number of states n.
  int states() const { return states_; }
  /// Row t's mean (read/write view).
  Eigen::Map<Eigen::VectorXd> mean(std::size_t t) {
    return Eigen::Map<Eigen::VectorXd>(means_.data() + t * static_cast<std::size_t>(states_), states_);
  }
  /// Row t's mean.
  Eigen::Map<const Eigen::VectorXd> mean(std::size_t t) const {
    return Eigen::Map<const Eigen::VectorXd>(means_.data() + t * static_cast<std::size_t>(states_), states_);
  }
  /// Row t's covariance (read/write view).
  Eigen::Map<Eigen::MatrixXd> covariance(std::size_t t) {
    return Eigen::Map<Eigen::MatrixXd>(covariances_.data() + t * square(), states_, states_);
  }
  /// Row t's covariance.
  Eigen::Map<const Eigen::MatrixXd> covariance(std::size_t t) const {
    return Eigen::Map<const Eigen::MatrixXd>(covariances_.data() + t * square(), states_, states_);
  }

 private:
  std::size_t square() const { return static_cast<std::size_t>(states_) * static_cast<std::size_t>(states_); }
  int states_;
  std::vector<double> means_;
  std::vector<double> covariances_;
};

/// Which transition carries the state from row t to row t+1. With one transition for all rows
/// (a regular log), `index_of_step` stays empty.
struct TransitionSchedule {
  std::vector<Transition> transitions;       ///< distinct transitions
  std::vector<std::uint32_t> index_of_step;  ///< entry t: transition from row t to row t+1; empty = all use [0]
  /// The transition from row t to row t+1.
  const Transition& step(std::size_t t) const {
    return transitions[index_of_step.empty() ? 0 : index_of_step[t]];
  }
};

/// Outcome of the backward pass.
struct SmoothStatus {
  bool ok = true;           ///< false when a predicted covariance was not usable
  std::size_t row = 0;      ///< 0-based row where the trouble was found, when !ok
  std::string message;      ///< what went wrong, when !ok
  std::size_t pseudo_inverse_rows = 0;  ///< rows where P_{t+1|t} was singular and a pseudo-inverse was used
};

/// What one backward step needs from row t besides the smoothed moments of row t+1: the predicted
/// moments x_{t+1|t}, P_{t+1|t} and the smoother gain J_t = P_{t|t} A' P_{t+1|t}^{-1}. They depend only
/// on row t's filtered moments and the transition to row t+1, so a fixed-lag smoother (fixed_lag.h)
/// computes them once per row and reuses them on every backward sweep.
struct SmootherGain {
  Eigen::VectorXd predicted_mean;        ///< x_{t+1|t}, n
  Eigen::MatrixXd predicted_covariance;  ///< P_{t+1|t}, n×n
  Eigen::MatrixXd gain;                  ///< J_t, n×n
  Eigen::MatrixXd gain_transposed;       ///< J_t', n×n
};

/// Work matrices of the backward step, sized on first use so that later steps do not allocate.
struct SmootherWorkspace {
  Eigen::MatrixXd product, factor, covariance_difference, correction;
  Eigen::VectorXd mean_difference;
};

/// Computes row t's SmootherGain from its filtered moments and the transition (with row t's p
/// `inputs`, may be null when p = 0) that carries it to row t+1. The predictions come from
/// predict_moments, the very same arithmetic as the forward pass. Returns false when P_{t+1|t} was
/// singular and a pseudo-inverse was used instead of the inverse.
bool compute_smoother_gain(const Transition& transition, const Eigen::VectorXd& filtered_mean,
                           const Eigen::MatrixXd& filtered_covariance, const double* inputs, SmootherGain& gain,
                           SmootherWorkspace& workspace);

/// One RTS backward step (Rauch, Tung and Striebel 1965; Särkkä, Bayesian Filtering and Smoothing,
/// 2013, section 8.2): from row t's filtered moments, its gain and row t+1's smoothed moments,
///   x_{t|N} = x_{t|t} + J_t (x_{t+1|N} - x_{t+1|t}),  P_{t|N} = P_{t|t} + J_t (P_{t+1|N} - P_{t+1|t}) J_t',
/// the covariance symmetrized. The outputs must not alias the inputs. Returns false when the result is
/// NaN or infinite.
bool apply_smoother_gain(const SmootherGain& gain, const Eigen::VectorXd& filtered_mean,
                         const Eigen::MatrixXd& filtered_covariance, const Eigen::Ref<const Eigen::VectorXd>& next_mean,
                         const Eigen::Ref<const Eigen::MatrixXd>& next_covariance, Eigen::Ref<Eigen::VectorXd> smoothed_mean,
                         Eigen::Ref<Eigen::MatrixXd> smoothed_covariance, SmootherWorkspace& workspace);

/// Runs the RTS backward pass in place over `track` (filtered moments in, smoothed moments out):
///   J_t = P_{t|t} A' P_{t+1|t}^{-1},
///   x_{t|N} = x_{t|t} + J_t (x_{t+1|N} - x_{t+1|t}),
///   P_{t|N} = P_{t|t} + J_t (P_{t+1|N} - P_{t+1|t}) J_t'.
/// The predictions x_{t+1|t}, P_{t+1|t} are recomputed with predict_moments from the stored filtered
/// moments (the very same arithmetic as the forward pass). `inputs` holds p values per row
/// (row-major, may be null when p = 0). A singular P_{t+1|t} (e.g. Q = 0 in some direction) is
/// handled with a pseudo-inverse and counted.
SmoothStatus rts_smooth(StateTrack& track, const TransitionSchedule& schedule, const double* inputs, int input_count);

}  // namespace statewise
