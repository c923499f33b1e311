#pragma once
/// \file filter.h
/// The Kalman filter (R. E. Kalman, A new approach to linear filtering and prediction problems,
/// J. Basic Engineering 82, 1960) as an online engine: one predict and one update per log row, with
/// any subset of channels missing, the Joseph-form covariance update and the exact Gaussian
/// log-likelihood of the observed values. No heap allocation happens per row.

#include <cstdint>
#include <limits>
#include <span>

#include <Eigen/Core>

#include "statewise/model.h"

namespace statewise {

/// One step's state transition: x_t = A x_{t-1} + B u_{t-1} + w_t with w_t ~ N(0, Q).
struct Transition {
  Eigen::MatrixXd A;  ///< n×n
  Eigen::MatrixXd B;  ///< n×p
  Eigen::MatrixXd Q;  ///< n×n, symmetric PSD
};

/// The transition of a model whose rows are one model step apart.
Transition model_transition(const StateSpaceModel& model);

/// How a filter step ended. Numerical trouble is reported here, never thrown.
enum class StepStatus {
  ok,                              ///< the step succeeded
  singular_innovation_covariance,  ///< S = C P C' + R of the observed channels is not positive definite
  not_finite,                      ///< a mean or covariance became NaN or infinite
};

/// A plain-words description of a status, for messages.
const char* describe(StepStatus status);

/// What one row's update produced, for output and diagnostics. Vectors have one entry per channel.
struct InnovationRecord {
  Eigen::VectorXd innovation;     ///< v = y - C x_{t|t-1}; NaN where the channel is missing
  Eigen::VectorXd innovation_sd;  ///< sqrt of the diagonal of S = C P_{t|t-1} C' + R; NaN where missing
  int observed = 0;               ///< number of channels observed on this row
  /// Normalized innovation squared v' S^-1 v over the observed channels; NaN when none is observed.
  double nis = std::numeric_limits<double>::quiet_NaN();
  /// log N(v; 0, S) of the observed values; 0 when none is observed.
  double log_likelihood = 0.0;
};

/// Predicted moments: x_pred = A x + B u, P_pred = A P A' + Q, symmetrized. `inputs` points at p
/// values (may be null when p = 0). Shared by the filter and the smoother so both compute the very
/// same numbers.
void predict_moments(const Transition& transition, const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance,
                     const double* inputs, Eigen::VectorXd& predicted_mean, Eigen::MatrixXd& predicted_covariance,
                     Eigen::MatrixXd& workspace);

/// A filter's state between two rows: all it takes to stop (a logger restarting, a job killed) and
/// resume later with exactly the estimates an uninterrupted run would give. filter_state.h writes
/// and reads it as JSON text.
struct FilterState {
  Eigen::VectorXd mean;              ///< n: the mean after the last processed row (the prior mean before any)
  Eigen::MatrixXd covariance;        ///< n×n: its covariance, symmetric positive semidefinite
  std::uint64_t rows_processed = 0;  ///< rows processed by KalmanFilter::step(); 0 = at the initial prior
  Eigen::VectorXd last_inputs;       ///< p: the inputs of the last processed row, which drive the next prediction
};

/// The online Kalman filter for one model. A logger feeds it one row at a time with step(); a
/// program that needs other transitions per row calls predict() and update() itself:
/// `if (t > 0) filter.predict(transition, inputs_of_row_t_minus_1); filter.update(values_of_row_t, record);`
class KalmanFilter {
 public:
  /// Prepares a filter at the model's initial prior (the prior for the state at the first row).
  explicit KalmanFilter(const StateSpaceModel& model);

  /// Returns to the initial prior.
  void reset();
  /// Replaces the current mean and covariance (to resume from saved state). `diffuse` (n×n, may be
  /// null) is the diffuse part P_inf of a filter saved during the exact diffuse phase: given, the
  /// filter continues that phase; null ends it.
  void set_state(const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance,
                 const Eigen::MatrixXd* diffuse = nullptr);

  /// Moves the state one transition ahead: x = A x + B u, P = A P A' + Q.
  void predict(const Transition& transition, const double* previous_inputs);

