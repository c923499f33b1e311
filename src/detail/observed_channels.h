#pragma once
// The first part of a measurement update shared by KalmanFilter and SquareRootKalmanFilter: mark
// every channel of the step's record as not yet innovated, list the channels that carry a value, and
// gather their rows of C, block of R and innovations v = y_o - C_o x into a workspace.

#include <cmath>
#include <cstddef>
#include <limits>
#include <vector>

#include <Eigen/Core>

#include "statewise/filter.h"

namespace statewise::detail {

// Sets every innovation and innovation standard deviation of `record` to NaN, its NIS to NaN and its
// log-likelihood to 0; writes the indices of the channels whose value is not NaN to the front of
// `observed` (sized to the channel count) and returns how many there are, also stored in
// record.observed.
inline int begin_measurement_update(const double* values, Eigen::Index channels, InnovationRecord& record,
                                    std::vector<int>& observed) {
  constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
  int count = 0;
  for (int c = 0; c < static_cast<int>(channels); ++c) {
    record.innovation(c) = kNaN;
    record.innovation_sd(c) = kNaN;
    if (!std::isnan(values[c])) observed[static_cast<std::size_t>(count++)] = c;
  }
  record.observed = count;
  record.nis = kNaN;
  record.log_likelihood = 0.0;
  return count;
}

// Fills workspace.C (rows of C), workspace.R (block of R) and workspace.v (innovations against
// `mean`) for the first `count` channels of `observed`; the workspace is sized for `count` channels.
template <class Workspace>
void gather_observed_block(const Eigen::MatrixXd& C, const Eigen::MatrixXd& R, const Eigen::VectorXd& mean,
                           const double* values, const std::vector<int>& observed, int count,
                           Workspace& workspace) {
  for (int a = 0; a < count; ++a) {
    const int channel = observed[static_cast<std::size_t>(a)];
    workspace.C.row(a) = C.row(channel);
    for (int b = 0; b < count; ++b) workspace.R(a, b) = R(channel, observed[static_cast<std::size_t>(b)]);
    workspace.v(a) = values[channel] - C.row(channel).dot(mean);
  }
}

}  // namespace statewise::detail
