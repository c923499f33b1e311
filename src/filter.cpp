#include "statewise/filter.h"

#include <cmath>
#include <numbers>
#include <string>

#include "detail/observed_channels.h"
#include "detail/small_cholesky.h"
#include "statewise/diffuse.h"
#include "statewise/error.h"
#include "statewise/filter_state.h"

namespace statewise {

namespace {
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

void symmetrize(Eigen::MatrixXd& matrix) {
  for (Eigen::Index i = 0; i < matrix.rows(); ++i)
    for (Eigen::Index j = i + 1; j < matrix.cols(); ++j) {
      const double average = 0.5 * (matrix(i, j) + matrix(j, i));
      matrix(i, j) = average;
      matrix(j, i) = average;
    }
}

bool all_finite(const Eigen::MatrixXd& matrix) { return matrix.allFinite(); }
}  // namespace

Transition model_transition(const StateSpaceModel& model) { return Transition{model.A, model.B, model.Q}; }

const char* describe(StepStatus status) {
  switch (status) {
    case StepStatus::ok:
      return "ok";
    case StepStatus::singular_innovation_covariance:
      return "the innovation covariance C P C' + R of the observed channels is singular (not positive definite)";
    case StepStatus::not_finite:
      return "the state mean or covariance became NaN or infinite";
  }
  return "unknown status";
}

InnovationRecord make_innovation_record(int channels) {
  InnovationRecord record;
  record.innovation = Eigen::VectorXd::Constant(channels, kNaN);
  record.innovation_sd = Eigen::VectorXd::Constant(channels, kNaN);
  return record;
}

void predict_moments(const Transition& transition, const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance,
                     const double* inputs, Eigen::VectorXd& predicted_mean, Eigen::MatrixXd& predicted_covariance,
                     Eigen::MatrixXd& workspace) {
  // x_pred = A x + B u
  predicted_mean.noalias() = transition.A.lazyProduct(mean);
  if (transition.B.cols() > 0 && inputs != nullptr)
    predicted_mean.noalias() +=
        transition.B.lazyProduct(Eigen::Map<const Eigen::VectorXd>(inputs, transition.B.cols()));
  // P_pred = A P A' + Q
  workspace.noalias() = transition.A.lazyProduct(covariance);
  predicted_covariance.noalias() = workspace.lazyProduct(transition.A.transpose());
  predicted_covariance += transition.Q;
  symmetrize(predicted_covariance);
}

KalmanFilter::KalmanFilter(const StateSpaceModel& model) : model_(model), transition_(model_transition(model)) {
  const Eigen::Index n = model.A.rows();
  const Eigen::Index m = model.C.rows();
  identity_minus_gain_.resize(n, n);
  product_.resize(n, n);
  predicted_workspace_.resize(n, n);
  predicted_mean_.resize(n);
  predicted_covariance_.resize(n, n);
  workspaces_.resize(static_cast<std::size_t>(m) + 1);
  for (Eigen::Index k = 1; k <= m; ++k) {
    Workspace& w = workspaces_[static_cast<std::size_t>(k)];
    w.C.resize(k, n);
    w.R.resize(k, k);
    w.PCt.resize(n, k);
    w.S.resize(k, k);
    w.K.resize(n, k);
    w.KR.resize(n, k);
    w.gain_transposed.resize(k, n);
    w.v.resize(k);
    w.whitened.resize(k);
    w.factor.resize(k, k);
  }
  observed_index_.resize(static_cast<std::size_t>(m));
  saved_mean_.resize(n);
  saved_covariance_.resize(n, n);
  reset();
}

void KalmanFilter::reset() {
  mean_ = model_.initial_mean;
  covariance_ = model_.initial_covariance;
  diffuse_phase_ = model_.has_diffuse_states();
  diffuse_ = initial_diffuse_covariance(model_);
  rows_processed_ = 0;
  last_inputs_ = Eigen::VectorXd::Zero(model_.input_count());
}

void KalmanFilter::set_state(const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance,
                             const Eigen::MatrixXd* diffuse) {
  mean_ = mean;
  covariance_ = covariance;
  diffuse_phase_ = diffuse != nullptr;
  if (diffuse)
    diffuse_ = *diffuse;
  else
    diffuse_.setZero();
}

void KalmanFilter::predict(const Transition& transition, const double* previous_inputs) {
  predict_moments(transition, mean_, covariance_, previous_inputs, predicted_mean_, predicted_covariance_,
                  predicted_workspace_);
  mean_.swap(predicted_mean_);
  covariance_.swap(predicted_covariance_);
  if (diffuse_phase_) {
    // P_inf = A P_inf A' (the diffuse part gets no noise).
    product_.noalias() = transition.A * diffuse_;
    diffuse_.noalias() = product_ * transition.A.transpose();
    symmetrize(diffuse_);
  }
}

StepStatus KalmanFilter::diffuse_update(const double* values, InnovationRecord& record) {
  const int m = static_cast<int>(model_.C.rows());
  // Per-channel innovations against the current mean: unbounded where the prediction has a diffuse part.
  bool any_diffuse = false;
  int present = 0;
  for (int c = 0; c < m; ++c) {
    record.innovation(c) = kNaN;
    record.innovation_sd(c) = kNaN;
    if (std::isnan(values[c])) continue;
    ++present;
    const double reach = model_.C.row(c) * diffuse_ * model_.C.row(c).transpose();
    if (reach > kDiffuseTolerance * model_.C.row(c).squaredNorm()) {
      any_diffuse = true;
      continue;
    }
    record.innovation(c) = values[c] - model_.C.row(c).dot(mean_);
    record.innovation_sd(c) =
        std::sqrt(std::max(0.0, model_.C.row(c) * covariance_ * model_.C.row(c).transpose() + model_.R(c, c)));
  }
  Eigen::VectorXd mean = mean_;
  Eigen::MatrixXd covariance = covariance_, diffuse = diffuse_;
  const UnivariateRowResult row = univariate_update(model_, values, mean, covariance, &diffuse, nullptr);
  if (row.status != StepStatus::ok) return row.status;
  mean_ = mean;
  covariance_ = covariance;
  diffuse_ = diffuse;
  record.observed = any_diffuse ? 0 : present;
  record.nis = any_diffuse || present == 0 ? kNaN : row.nis;
  record.log_likelihood = row.log_likelihood;
  if (diffuse_.cwiseAbs().maxCoeff() <= kDiffuseTolerance) {
    diffuse_phase_ = false;
    diffuse_.setZero();
  }
  return StepStatus::ok;
}

StepStatus KalmanFilter::update(const double* values, InnovationRecord& record) {
  if (diffuse_phase_) return diffuse_update(values, record);
  const int k = detail::begin_measurement_update(values, model_.C.rows(), record, observed_index_);
  if (k == 0) return all_finite(covariance_) && mean_.allFinite() ? StepStatus::ok : StepStatus::not_finite;

  Workspace& w = workspaces_[static_cast<std::size_t>(k)];
  // Rows of C and the block of R for the observed channels; v = y_o - C_o x.
  detail::gather_observed_block(model_.C, model_.R, mean_, values, observed_index_, k, w);
  // S = C P C' + R
  w.PCt.noalias() = covariance_.lazyProduct(w.C.transpose());
  w.S.noalias() = w.C.lazyProduct(w.PCt);
  w.S += w.R;
  symmetrize(w.S);
  // Overflow (values or a transition near the top of the double range) is not a singular S: report
  // it as what it is, so the message does not send the user looking at R.
  if (!w.S.allFinite() || !w.v.allFinite()) return StepStatus::not_finite;
  // Cholesky factor of S in the lower triangle of w.factor.
  w.factor = w.S;
  if (!detail::cholesky_in_place(w.factor)) return StepStatus::singular_innovation_covariance;
  double log_determinant = 0.0;
  for (int a = 0; a < k; ++a) log_determinant += 2.0 * std::log(w.factor(a, a));
  // K' = S^-1 (P C')'
  w.gain_transposed = w.PCt.transpose();
  detail::cholesky_solve_in_place(w.factor, w.gain_transposed);
  w.K = w.gain_transposed.transpose();
  // NIS = v' S^-1 v = |L^-1 v|^2
  w.whitened = w.v;
  detail::lower_solve_in_place(w.factor, w.whitened);
  const double nis = w.whitened.squaredNorm();

  // Joseph form: P = (I - K C) P (I - K C)' + K R K'
  identity_minus_gain_.setIdentity();
  identity_minus_gain_.noalias() -= w.K.lazyProduct(w.C);
  product_.noalias() = identity_minus_gain_.lazyProduct(covariance_);
  Eigen::MatrixXd& updated = predicted_covariance_;  // reused as scratch, sized n×n
  updated.noalias() = product_.lazyProduct(identity_minus_gain_.transpose());
  w.KR.noalias() = w.K.lazyProduct(w.R);
  updated.noalias() += w.KR.lazyProduct(w.K.transpose());
  symmetrize(updated);
  predicted_mean_ = mean_;
  predicted_mean_.noalias() += w.K.lazyProduct(w.v);
  if (!updated.allFinite() || !predicted_mean_.allFinite()) return StepStatus::not_finite;
  covariance_.swap(updated);
  mean_.swap(predicted_mean_);

  for (int a = 0; a < k; ++a) {
    const int ca = observed_index_[static_cast<std::size_t>(a)];
    record.innovation(ca) = w.v(a);
    record.innovation_sd(ca) = std::sqrt(w.S(a, a));
  }
  record.nis = nis;
  // log N(v; 0, S) = -(k log 2π + log det S + v' S^-1 v) / 2
  record.log_likelihood = -0.5 * (k * std::log(2.0 * std::numbers::pi) + log_determinant + nis);
  return StepStatus::ok;
}

namespace {

std::string names_in_parentheses(const std::vector<std::string>& names) {
  std::string text = "(";
  for (std::size_t i = 0; i < names.size(); ++i) text += (i > 0 ? ", " : "") + names[i];
  return text + ")";
}

std::string number_text(double value) {
  if (std::isnan(value)) return "nan";
  return value > 0 ? "inf" : "-inf";
}

}  // namespace

StepStatus KalmanFilter::step(std::span<const double> values, std::span<const double> inputs,
                              InnovationRecord& record) {
  // Check every argument before anything changes, so that a bad row leaves the filter as it was.
  const std::size_t m = model_.observation_names.size(), p = model_.input_names.size();
  const std::string row = "row " + std::to_string(rows_processed_ + 1);
  if (values.size() != m)
    raise_input_error({row, 0, 0, "values"}, "expected " + std::to_string(m) + " channel values " +
                                                 names_in_parentheses(model_.observation_names) + ", got " +
                                                 std::to_string(values.size()));
  if (inputs.size() != p)
    raise_input_error({row, 0, 0, "inputs"}, "expected " + std::to_string(p) + " inputs" +
                                                 (p > 0 ? " " + names_in_parentheses(model_.input_names) : "") +
                                                 ", got " + std::to_string(inputs.size()));
  for (std::size_t c = 0; c < m; ++c)
    if (std::isinf(values[c]))
      raise_input_error({row, 0, 0, "values[" + std::to_string(c) + "]"},
                        "channel \"" + model_.observation_names[c] + "\": expected a finite number or NaN for a missing value, got " +
                            number_text(values[c]));
  for (std::size_t i = 0; i < p; ++i) {
    const SourceLocation where{row, 0, 0, "inputs[" + std::to_string(i) + "]"};
    if (std::isnan(inputs[i]))
      raise_input_error(where, "the input \"" + model_.input_names[i] +
                                   "\" is missing; inputs are known quantities and must be given on every row");
    if (std::isinf(inputs[i]))
      raise_input_error(where, "the input \"" + model_.input_names[i] + "\": expected a finite number, got " +
                                   number_text(inputs[i]));
  }
  if (record.innovation.size() != static_cast<Eigen::Index>(m)) record = make_innovation_record(static_cast<int>(m));

  const bool predicted = rows_processed_ > 0;
  if (predicted) {
    saved_mean_ = mean_;
    saved_covariance_ = covariance_;
    predict(transition_, p > 0 ? last_inputs_.data() : nullptr);
  }
  const StepStatus status = update(values.data(), record);
  if (status != StepStatus::ok) {
    if (predicted) {
      mean_.swap(saved_mean_);
      covariance_.swap(saved_covariance_);
    }
    return status;
  }
  for (std::size_t i = 0; i < p; ++i) last_inputs_(static_cast<Eigen::Index>(i)) = inputs[i];
  ++rows_processed_;
  return StepStatus::ok;
}

FilterState KalmanFilter::state() const { return FilterState{mean_, covariance_, rows_processed_, last_inputs_}; }

void KalmanFilter::restore(const FilterState& state) {
  validate_filter_state(state, model_, "filter state");
  mean_ = state.mean;
  covariance_ = state.covariance;
  rows_processed_ = state.rows_processed;
  last_inputs_ = state.last_inputs;
}

}  // namespace statewise