  /// Updates with one row of m values (NaN = missing). Channels present are used jointly; a row with
  /// none is a pure prediction. During the exact diffuse phase the row goes through the univariate
  /// diffuse update (statewise/diffuse.h) instead: channels whose prediction still has a diffuse
  /// part get a NaN innovation, and the row's nis is NaN with `observed` 0 when any channel has, so
  /// that diagnostics count only proper innovations. Uses the Joseph form
  /// P = (I - K C) P (I - K C)' + K R K' (Bucy and Joseph, Filtering for Stochastic Processes, 1968;
  /// see also Simon, Optimal State Estimation, 2006, section 5.1), kept symmetric.
  /// On a non-ok status the state is left as it was before the call.
  StepStatus update(const double* values, InnovationRecord& record);

  /// Processes the next row of a log, rows one model step apart: unless it is the first row
  /// (rows_processed() == 0), predicts from the previous row with that row's inputs, then updates
  /// with `values`. `values` holds the m channel values in model order (NaN = missing); `inputs` the
  /// p inputs of this row (known quantities; they act on the step that follows it). `record`
  /// receives the row's innovations (sized on first use). Bad arguments raise InputError naming the
  /// row and the value, e.g. `row 13: values: expected 2 channel values (probe_a, probe_b), got 3`:
  /// a wrong count, an infinite value, a missing (NaN) or infinite input. Numerical trouble is the
  /// returned status, never an exception; then the filter is exactly as before the call and the
  /// row is not counted, so the caller may log it and go on with the next row.
  StepStatus step(std::span<const double> values, std::span<const double> inputs, InnovationRecord& record);

  /// Rows processed by step() since construction, reset() or restore().
  std::uint64_t rows_processed() const { return rows_processed_; }
  /// The state to save between rows (see filter_state.h for JSON text).
  FilterState state() const;
  /// Resumes from a saved state. Raises InputError naming the field (`filter state: mean: ...`) when
  /// it does not fit the model: wrong sizes, values that are not finite, a covariance that is not
  /// symmetric positive semidefinite.
  void restore(const FilterState& state);

  /// Current mean (filtered after update, predicted after predict).
  const Eigen::VectorXd& mean() const { return mean_; }
  /// Current covariance (its finite part P_* during the exact diffuse phase).
  const Eigen::MatrixXd& covariance() const { return covariance_; }
  /// During the exact diffuse phase (statewise/diffuse.h), the diffuse part P_inf of the covariance:
  /// states and channels it reaches have unbounded variance. Null once every diffuse state is
  /// resolved, and always for models without diffuse states.
  const Eigen::MatrixXd* diffuse_covariance() const { return diffuse_phase_ ? &diffuse_ : nullptr; }
  /// The model the filter runs.
  const StateSpaceModel& model() const { return model_; }

 private:
  // Work matrices for k observed channels, allocated once per k so that no row allocates.
  struct Workspace {
    Eigen::MatrixXd C, R, PCt, S, factor, K, KR, gain_transposed;
    Eigen::VectorXd v, whitened;
  };
  StateSpaceModel model_;
  Transition transition_;  // the model's own, for step()
  Eigen::VectorXd mean_;
  Eigen::MatrixXd covariance_;
  Eigen::MatrixXd identity_minus_gain_, product_, predicted_workspace_;
  Eigen::VectorXd predicted_mean_;
  Eigen::MatrixXd predicted_covariance_;
  std::vector<Workspace> workspaces_;  // index k = number of observed channels
  std::vector<int> observed_index_;
  Eigen::MatrixXd diffuse_;     // P_inf while diffuse_phase_
  bool diffuse_phase_ = false;
  StepStatus diffuse_update(const double* values, InnovationRecord& record);
  std::uint64_t rows_processed_ = 0;
  Eigen::VectorXd last_inputs_;
  Eigen::VectorXd saved_mean_;  // the state before step()'s prediction, to undo it on failure
  Eigen::MatrixXd saved_covariance_;
};

/// Creates an InnovationRecord sized for m channels.
InnovationRecord make_innovation_record(int channels);

}  // namespace statewise
