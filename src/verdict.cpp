#include "statewise/verdict.h"

#include <cmath>
#include <cstdio>

#include "statewise/statistics.h"

namespace statewise {

namespace {

// Smallest p-value written as a number; below, "p < 1e-16" (chi-square tails are computed accurately
// far beyond, but such precision means nothing for a model check).
constexpr double kSmallestPrintedP = 1e-16;

bool below(double p, double threshold) { return !std::isnan(p) && p < threshold; }

std::string signed_number(double value) { return (value > 0.0 ? "+" : "") + format_significant(value, 2); }

std::string percent(double share) {
  const double value = 100.0 * share;
  return format_significant(value, value < 1.0 ? 1 : 2) + "%";
}

// The sign of the lag-1 autocorrelation when it is clearly nonzero: under whiteness r1 is about
// N(0, 1/n) (Bartlett's formula; G. E. P. Box and G. M. Jenkins, Time Series Analysis, 1970, section
// 2.1.6), so |r1| > 2.58 / sqrt(n) happens 1% of the time.
int lag1_sign(const ChannelConsistency& c) {
  if (std::isnan(c.lag1_autocorrelation) || c.used < 2) return 0;
  if (std::abs(c.lag1_autocorrelation) <= 2.58 / std::sqrt(static_cast<double>(c.used))) return 0;
  return c.lag1_autocorrelation > 0.0 ? 1 : -1;
}

// Which of Q and R the lag-1 autocorrelation points at. For a filter with a wrong gain K the innovations
// have lag-1 autocovariance proportional to C A (M C' - K C_0), M the actual predicted covariance and
// C_0 the innovations' variance (R. K. Mehra, On the identification of variances and adaptive Kalman
// filtering, IEEE Trans. Automatic Control 15(2), 1970, eq. 16 — recalled from memory): a gain that is
// too large (R too small, or Q too large) makes it negative, a gain that is too small positive. For
// slowly varying states (C A C' > 0), the usual case of sensor logs.
std::string size_hint(const ChannelConsistency& c, bool too_large) {
  const int sign = lag1_sign(c);
  if (sign == 0) return "";
  const std::string r1 = "Their lag-1 autocorrelation is " + signed_number(c.lag1_autocorrelation);
  if (too_large)
    return sign < 0 ? " " + r1 +
                          ": the filter follows the measurement noise, which usually means R is the one that "
                          "is too small."
                    : " " + r1 +
                          ": the estimate lags behind the signal, which usually means Q is the one that is "
                          "too small.";
  return sign > 0 ? " " + r1 +
                        ": the estimate lags behind the signal, which usually means R is the one that is too "
                        "large."
                  : " " + r1 +
                        ": the filter follows the measurement noise, which usually means Q is the one that "
                        "is too large.";
}

}  // namespace

const char* finding_code(Finding finding) {
  switch (finding) {
    case Finding::consistent:
      return "consistent";
    case Finding::too_large:
      return "too_large";
    case Finding::too_small:
      return "too_small";
    case Finding::channel_too_large:
      return "channel_too_large";
    case Finding::channel_too_small:
      return "channel_too_small";
    case Finding::biased:
      return "biased";
    case Finding::correlated:
      return "correlated";
    case Finding::heavy_tailed:
      return "heavy_tailed";
    case Finding::not_gaussian:
      return "not_gaussian";
    case Finding::many_rejected:
      return "many_rejected";
    case Finding::too_few_values:
      return "too_few_values";
  }
  return "unknown";
}

std::string format_significant(double value, int digits) {
  if (std::isnan(value)) return "n/a";
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.*g", digits, value);
  return buffer;
}

std::string format_p_value(double p) {
  if (std::isnan(p)) return "p n/a";
  if (p < kSmallestPrintedP) return "p < 1e-16";
  return "p = " + format_significant(p, 2);
}

std::vector<Verdict> judge(const ConsistencySummary& summary, const VerdictOptions& options) {
  const bool gated = options.gate_probability > 0.0 && options.gate_probability < 1.0;
  const double expected_rejected = gated ? 1.0 - options.gate_probability : 0.0;

  // The family of tests: the NIS test, and per channel with enough values the tests of mean, mean
  // square, whiteness, normality and (behind a gate) the rejection count.
  std::size_t tests = std::isnan(summary.nis.p_value) ? 0 : 1;
  for (const ChannelConsistency& c : summary.channels) {
    if (c.used < options.minimum_values) continue;
    for (const double p :
         {c.z_mean_p_value, c.z_mean_square_p_value, c.ljung_box.p_value, c.jarque_bera.p_value})
      tests += std::isnan(p) ? 0 : 1;
    if (gated) ++tests;
  }
  const double threshold = options.level / static_cast<double>(std::max<std::size_t>(tests, 1));

  std::vector<Verdict> verdicts;
  const NisConsistency& nis = summary.nis;
  if (below(nis.p_value, threshold)) {
    const bool large = nis.mean > nis.expected;
    Verdict v;
    v.finding = large ? Finding::too_large : Finding::too_small;
    v.text = std::string(large ? "The innovations are too large for the model: "
                               : "The innovations are smaller than the model expects: ") +
             "the average normalized innovation squared (NIS) is " + format_significant(nis.mean) +
             " per step, " + (large ? "above" : "below") + " its 95% range " +
             format_significant(nis.lower_95) + " to " + format_significant(nis.upper_95) + " (expected " +
             format_significant(nis.expected) + "). Q or R is likely too " + (large ? "small" : "large") +
             ": multiplying Q, R and the initial covariance by " + format_significant(nis.scale_factor) +
             " would make the average consistent.";
    verdicts.push_back(v);
  }

  for (const ChannelConsistency& c : summary.channels) {
    auto add = [&](Finding finding, std::string text) {
      verdicts.push_back(Verdict{finding, c.name, c.name + ": " + text});
    };
    if (c.used < options.minimum_values) {
      add(Finding::too_few_values, "only " + std::to_string(c.used) +
                                       " values were used; too few to test (at least " +
                                       std::to_string(options.minimum_values) + " are needed).");
      continue;
    }
    if (gated) {
      // Under the model each value is rejected with probability 1 - P, independently: the count is
      // binomial; one-sided normal approximation.
      const double total = static_cast<double>(c.used + c.rejected);
      const double expected = total * expected_rejected;
      const double deviation = static_cast<double>(c.rejected) - expected;
      const double p = normal_cdf(-deviation / std::sqrt(expected * (1.0 - expected_rejected)));
      if (deviation > 0.0 && below(p, threshold))
        add(Finding::many_rejected,
            "the gate rejected " + std::to_string(c.rejected) + " of " + std::to_string(c.used + c.rejected) +
                " values (" + percent(static_cast<double>(c.rejected) / total) + "), far more than the " +
                percent(expected_rejected) +
                " expected when the model fits: the model's noise is likely too small for this "
                "channel, or it has many outliers.");
    }
    if (below(c.z_mean_square_p_value, threshold)) {
      const bool large = c.z_mean_square > c.z_expected_mean_square;
      const double factor =
          large ? c.z_mean_square / c.z_expected_mean_square : c.z_expected_mean_square / c.z_mean_square;
      add(large ? Finding::channel_too_large : Finding::channel_too_small,
          "the standardized innovations have mean square " + format_significant(c.z_mean_square) +
              " (expected " + format_significant(c.z_expected_mean_square) + ", " +
              format_p_value(c.z_mean_square_p_value) +
              "): this channel's noise variance in R, or Q, is too " + (large ? "small" : "large") +
              " by a factor of about " + format_significant(factor, 2) + "." + size_hint(c, large));
    }
    if (below(c.z_mean_p_value, threshold))
      add(Finding::biased,
          "the innovations have a mean of " + signed_number(c.z_mean) + " standard deviations (" +
              format_p_value(c.z_mean_p_value) +
              "): the model misses an offset, such as a sensor bias, a calibration error or an input "
              "it does not know.");
    if (below(c.ljung_box.p_value, threshold)) {
      std::string text = "the innovations are correlated in time (Ljung–Box Q = " +
                         format_significant(c.ljung_box.statistic) + " on " +
                         std::to_string(c.ljung_box.lags) + " lags, " + format_p_value(c.ljung_box.p_value) +
                         ")";
      const int sign = lag1_sign(c);
      const std::string r1 = " The lag-1 autocorrelation is " + signed_number(c.lag1_autocorrelation);
      if (sign > 0)
        text += ": the dynamics miss something." + r1 +
                ": the estimate lags behind the signal (Q too small, or a state missing from the model).";
      else if (sign < 0)
        text +=
            "." + r1 + ": the filter follows the measurement noise, so R is likely too small relative to Q.";
      else
        text +=
            ": the dynamics miss something at lags longer than one step, such as an oscillation or a "
            "periodic "
            "disturbance the model lacks.";
      add(Finding::correlated, text);
    }
    if (below(c.jarque_bera.p_value, threshold)) {
      const double skewness = c.jarque_bera.skewness, excess = c.jarque_bera.excess_kurtosis;
      const std::string test = "Jarque–Bera " + format_p_value(c.jarque_bera.p_value);
      // Which term of JB = n/6 (S² + (K-3)²/4) dominates.
      const bool tails = excess * excess / 4.0 >= skewness * skewness;
      if (tails && excess > 0.0) {
        add(Finding::heavy_tailed, "the innovations are heavy-tailed (excess kurtosis " +
                                       format_significant(excess) + ", " + test + ")" +
                                       (gated ? ", even behind the gate: outliers smaller than the gate "
                                                "remain, or the noise is not Gaussian."
                                              : ": outliers are present; gating them (--reject 0.999) would "
                                                "keep them out of the estimates."));
      } else if (!tails) {
        add(Finding::not_gaussian, "the innovations are skewed (skewness " + signed_number(skewness) + ", " +
                                       test +
                                       "): a one-sided disturbance or a nonlinearity the model lacks.");
      } else if (!gated) {
        // Behind a gate the accepted values are truncated, so light tails are expected there.
        add(Finding::not_gaussian, "the innovations have lighter tails than Gaussian (excess kurtosis " +
                                       format_significant(excess) + ", " + test +
                                       "): e.g. values rounded coarsely, or a bounded disturbance.");
      }
    }
  }

  if (tests > 0 && all_consistent(verdicts)) {
    Verdict v;
    v.finding = Finding::consistent;
    v.text =
        "The innovations look as the model predicts: white, Gaussian and of the expected size (no test "
        "failed "
        "at the " +
        percent(options.level) + " level, corrected for " + std::to_string(tests) + " tests).";
    verdicts.insert(verdicts.begin(), v);
  }
  return verdicts;
}

bool all_consistent(const std::vector<Verdict>& verdicts) {
  for (const Verdict& v : verdicts)
    if (v.finding != Finding::consistent && v.finding != Finding::too_few_values) return false;
  return true;
}

}  // namespace statewise
