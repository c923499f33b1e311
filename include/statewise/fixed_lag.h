#pragma once
/// \file fixed_lag.h
/// An online fixed-lag smoother: fed the forward filter's moments row by row, it hands out the
/// smoothed moments of row t-K as soon as row t has been filtered, that is the estimate of the state
/// at row t-K given rows 1..t (Anderson and Moore, Optimal Filtering, 1979, chapter 7; Särkkä,
/// Bayesian Filtering and Smoothing, 2013, section 8). It keeps the last K+1 rows in a ring and runs
/// the Rauch–Tung–Striebel backward recursion (smoother.h) over them for every new row, which costs
/// O(K n^3) per row and memory for K+1 rows, whatever the length of the log. At the end of the log,
/// flush() hands out the last K rows, which are then the fixed-interval smoother's.

#include <cstddef>
#include <vector>

#include <Eigen/Core>

#include "statewise/filter.h"
#include "statewise/smoother.h"

namespace statewise {

/// The fixed-lag smoother for n states and a lag of K rows. Use:
/// `for each row t: filter it; if (smoother.push(...)) use(smoother.row(), smoother.mean(), smoother.covariance());`
/// then `while (smoother.flush()) use(...)`; after each call, look at status().
class FixedLagSmoother {
 public:
  /// A smoother for `states` states (n >= 1) that hands out row t-`lag` when row t arrives. Lag 0 hands
  /// out the filtered moments unchanged. Memory grows with the rows up to lag+1 of them, then stays.
  FixedLagSmoother(int states, std::size_t lag);

  /// Adds the next row's filtered mean x_{t|t} (n) and covariance P_{t|t} (n×n). For every row but the
  /// first, `transition` and `previous_inputs` (p values of the previous row; may be null when p = 0)
  /// are those the filter used to predict this row from the previous one; for the first row they are
  /// ignored (may be null). Returns true when a row is ready: row() is then this row's index minus the
  /// lag, and mean() and covariance() are its smoothed moments given the rows so far. Returns false
  /// while fewer than lag+1 rows have arrived, and when the backward sweep failed (status().ok false).
  bool push(const Transition* transition, const double* previous_inputs, const Eigen::VectorXd& filtered_mean,
            const Eigen::MatrixXd& filtered_covariance);

  /// At the end of the log, hands out the next row not handed out yet (the rows after the last one
  /// push() handed out, in order), smoothed given every row: the fixed-interval (RTS) smoother's
  /// moments. Returns false when none is left, or when the backward sweep failed (status().ok false).
  /// Call it until it returns false; push() must not be called after it.
  bool flush();

  /// 0-based index of the row handed out by the last successful push() or flush().
  std::size_t row() const { return row_; }
  /// Its smoothed mean, n.
  const Eigen::VectorXd& mean() const { return mean_; }
  /// Its smoothed covariance, n×n, symmetric.
  const Eigen::MatrixXd& covariance() const { return covariance_; }

  /// The lag K.
  std::size_t lag() const { return lag_; }
  /// Rows pushed so far.
  std::size_t rows() const { return rows_; }
  /// ok = false with the 0-based row and a message when a smoothed mean or covariance became NaN or
  /// infinite; pseudo_inverse_rows counts rows whose P_{t+1|t} was singular (see rts_smooth).
  const SmoothStatus& status() const { return status_; }

 private:
  // One row of the window: its filtered moments and, once the next row has arrived, its gain.
  struct Slot {
    Eigen::VectorXd filtered_mean;
    Eigen::MatrixXd filtered_covariance;
    SmootherGain gain;
  };
  Slot& slot(std::size_t row) { return slots_[row % ring_size_]; }
  bool fail(std::size_t row);

  std::size_t lag_;
  std::size_t ring_size_;    // lag + 1 (the largest size_t for the largest lag)
  std::vector<Slot> slots_;  // ring of the last lag+1 rows: row r lives in slots_[r % ring_size_]
  std::size_t rows_ = 0;
  std::size_t next_row_ = 0;  // the next row to hand out
  bool flushing_ = false;
  SmoothStatus status_;
  SmootherWorkspace workspace_;
  Eigen::VectorXd mean_, next_mean_;
  Eigen::MatrixXd covariance_, next_covariance_;
  std::size_t row_ = 0;
};

}  // namespace statewise
