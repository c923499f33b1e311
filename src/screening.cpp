#include "statewise/screening.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "detail/small_cholesky.h"
#include "statewise/statistics.h"

namespace statewise {

namespace {
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

bool is_diagonal(const Eigen::MatrixXd& matrix) {
  for (Eigen::Index i = 0; i < matrix.rows(); ++i)
    for (Eigen::Index j = 0; j < matrix.cols(); ++j)
      if (i != j && matrix(i, j) != 0.0) return false;
  return true;
}
}  // namespace

OutlierGate::OutlierGate(const StateSpaceModel& model, double probability)
    : model_(model),
      probability_(probability),
      mode_(is_diagonal(model.R) ? GateMode::per_channel : GateMode::joint) {
  const int m = model.channel_count();
  const Eigen::Index n = model.state_count();
  thresholds_.assign(static_cast<std::size_t>(m) + 1, kNaN);
  for (int k = 1; k <= m; ++k) thresholds_[static_cast<std::size_t>(k)] = chi_square_quantile(probability, k);
  mean_.resize(n);
  gain_.resize(n);
  row_times_covariance_.resize(n);
  covariance_.resize(n, n);
  observed_.resize(static_cast<std::size_t>(m));
}

void OutlierGate::screen(const double* values, const Eigen::VectorXd& mean, const Eigen::MatrixXd& covariance,
                         GateDecision& decision) {
  const int m = model_.channel_count();
  decision.kept.assign(values, values + m);
  decision.rejected.assign(static_cast<std::size_t>(m), 0);
  decision.innovation.setConstant(m, kNaN);
  decision.innovation_sd.setConstant(m, kNaN);
  decision.rejected_count = 0;
  auto reject = [&](int c) {
    decision.kept[static_cast<std::size_t>(c)] = kNaN;
    decision.rejected[static_cast<std::size_t>(c)] = 1;
    ++decision.rejected_count;
    // Marginal innovation against the prediction, as the table reports accepted values.
    const double variance = model_.C.row(c).dot(covariance * model_.C.row(c).transpose()) + model_.R(c, c);
    decision.innovation(c) = values[c] - model_.C.row(c).dot(mean);
    decision.innovation_sd(c) = std::sqrt(std::max(variance, 0.0));
  };

  if (mode_ == GateMode::per_channel) {
    // Sequential scalar updates (with a diagonal R the joint update equals the channels' updates one
    // after another: e.g. D. Simon, Optimal State Estimation, 2006, section 6.1). Each channel is tested
    // against the state updated with the accepted channels before it:
    //   s = c P c' + r,  e = y - c x,  reject when e²/s > chi2_P(1);  else K = P c'/s, x += K e, P -= K (c
    //   P).
    mean_ = mean;
    covariance_ = covariance;
    for (int c = 0; c < m; ++c) {
      if (std::isnan(values[c])) continue;
      row_times_covariance_.noalias() = covariance_.transpose() * model_.C.row(c).transpose();  // (c P)'
      const double s = model_.C.row(c).dot(row_times_covariance_) + model_.R(c, c);
      const double e = values[c] - model_.C.row(c).dot(mean_);
      if (!(s > 0.0) || !std::isfinite(s)) continue;  // cannot be tested; the filter decides
      if (e * e / s > thresholds_[1]) {
        reject(c);
        continue;
      }
      gain_ = row_times_covariance_ / s;
      mean_.noalias() += gain_ * e;
      covariance_.noalias() -= gain_ * row_times_covariance_.transpose();
    }
    return;
  }

  // Joint: v' S^-1 v of all observed channels against chi2_P(k).
  int k = 0;
  for (int c = 0; c < m; ++c)
    if (!std::isnan(values[c])) observed_[static_cast<std::size_t>(k++)] = c;
  if (k == 0) return;
  joint_C_.resize(k, model_.state_count());
  joint_S_.resize(k, k);
  joint_v_.resize(k);
  for (int a = 0; a < k; ++a) {
    const int ca = observed_[static_cast<std::size_t>(a)];
    joint_C_.row(a) = model_.C.row(ca);
    joint_v_(a) = values[ca] - model_.C.row(ca).dot(mean);
  }
  joint_S_.noalias() = joint_C_ * covariance * joint_C_.transpose();
  for (int a = 0; a < k; ++a)
    for (int b = 0; b < k; ++b)
      joint_S_(a, b) +=
          model_.R(observed_[static_cast<std::size_t>(a)], observed_[static_cast<std::size_t>(b)]);
  if (!detail::cholesky_in_place(joint_S_)) return;  // cannot be tested; the filter decides
  detail::lower_solve_in_place(joint_S_, joint_v_);
  if (joint_v_.squaredNorm() > thresholds_[static_cast<std::size_t>(k)])
    for (int a = 0; a < k; ++a) reject(observed_[static_cast<std::size_t>(a)]);
}

StuckValueDetector::StuckValueDetector(std::size_t channels, std::size_t run_length)
    : run_length_(run_length), current_(channels) {
  for (std::size_t c = 0; c < channels; ++c) current_[c].channel = c;
}

void StuckValueDetector::add(const double* values, std::size_t line) {
  ++rows_;
  if (run_length_ == 0) return;
  for (StuckRun& run : current_) {
    const double value = values[run.channel];
    if (std::isnan(value)) continue;
    if (run.count > 0 && value == run.value) {
      ++run.count;
      run.last_row = rows_;
      run.last_line = line;
      continue;
    }
    if (run.count >= run_length_) {
      if (finished_.size() < kStuckRunsKept) finished_.push_back(run);
      ++finished_count_;
    }
    run.value = value;
    run.count = 1;
    run.first_row = run.last_row = rows_;
    run.first_line = run.last_line = line;
  }
}

std::vector<StuckRun> StuckValueDetector::runs() const {
  std::vector<StuckRun> runs = finished_;
  for (const StuckRun& run : current_)
    if (run_length_ > 0 && run.count >= run_length_ && runs.size() < kStuckRunsKept) runs.push_back(run);
  std::stable_sort(runs.begin(), runs.end(),
                   [](const StuckRun& a, const StuckRun& b) { return a.first_row < b.first_row; });
  return runs;
}

std::size_t StuckValueDetector::run_count() const {
  std::size_t count = finished_count_;
  for (const StuckRun& run : current_)
    if (run_length_ > 0 && run.count >= run_length_) ++count;
  return count;
}

}  // namespace statewise
