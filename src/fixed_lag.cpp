#include "statewise/fixed_lag.h"

#include <limits>
#include <utility>

namespace statewise {

// Fixed-lag smoothing by a backward sweep over a sliding window (Anderson and Moore, Optimal
// Filtering, 1979, section 7.3; Särkkä, Bayesian Filtering and Smoothing, 2013, section 8): the
// smoothed moments of row t-K given rows 1..t follow from the filtered moments of rows t-K..t alone,
// because the RTS recursion (Rauch, Tung and Striebel 1965) for row s uses only row s's filtered
// moments, its gain and row s+1's smoothed moments, and the last row's smoothed moments are its
// filtered ones. The gain J_s depends on nothing after row s+1's prediction, so it is computed once,
// when row s+1 arrives; each sweep then costs K gain applications, O(K n^3).

FixedLagSmoother::FixedLagSmoother(int states, std::size_t lag)
    : lag_(lag),
      ring_size_(lag == std::numeric_limits<std::size_t>::max() ? lag : lag + 1),
      mean_(states),
      next_mean_(states),
      covariance_(states, states),
      next_covariance_(states, states) {}

bool FixedLagSmoother::fail(std::size_t row) {
  status_.ok = false;
  status_.row = row;
  status_.message = "the smoothed mean or covariance became NaN or infinite";
  return false;
}

bool FixedLagSmoother::push(const Transition* transition, const double* previous_inputs,
                            const Eigen::VectorXd& filtered_mean, const Eigen::MatrixXd& filtered_covariance) {
  if (!status_.ok || flushing_) return false;
  const std::size_t t = rows_;
  if (t > 0 && lag_ > 0) {
    Slot& previous = slot(t - 1);
    if (!compute_smoother_gain(*transition, previous.filtered_mean, previous.filtered_covariance, previous_inputs,
                               previous.gain, workspace_))
      ++status_.pseudo_inverse_rows;
  }
  if (slots_.size() < ring_size_ && slots_.size() == t) slots_.emplace_back();  // warm-up
  Slot& current = slot(t);
  current.filtered_mean = filtered_mean;
  current.filtered_covariance = filtered_covariance;
  rows_ = t + 1;
  if (t < lag_) return false;

  const std::size_t ready = t - lag_;
  if (lag_ == 0) {
    mean_ = filtered_mean;
    covariance_ = filtered_covariance;
  } else {
    // Backward from row t, whose smoothed moments given rows 1..t are its filtered ones.
    next_mean_ = current.filtered_mean;
    next_covariance_ = current.filtered_covariance;
    for (std::size_t s = t; s-- > ready;) {
      const Slot& row = slot(s);
      if (!apply_smoother_gain(row.gain, row.filtered_mean, row.filtered_covariance, next_mean_, next_covariance_,
                               mean_, covariance_, workspace_))
        return fail(s);
      if (s > ready) {
        mean_.swap(next_mean_);
        covariance_.swap(next_covariance_);
      }
    }
  }
  row_ = ready;
  next_row_ = ready + 1;
  return true;
}

bool FixedLagSmoother::flush() {
  if (!status_.ok || next_row_ >= rows_) return false;
  if (!flushing_) {
    // One backward sweep over the rows still held, in place, exactly as rts_smooth does it over a
    // whole track: these rows' moments given every row.
    flushing_ = true;
    for (std::size_t s = rows_ - 1; s-- > next_row_;) {
      Slot& row = slot(s);
      const Slot& next = slot(s + 1);
      next_mean_ = row.filtered_mean;  // the filtered moments, kept while the slot takes the smoothed ones
      next_covariance_ = row.filtered_covariance;
      if (!apply_smoother_gain(row.gain, next_mean_, next_covariance_, next.filtered_mean, next.filtered_covariance,
                               row.filtered_mean, row.filtered_covariance, workspace_))
        return fail(s);
    }
  }
  const Slot& row = slot(next_row_);
  mean_ = row.filtered_mean;
  covariance_ = row.filtered_covariance;
  row_ = next_row_++;
  return true;
}

}  // namespace statewise
