#pragma once
/// \file forward_pass.h
/// The forward pass of `filter`, `smooth` and `diagnose`: one filter step per log row with the
/// chosen numerics (plain, switching to the square-root form automatically when the plain update
/// breaks down, or square-root throughout), the optional outlier gate, stuck-sensor detection, and
/// the innovation statistics and consistency tests of the run. The engines are in filter.h and
/// square_root_filter.h, the gate and the detector in screening.h, the tests in consistency.h.

#include <Eigen/Core>
#include <cstddef>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "statewise/consistency.h"
#include "statewise/diagnostics.h"
#include "statewise/filter.h"
#include "statewise/model.h"
#include "statewise/screening.h"
#include "statewise/square_root_filter.h"

namespace statewise {

/// Which covariance arithmetic the filter uses.
enum class Numerics {
  plain,  ///< the Joseph-form covariance update (filter.h), switching to square_root when it breaks down
  square_root,  ///< the square-root array form (square_root_filter.h) from the first row
};

/// "plain" or "square-root".
const char* numerics_name(Numerics numerics);

/// Options of a forward pass.
struct ForwardPassOptions {
  Numerics numerics = Numerics::plain;  ///< see Numerics
  /// Probability P of the outlier gate, in (0, 1) (e.g. 0.999); 0 = no gate.
  double reject_probability = 0.0;
  /// Identical observations in a row that count as a stuck sensor, >= 2; 0 = no detection.
  std::size_t stuck_run_length = kDefaultStuckRunLength;
  /// Ljung–Box lags (ConsistencyOptions::ljung_box_lags); 0 = automatic.
  int ljung_box_lags = 0;
};

/// Where the plain form broke down and the pass switched to the square-root form.
struct NumericsSwitch {
  std::size_t row = 0;   ///< 1-based data row
  std::size_t line = 0;  ///< input line of that row
  std::string reason;    ///< what went wrong, in words
};

/// One rejected value, for reports.
struct RejectedValue {
  std::size_t row = 0;      ///< 1-based data row
  std::size_t line = 0;     ///< input line
  std::size_t channel = 0;  ///< channel index (model order)
  double value = 0.0;       ///< the measured value
  double z = 0.0;           ///< its standardized innovation against the prediction
};

/// Most rejected values a pass lists one by one (the rest are counted).
inline constexpr std::size_t kRejectionsListed = 20;

/// Rows in a row on which the gate rejected every observed value, after which the filter re-acquires
/// the signal: it adds the model's initial covariance to its covariance and takes the next row with
/// data without the gate. A filter that has lost the signal (after a jump in the data, or after
/// following a stuck sensor) predicts so far off that every value fails the gate and nothing would
/// bring it back; at P = 0.999 ten such rows in a row do not happen by chance.
inline constexpr std::size_t kReacquireAfterRows = 10;

/// The values the gate rejected.
struct RejectionLog {
  std::size_t count = 0;                 ///< all rejected values
  std::vector<std::size_t> per_channel;  ///< rejected values per channel
  std::size_t row_count = 0;             ///< rows with at least one rejected value
  std::vector<RejectedValue> first;      ///< the first kRejectionsListed, in order
  /// Re-acquisitions: rows taken without the gate, with the covariance widened by the initial
  /// covariance, after kReacquireAfterRows rows in a row with every value rejected.
  std::size_t reacquired = 0;
  std::size_t first_reacquired_line = 0;  ///< input line of the first such row (0 = none)
};

/// What a ForwardPass carries from one row to the next that its output depends on: all it takes to
/// stop after a row and resume later with the very rows an uninterrupted pass would give. The
/// statistics of the run (accumulator, consistency tests, stuck runs, rejection log) are not part of
/// it: a resumed pass reports on its own rows.
struct ForwardPassState {
  Numerics numerics = Numerics::plain;  ///< the engine in use (plain may have switched to square_root)
  Eigen::VectorXd mean;                 ///< n: the mean after the last row
  Eigen::MatrixXd covariance;           ///< n×n: its covariance (the finite part during the diffuse phase)
  Eigen::MatrixXd factor;               ///< n×n lower-triangular S with S S' = covariance; square_root only
  Eigen::MatrixXd diffuse;              ///< n×n diffuse part P_inf while the exact diffuse phase lasts; else empty
  std::size_t fully_rejected_rows = 0;  ///< rows in a row with every observed value rejected (the gate)
};

/// True when a covariance has clearly lost positive semidefiniteness: a negative or non-finite
/// variance, or a pivot of its Cholesky elimination below -sqrt(machine epsilon) times that variance
/// (pivots within that band are rounding of a semidefinite matrix and count as zero).
bool has_lost_definiteness(const Eigen::MatrixXd& covariance);

/// Runs the filter row by row. Per row t: `if (t > 0) pass.predict(...); pass.update(values, line);`
/// then read mean(), covariance(), record(), used_values() and rejected().
class ForwardPass {
 public:
  /// Prepares a pass at the model's initial prior.
  ForwardPass(const StateSpaceModel& model, ForwardPassOptions options);
  ForwardPass(const ForwardPass&) = delete;
  ForwardPass& operator=(const ForwardPass&) = delete;

