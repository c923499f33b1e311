#include "statewise/forward_pass.h"

#include <cmath>
#include <limits>

namespace statewise {

namespace {
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

ConsistencyOptions consistency_options(const StateSpaceModel& model, const ForwardPassOptions& options) {
  ConsistencyOptions result;
  result.ljung_box_lags = options.ljung_box_lags;
  if (options.reject_probability > 0.0) {
    result.gate_probability = options.reject_probability;
    result.gate_per_channel = OutlierGate(model, options.reject_probability).mode() == GateMode::per_channel;
  }
  return result;
}
}  // namespace

const char* numerics_name(Numerics numerics) {
  return numerics == Numerics::square_root ? "square-root" : "plain";
}

namespace {
// has_lost_definiteness with a caller-owned n×n workspace, so that the filter's rows do not allocate.
bool lost_definiteness(const Eigen::MatrixXd& covariance, Eigen::MatrixXd& lower) {
  // Cholesky elimination that tolerates semidefinite matrices (Golub and Van Loan, Matrix Computations,
  // 4th ed., 2013, section 4.2.8, without pivoting): a pivot within ±sqrt(eps) P_jj of zero is taken as
  // zero and its column dropped; one clearly below zero means the matrix is indefinite.
  const Eigen::Index n = covariance.rows();
  const double tolerance = std::sqrt(std::numeric_limits<double>::epsilon());
  lower.setZero(n, n);
  for (Eigen::Index j = 0; j < n; ++j) {
    const double variance = covariance(j, j);
    if (!(variance >= 0.0) || !std::isfinite(variance)) return true;
    double pivot = variance;
    for (Eigen::Index k = 0; k < j; ++k) pivot -= lower(j, k) * lower(j, k);
    if (pivot < -tolerance * variance) return true;
    if (pivot <= tolerance * variance) continue;  // zero within rounding: a semidefinite direction
    const double root = std::sqrt(pivot);
    lower(j, j) = root;
    for (Eigen::Index i = j + 1; i < n; ++i) {
      double value = covariance(i, j);
      for (Eigen::Index k = 0; k < j; ++k) value -= lower(i, k) * lower(j, k);
      lower(i, j) = value / root;
    }
  }
  return false;
}
}  // namespace

bool has_lost_definiteness(const Eigen::MatrixXd& covariance) {
  Eigen::MatrixXd workspace;
  return lost_definiteness(covariance, workspace);
}

ForwardPass::ForwardPass(const StateSpaceModel& model, ForwardPassOptions options)
    : model_(model),
      options_(options),
      plain_(model),
      stuck_(static_cast<std::size_t>(model.channel_count()), options.stuck_run_length),
      accumulator_(model.observation_names),
      monitor_(model.observation_names, consistency_options(model, options)),
      record_(make_innovation_record(model.channel_count())),
      output_record_(make_innovation_record(model.channel_count())),
      used_(static_cast<std::size_t>(model.channel_count()), kNaN),
      rejected_(static_cast<std::size_t>(model.channel_count()), 0) {
  if (options.numerics == Numerics::square_root) root_ = std::make_unique<SquareRootKalmanFilter>(model);
  if (options.reject_probability > 0.0) gate_.emplace(model, options.reject_probability);
  rejections_.per_channel.assign(static_cast<std::size_t>(model.channel_count()), 0);
}

const Eigen::VectorXd& ForwardPass::mean() const { return root_ ? root_->mean() : plain_.mean(); }

const Eigen::MatrixXd& ForwardPass::covariance() const {
  return root_ ? root_->covariance() : plain_.covariance();
}

ForwardPassState ForwardPass::state() const {
  ForwardPassState state;
  state.numerics = numerics();
  state.mean = mean();
  state.covariance = covariance();
  if (root_) state.factor = root_->factor();
  if (const Eigen::MatrixXd* diffuse = diffuse_covariance()) state.diffuse = *diffuse;
  state.fully_rejected_rows = fully_rejected_rows_;
  return state;
}

void ForwardPass::resume(const ForwardPassState& state) {
  if (state.numerics == Numerics::square_root) {
    if (!root_) root_ = std::make_unique<SquareRootKalmanFilter>(model_);
    root_->set_factor(state.mean, state.factor);
  } else {
    root_.reset();
    plain_.set_state(state.mean, state.covariance, state.diffuse.size() > 0 ? &state.diffuse : nullptr);
  }
  fully_rejected_rows_ = state.fully_rejected_rows;
}

void ForwardPass::predict(const Transition& transition, const double* previous_inputs) {
  if (root_)
    root_->predict(transition, previous_inputs);
  else
    plain_.predict(transition, previous_inputs);
}

StepStatus ForwardPass::update_engine(const double* values, InnovationRecord& record) {
  if (root_) return root_->update(values, record);
  // The plain form; keep the prediction so that the row can be redone in square-root form.
  saved_mean_ = plain_.mean();
  saved_covariance_ = plain_.covariance();
  StepStatus status = plain_.update(values, record);
  std::string reason;
  if (status != StepStatus::ok) {
    reason = describe(status);
  } else if (lost_definiteness(plain_.covariance(), definiteness_workspace_)) {
    reason = "the updated covariance lost positive definiteness";
  } else {
    return status;
  }
  // Automatic fallback: the square-root form from this row's prediction (docs/algorithms.md). A
  // prediction that has itself lost definiteness by rounding is factored with its negative part dropped.
  root_ = std::make_unique<SquareRootKalmanFilter>(model_);
  root_->set_state(saved_mean_, saved_covariance_);
  switch_ = NumericsSwitch{rows_ + 1, line_, reason};
  return root_->update(values, record);
}

StepStatus ForwardPass::update(const double* values, std::size_t line) {
  const auto m = static_cast<std::size_t>(model_.channel_count());
  line_ = line;
  stuck_.add(values, line);
  const double* used = values;
  row_rejections_ = 0;
  if (gate_) {
    int observed = 0;
    for (std::size_t c = 0; c < m; ++c) observed += !std::isnan(values[c]);
    if (observed > 0 && fully_rejected_rows_ >= kReacquireAfterRows) {
      // Re-acquisition (docs/algorithms.md): the filter has lost the signal. Like a tracker that
      // re-initializes a lost track, it keeps its mean, takes on the model's initial uncertainty again
      // (P + P0) and lets this row in ungated.
      const Eigen::MatrixXd widened = covariance() + model_.initial_covariance;
      const Eigen::VectorXd current = mean();
      if (root_)
        root_->set_state(current, widened);
      else
        plain_.set_state(current, widened);
      decision_.kept.assign(values, values + m);
      decision_.innovation.setConstant(static_cast<Eigen::Index>(m),
                                       std::numeric_limits<double>::quiet_NaN());
      decision_.innovation_sd.setConstant(static_cast<Eigen::Index>(m),
                                          std::numeric_limits<double>::quiet_NaN());
      decision_.rejected.assign(m, 0);
      decision_.rejected_count = 0;
      fully_rejected_rows_ = 0;
      if (rejections_.reacquired++ == 0) rejections_.first_reacquired_line = line;
    } else {
      gate_->screen(values, mean(), covariance(), decision_);
      if (observed > 0)
        fully_rejected_rows_ = decision_.rejected_count == observed ? fully_rejected_rows_ + 1 : 0;
    }
    used = decision_.kept.data();
    row_rejections_ = static_cast<std::size_t>(decision_.rejected_count);
  }
  const StepStatus status = update_engine(used, record_);
  if (status != StepStatus::ok) return status;
  ++rows_;

  used_.assign(used, used + m);
  output_record_ = record_;
  if (gate_) {
    rejected_ = decision_.rejected;
    if (row_rejections_ > 0) ++rejections_.row_count;
    for (std::size_t c = 0; c < m; ++c) {
      if (decision_.rejected[c] == 0) continue;
      const auto index = static_cast<Eigen::Index>(c);
      output_record_.innovation(index) = decision_.innovation(index);
      output_record_.innovation_sd(index) = decision_.innovation_sd(index);
      ++rejections_.count;
      ++rejections_.per_channel[c];
      if (rejections_.first.size() < kRejectionsListed)
        rejections_.first.push_back(RejectedValue{
            rows_, line, c, values[c], decision_.innovation(index) / decision_.innovation_sd(index)});
    }
  }
  accumulator_.add(record_);
  monitor_.add(record_, gate_ ? rejected_.data() : nullptr);
  return StepStatus::ok;
}

}  // namespace statewise
