#pragma once
/// \file diffuse.h
/// Exact diffuse initialization (J. Durbin and S. J. Koopman, Time Series Analysis by State Space
/// Methods, 2nd ed., 2012, chapter 5) for states with no prior (StateSpaceModel::diffuse). The
/// prior covariance is P = P_* + kappa P_inf with kappa → ∞: P_inf is 1 on the diffuse states and
/// P_* is the given covariance of the others. While P_inf ≠ 0 (the "diffuse phase", usually the
/// first few rows) the filter and smoother carry both parts exactly, in the univariate treatment of
/// section 6.4 of that book (S. J. Koopman and J. Durbin, Fast filtering and smoothing for
/// multivariate state space models, J. Time Series Analysis 21(3), 2000): each row's observed values
/// are decorrelated with R = L D L' and processed one at a time, which needs no assumption on the
/// rank of C P_inf C'. Once P_inf = 0 the recursions are the ordinary ones.
///
/// The log-likelihood is D&K's diffuse log-likelihood (section 7.2.2),
///   log L_d = lim_{kappa→∞} [log L_kappa + (q/2) log kappa],
/// q the number of diffuse states: a value whose prediction has a diffuse part adds
/// -(log 2π + log F_inf)/2 instead of the usual -(log 2π + log F + v²/F)/2.

#include <Eigen/Core>
#include <cstddef>
#include <vector>

#include "statewise/filter.h"
#include "statewise/model.h"
#include "statewise/series.h"
#include "statewise/smoother.h"

namespace statewise {

/// z' P_inf z at or below kDiffuseTolerance × z'z counts as zero (the value carries no information
/// on the diffuse part), and P_inf with no entry above kDiffuseTolerance ends the diffuse phase.
/// P_inf starts as the identity on the diffuse states, so this is an absolute threshold.
inline constexpr double kDiffuseTolerance = 1e-8;

/// The initial P_inf of a model: 1 on the diagonal for diffuse states, 0 elsewhere.
Eigen::MatrixXd initial_diffuse_covariance(const StateSpaceModel& model);

/// One scalar value as the univariate filter processed it, kept for the smoother.
struct ScalarUpdate {
  Eigen::VectorXd z;       ///< the (decorrelated) row of C
  double v = 0.0;          ///< innovation y - z'a
  double F_star = 0.0;     ///< z' P_* z + noise variance
  double F_inf = 0.0;      ///< z' P_inf z (0 outside the diffuse phase)
  Eigen::VectorXd M_star;  ///< P_* z
  Eigen::VectorXd M_inf;   ///< P_inf z (empty when F_inf is 0)
};

/// What the univariate update of one row gave.
struct UnivariateRowResult {
  StepStatus status = StepStatus::ok;
  double log_likelihood = 0.0;  ///< this row's contribution to log L_d
  int diffuse_values = 0;       ///< values that resolved part of the diffuse prior (F_inf > 0)
  int proper_values = 0;        ///< values with an ordinary innovation
  double nis = 0.0;             ///< sum of v²/F over the proper values
};

/// Updates the mean a, P_* and (when `diffuse` is not null) P_inf with one row's m values (NaN =
/// missing), one decorrelated value at a time. When `updates` is not null, each value's quantities
/// are appended to it for the smoother. On a non-ok status the arguments are partly updated.
UnivariateRowResult univariate_update(const StateSpaceModel& model, const double* values,
                                      Eigen::VectorXd& mean, Eigen::MatrixXd& covariance,
                                      Eigen::MatrixXd* diffuse, std::vector<ScalarUpdate>* updates);

/// The exact log-likelihood of a whole series (the filter alone, no storage).
struct SeriesLikelihood {
  double log_likelihood = 0.0;         ///< log L_d (the ordinary log-likelihood when nothing is diffuse)
  StepStatus status = StepStatus::ok;  ///< ok, or the first trouble met
  std::size_t row = 0;                 ///< 0-based row of the trouble, when status is not ok
  std::size_t diffuse_rows = 0;        ///< rows processed while P_inf ≠ 0
  bool diffuse_resolved = true;        ///< P_inf reached zero by the end of the series
  std::size_t observed_values = 0;     ///< non-missing values used
};

/// Runs the exact (diffuse) filter over `series` and returns its log-likelihood. The series' rows
/// are one model step apart.
SeriesLikelihood exact_log_likelihood(const StateSpaceModel& model, const ObservationSeries& series);

/// Smoothed moments of every row given the whole series.
struct ExactSmoothing {
  StateTrack track{1};  ///< E[x_t | all data] and Var(x_t | all data) for every row
  std::vector<Eigen::MatrixXd>
      lag_one;                  ///< entry t ≥ 1: Cov(x_t, x_{t-1} | all data) (when asked; entry 0 is zero)
  SeriesLikelihood likelihood;  ///< from the forward pass
};

/// The exact diffuse fixed-interval smoother (D&K 2012, section 5.3, in the univariate form of
/// section 6.4): the backward recursions for r^(0), r^(1), N^(0), N^(1), N^(2) over the diffuse
/// rows and for r, N afterwards, then x̂_t = a_t + P_*,t r^(0) + P_inf,t r^(1) and
/// V_t = P_* - P_* N^(0) P_* - (P_inf N^(1) P_*)' - P_inf N^(1) P_* - P_inf N^(2) P_inf.
/// With `with_lag_one`, the lag-one covariances (needed by EM) are read off the same smoother run on
/// the state augmented with its previous value, (x_t, x_{t-1}). Without diffuse states it gives the
/// RTS smoother's results. When likelihood.status is not ok the track is incomplete.
ExactSmoothing exact_smooth(const StateSpaceModel& model, const ObservationSeries& series, bool with_lag_one);

}  // namespace statewise