  /// Moves the state one transition ahead (see KalmanFilter::predict).
  void predict(const Transition& transition, const double* previous_inputs);

  /// Screens (stuck detection, gate) and updates with one row of m values (NaN = missing) read from
  /// input line `line`, then adds the row to the statistics. After kReacquireAfterRows rows in a row
  /// with every value rejected, the covariance is widened by the initial covariance and the next row
  /// with data is taken without the gate. With Numerics::plain, a failed update or
  /// a covariance that lost definiteness makes the pass switch to the square-root form from the
  /// row's prediction and redo the row; only when that fails too is the status returned. On a non-ok
  /// status the row is not added to the statistics.
  StepStatus update(const double* values, std::size_t line);

  /// The state after the last row, to save and resume() from.
  ForwardPassState state() const;
  /// Continues from a saved state (of a pass with the same model and options). The numerics may
  /// differ from the options' (a plain pass that switched to square-root stays switched).
  void resume(const ForwardPassState& state);

  /// Current mean.
  const Eigen::VectorXd& mean() const;
  /// Current covariance.
  const Eigen::MatrixXd& covariance() const;
  /// The last row's innovations for output: the filter's, plus, for rejected values, their innovation
  /// against the prediction (GateDecision::innovation).
  const InnovationRecord& record() const { return output_record_; }
  /// The diffuse part P_inf of the covariance while the exact diffuse phase lasts, else null
  /// (see KalmanFilter::diffuse_covariance).
  const Eigen::MatrixXd* diffuse_covariance() const { return root_ ? nullptr : plain_.diffuse_covariance(); }
  /// The last row's values as the filter used them: NaN where missing or rejected.
  const double* used_values() const { return used_.data(); }
  /// The last row's m rejection flags (1 = rejected); all 0 without a gate.
  const unsigned char* rejected() const { return rejected_.data(); }
  /// True when the last row had at least one rejected value.
  bool row_had_rejection() const { return row_rejections_ > 0; }

  /// The numerics in use now.
  Numerics numerics() const { return root_ ? Numerics::square_root : Numerics::plain; }
  /// The switch to the square-root form, when it happened.
  const std::optional<NumericsSwitch>& numerics_switch() const { return switch_; }
  /// The gate, when one is used.
  const OutlierGate* gate() const { return gate_ ? &*gate_ : nullptr; }

  /// Innovation statistics of the rows so far (the report's `channels` and `nis`).
  const InnovationAccumulator& accumulator() const { return accumulator_; }
  /// Consistency tests of the rows so far.
  ConsistencySummary consistency() const { return monitor_.summary(); }
  /// Rejected values so far.
  const RejectionLog& rejections() const { return rejections_; }
  /// Stuck runs so far.
  const StuckValueDetector& stuck() const { return stuck_; }
  /// Rows updated so far.
  std::size_t rows() const { return rows_; }
  /// The options.
  const ForwardPassOptions& options() const { return options_; }

 private:
  StepStatus update_engine(const double* values, InnovationRecord& record);
  StateSpaceModel model_;
  ForwardPassOptions options_;
  KalmanFilter plain_;
  std::unique_ptr<SquareRootKalmanFilter> root_;
  std::optional<NumericsSwitch> switch_;
  std::optional<OutlierGate> gate_;
  GateDecision decision_;
  StuckValueDetector stuck_;
  InnovationAccumulator accumulator_;
  ConsistencyMonitor monitor_;
  InnovationRecord record_, output_record_;
  std::vector<double> used_;
  std::vector<unsigned char> rejected_;
  RejectionLog rejections_;
  Eigen::VectorXd saved_mean_;
  Eigen::MatrixXd saved_covariance_, definiteness_workspace_;
  std::size_t rows_ = 0;
  std::size_t row_rejections_ = 0;
  std::size_t fully_rejected_rows_ = 0;  // consecutive rows with every observed value rejected
  std::size_t line_ = 0;
};

}  // namespace statewise
