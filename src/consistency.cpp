#include "statewise/consistency.h"

#include <algorithm>
#include <cmath>
#include <limits>

namespace statewise {

namespace {
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr int kLargestLagCount = 100;

// Two-sided p-value of a chi-square statistic: 2 min(P(X <= x), P(X > x)), at most 1.
double two_sided_chi_square(double statistic, double dof) {
  const double lower = chi_square_cdf(statistic, dof);
  const double upper = chi_square_survival(statistic, dof);
  return std::min(1.0, 2.0 * std::min(lower, upper));
}

// Two-sided p-value of a deviation from its expectation with the given variance, normal approximation.
double two_sided_normal(double deviation, double variance) {
  if (!(variance > 0.0)) return kNaN;
  return 2.0 * normal_cdf(-std::abs(deviation) / std::sqrt(variance));
}
}  // namespace

ConsistencyMonitor::ConsistencyMonitor(std::vector<std::string> channel_names, ConsistencyOptions options)
    : names_(std::move(channel_names)),
      channels_(names_.size()),
      lags_kept_(options.ljung_box_lags > 0 ? std::min(options.ljung_box_lags, kLargestLagCount)
                                            : kAutomaticLagLimit),
      fixed_lags_(options.ljung_box_lags > 0 ? std::min(options.ljung_box_lags, kLargestLagCount) : 0) {
  const auto lags = static_cast<std::size_t>(lags_kept_);
  for (Channel& channel : channels_) {
    channel.recent.assign(lags, kNaN);
    channel.product_sum.assign(lags, 0.0);
    channel.lead_sum.assign(lags, 0.0);
    channel.lag_sum.assign(lags, 0.0);
    channel.pairs.assign(lags, 0);
  }
  // The per-step NIS of k channels is chi-square(k) under the model; its two-sided 95% interval.
  const std::size_t m = names_.size();
  step_lower_.assign(m + 1, kNaN);
  step_upper_.assign(m + 1, kNaN);
  for (std::size_t k = 1; k <= m; ++k) {
    const auto [lower, upper] = chi_square_interval(static_cast<double>(k), 0.95);
    step_lower_[k] = lower;
    step_upper_[k] = upper;
  }
  // Moments of z² (one value) and of NIS_t (k values) under the model. Without a gate: z² is
  // chi-square(1) (mean 1, variance 2) and NIS_t chi-square(k). Behind a gate the accepted values are
  // truncated. For X ~ chi-square(k) kept when X < q, the identity x f_k(x) = k f_{k+2}(x) of the
  // chi-square densities gives E[X] = k F_{k+2}(q) / F_k(q) and E[X²] = k (k+2) F_{k+4}(q) / F_k(q)
  // (first principles). A per-channel gate truncates each sequential standardized innovation e at
  // |e| < sqrt(q_1); the e are independent, and a marginal z is a unit combination of them, so
  // E[z²] = E[e²] and NIS_t, a sum of k such e², has k times the mean and variance. A joint gate
  // truncates the whitened vector w ~ N(0, I_k) to |w|² < q_k; by its spherical symmetry a unit
  // projection z has E[z²] = E|w|²/k and E[z⁴] = 3 E|w|⁴ / (k (k+2)).
  value_mean_.assign(m + 1, 1.0);
  value_variance_.assign(m + 1, 2.0);
  step_mean_.assign(m + 1, 0.0);
  step_variance_.assign(m + 1, 0.0);
  gated_ = options.gate_probability > 0.0 && options.gate_probability < 1.0;
  const double p = options.gate_probability;
  auto truncated = [](double k, double q) {
    const double kept = chi_square_cdf(q, k);
    const double mean = k * chi_square_cdf(q, k + 2.0) / kept;
    const double second = k * (k + 2.0) * chi_square_cdf(q, k + 4.0) / kept;
    return std::pair{mean, second};
  };
  for (std::size_t k = 1; k <= m; ++k) {
    const double dk = static_cast<double>(k);
    if (!gated_) {
      step_mean_[k] = dk;
      step_variance_[k] = 2.0 * dk;
    } else if (options.gate_per_channel) {
      const auto [mean, second] = truncated(1.0, chi_square_quantile(p, 1.0));
      value_mean_[k] = mean;
      value_variance_[k] = second - mean * mean;
      step_mean_[k] = dk * mean;
      step_variance_[k] = dk * (second - mean * mean);
    } else {
      const auto [mean, second] = truncated(dk, chi_square_quantile(p, dk));
      step_mean_[k] = mean;
      step_variance_[k] = second - mean * mean;
      value_mean_[k] = mean / dk;
      value_variance_[k] = 3.0 * second / (dk * (dk + 2.0)) - value_mean_[k] * value_mean_[k];
    }
  }
}

void ConsistencyMonitor::push(Channel& channel, double z, int row_channels) {
  const auto lags = static_cast<std::size_t>(lags_kept_);
  double shifted = kNaN;
  if (!std::isnan(z)) {
    if (!channel.has_shift) {
      channel.shift = z;
      channel.has_shift = true;
      channel.smallest = channel.largest = z;
    }
    shifted = z - channel.shift;
    channel.smallest = std::min(channel.smallest, z);
    channel.largest = std::max(channel.largest, z);
    channel.sum_squares_raw += z * z;
    const auto row_k =
        static_cast<std::size_t>(std::clamp<int>(row_channels, 1, static_cast<int>(names_.size())));
    channel.expected_squares += value_mean_[row_k];
    channel.variance_squares += value_variance_[row_k];
    if (std::abs(z) > 1.96) ++channel.outside;
    // One-pass central moments up to the fourth (Pébay 2008, equations 1.1 and 2.1 with one new value).
    const double before = static_cast<double>(channel.count);
    ++channel.count;
    const double n = static_cast<double>(channel.count);
    const double delta = shifted - channel.mean;
    const double delta_n = delta / n;
    const double delta_n2 = delta_n * delta_n;
    const double term = delta * delta_n * before;
    channel.mean += delta_n;
    channel.m4 +=
        term * delta_n2 * (n * n - 3.0 * n + 3.0) + 6.0 * delta_n2 * channel.m2 - 4.0 * delta_n * channel.m3;
    channel.m3 += term * delta_n * (n - 2.0) - 3.0 * delta_n * channel.m2;
    channel.m2 += term;
    // Lagged sums over the pairs (x_{t-k}, x_t) where both are present.
    for (std::size_t k = 1; k <= lags && k <= channel.position; ++k) {
      const double earlier = channel.recent[(channel.position - k) % lags];
      if (std::isnan(earlier)) continue;
      channel.product_sum[k - 1] += earlier * shifted;
      channel.lead_sum[k - 1] += earlier;
      channel.lag_sum[k - 1] += shifted;
      ++channel.pairs[k - 1];
    }
  }
  channel.recent[channel.position % lags] = shifted;
  ++channel.position;
}

void ConsistencyMonitor::add(const InnovationRecord& record, const unsigned char* rejected) {
  for (std::size_t c = 0; c < channels_.size(); ++c) {
    Channel& channel = channels_[c];
    const auto index = static_cast<Eigen::Index>(c);
    const double z = record.innovation(index) / record.innovation_sd(index);
    if (rejected != nullptr && rejected[c] != 0) {
      ++channel.rejected;
      push(channel, kNaN, 0);
    } else if (!std::isfinite(z)) {
      ++channel.missing;
      push(channel, kNaN, 0);
    } else {
      push(channel, z, record.observed);
    }
  }
  if (record.observed > 0) {
    ++nis_steps_;
    nis_sum_ += record.nis;
    nis_dof_ += record.observed;
    const auto k = static_cast<std::size_t>(record.observed);
    if (k < step_lower_.size()) {
      if (record.nis < step_lower_[k] || record.nis > step_upper_[k]) ++nis_outside_;
      nis_expected_ += step_mean_[k];
      nis_variance_ += step_variance_[k];
    }
  }
}

ChannelConsistency ConsistencyMonitor::finish(const Channel& channel, const std::string& name) const {
  ChannelConsistency result;
  result.name = name;
  result.used = channel.count;
  result.missing = channel.missing;
  result.rejected = channel.rejected;
  const double n = static_cast<double>(channel.count);
  const int lags = fixed_lags_ > 0 ? fixed_lags_ : default_ljung_box_lags(channel.count);
  result.ljung_box = LjungBoxResult{kNaN, lags, lags, kNaN, 0};
  result.jarque_bera = JarqueBeraResult{kNaN, kNaN, kNaN, kNaN, channel.count};
  result.z_mean = result.z_mean_p_value = result.z_mean_square = result.z_mean_square_p_value = kNaN;
  result.fraction_outside_1_96 = result.lag1_autocorrelation = kNaN;
  for (int k = 1; k <= lags; ++k)
    result.ljung_box.pairs_used += channel.pairs[static_cast<std::size_t>(k - 1)];
  if (channel.count == 0) return result;

  result.z_mean = channel.shift + channel.mean;
  result.z_mean_square = channel.sum_squares_raw / n;
  result.fraction_outside_1_96 = static_cast<double>(channel.outside) / n;
  // Under the model sum z² is chi-square with n degrees of freedom (independent N(0, 1) values); behind
  // a gate, a sum of independent truncated values, approximately normal.
  result.z_expected_mean_square = channel.expected_squares / n;
  result.z_mean_square_p_value =
      gated_ ? two_sided_normal(channel.sum_squares_raw - channel.expected_squares, channel.variance_squares)
             : two_sided_chi_square(channel.sum_squares_raw, n);
  // Bias: sqrt(n) mean / sd is approximately N(0, 1) when the z have mean zero, whatever their spread.
  if (channel.count >= 2 && channel.m2 > 0.0) {
    const double sd = std::sqrt(channel.m2 / (n - 1.0));
    result.z_mean_p_value = 2.0 * normal_cdf(-std::abs(result.z_mean) * std::sqrt(n) / sd);
  }
  if (channel.count < 2 || !(channel.smallest < channel.largest) || !(channel.m2 > 0.0) ||
      !std::isfinite(channel.m4))
    return result;

  // Autocorrelations exactly as statistics.cpp's estimator: mean and lag-0 sum over the present values,
  // lag-k sum over the n_k complete pairs, r_k = (S_k / (n_k + k)) / (S_0 / n).
  // S_k = sum (a - mean)(b - mean) = sum ab - mean (sum a + sum b) + n_k mean².
  const double mean = channel.mean;
  auto correlation = [&](int k) {
    const auto i = static_cast<std::size_t>(k - 1);
    const auto pairs = static_cast<double>(channel.pairs[i]);
    if (channel.pairs[i] == 0) return kNaN;
    const double lagged =
        channel.product_sum[i] - mean * (channel.lead_sum[i] + channel.lag_sum[i]) + pairs * mean * mean;
    return lagged / channel.m2 * (n / (pairs + static_cast<double>(k)));
  };
  result.lag1_autocorrelation = correlation(1);

  // Ljung & Box (1978): Q = sum_k N_k (N_k + 2) r_k² / n_k, N_k = n_k + k (= n(n+2) r_k²/(n-k) for
  // complete data), approximately chi-square with h degrees of freedom under whiteness.
  double statistic = 0.0;
  bool complete = true;
  for (int k = 1; k <= lags && complete; ++k) {
    const double r = correlation(k);
    if (std::isnan(r)) {
      complete = false;
      break;
    }
    const auto pairs = static_cast<double>(channel.pairs[static_cast<std::size_t>(k - 1)]);
    const double length = pairs + static_cast<double>(k);
    statistic += length * (length + 2.0) * (r * r / pairs);
  }
  if (complete) {
    result.ljung_box.statistic = statistic;
    result.ljung_box.p_value = chi_square_survival(statistic, static_cast<double>(lags));
  }

  // Jarque & Bera (1980) from the population moments m_j = M_j / n.
  const double m2 = channel.m2 / n, m3 = channel.m3 / n, m4 = channel.m4 / n;
  const double skewness = m3 / (m2 * std::sqrt(m2));
  const double excess = m4 / (m2 * m2) - 3.0;
  result.jarque_bera.skewness = skewness;
  result.jarque_bera.excess_kurtosis = excess;
  result.jarque_bera.statistic = n / 6.0 * (skewness * skewness + 0.25 * excess * excess);
  result.jarque_bera.p_value = chi_square_survival(result.jarque_bera.statistic, 2.0);
  return result;
}

ConsistencySummary ConsistencyMonitor::summary() const {
  ConsistencySummary summary;
  for (std::size_t c = 0; c < channels_.size(); ++c)
    summary.channels.push_back(finish(channels_[c], names_[c]));
  NisConsistency& nis = summary.nis;
  nis.steps = nis_steps_;
  nis.degrees_of_freedom = nis_dof_;
  if (nis_steps_ == 0) {
    nis.mean = nis.expected = nis.lower_95 = nis.upper_95 = nis.p_value = nis.scale_factor = kNaN;
    nis.fraction_steps_outside_95 = kNaN;
    return summary;
  }
  const double steps = static_cast<double>(nis_steps_);
  nis.mean = nis_sum_ / steps;
  nis.expected = nis_expected_ / steps;
  if (gated_) {
    const double half_width = normal_quantile(0.975) * std::sqrt(nis_variance_);
    nis.lower_95 = std::max(0.0, nis_expected_ - half_width) / steps;
    nis.upper_95 = (nis_expected_ + half_width) / steps;
    nis.p_value = two_sided_normal(nis_sum_ - nis_expected_, nis_variance_);
  } else {
    const auto [lower, upper] = chi_square_interval(nis_dof_, 0.95);
    nis.lower_95 = lower / steps;
    nis.upper_95 = upper / steps;
    nis.p_value = two_sided_chi_square(nis_sum_, nis_dof_);
  }
  nis.scale_factor = nis.mean / nis.expected;
  nis.fraction_steps_outside_95 = static_cast<double>(nis_outside_) / steps;
  return summary;
}

}  // namespace statewise
