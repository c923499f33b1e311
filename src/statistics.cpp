#include "statewise/statistics.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstddef>
#include <limits>
#include <numbers>

namespace statewise {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInfinity = std::numeric_limits<double>::infinity();
constexpr double kEpsilon = std::numeric_limits<double>::epsilon();
// Smallest magnitude kept in the modified Lentz continued fraction (stands in for a zero divisor).
constexpr double kLentzFloor = 1e-300;

bool is_probability(double p) { return p > 0.0 && p < 1.0; }  // false for NaN too

// ---------------------------------------------------------------------------------------------
// Regularized incomplete gamma functions P(a, x) and Q(a, x) = 1 - P(a, x).

// log1p(t) - t without cancellation for small |t|: the Taylor series of ln(1 + t) without its
// first term, sum_{k>=2} (-1)^(k+1) t^k / k.
double log1p_minus_identity(double t) {
  if (std::fabs(t) >= 0.25) return std::log1p(t) - t;
  double power = t;
  double sum = 0.0;
  for (int k = 2; k < 200; ++k) {
    power *= -t;
    const double term = power / k;
    sum += term;
    if (std::fabs(term) <= kEpsilon * std::fabs(sum)) break;
  }
  return sum;
}

// ln Gamma(a) - [(a - 1/2) ln a - a + ln(2 pi)/2]: the remainder of Stirling's formula. For a >= 10
// from the asymptotic series with Bernoulli numbers B_2k / (2k (2k-1) a^(2k-1)) (A&S 6.1.41; the
// first omitted term is below 3e-17 at a = 10); below that directly from std::lgamma, where the
// terms are small and do not cancel.
double stirling_remainder(double a) {
  if (a < 10.0) {
    return std::lgamma(a) - ((a - 0.5) * std::log(a) - a + 0.5 * std::log(2.0 * std::numbers::pi));
  }
  const double inv = 1.0 / a;
  const double inv2 = inv * inv;
  return inv * (1.0 / 12.0 -
                inv2 * (1.0 / 360.0 -
                        inv2 * (1.0 / 1260.0 -
                                inv2 * (1.0 / 1680.0 -
                                        inv2 * (1.0 / 1188.0 - inv2 * (691.0 / 360360.0 - inv2 / 156.0))))));
}

// x^a e^(-x) / Gamma(a), the common factor of the series and the continued fraction (and x times
// the gamma density). Two forms, each used where it keeps full relative accuracy:
// - a < 10: directly with pow, exp and tgamma, each accurate to a few ulps, when nothing
//   over- or underflows; the logarithmic form would lose |ln(prefix)| ulps (1e-14 at 1e-100);
// - otherwise exp(a (ln(x/a) - (x - a)/a) + ln(a / (2 pi))/2 - stirling_remainder(a)), the form of
//   DiDonato & Morris (ACM TOMS 12(4), 377-393, 1986): the large terms a ln x, x and
//   ln Gamma(a), each about a ln a, cancel analytically instead of numerically, which keeps full
//   relative accuracy for a = 5e5 (dof 1e6) where the naive form loses about 7 digits.
double gamma_prefix(double a, double x) {
  if (a < 10.0 && x > 1e-300 && x < 700.0) {
    const double power = std::pow(x, a);
    if (power > 1e-300 && power < 1e300) return power * std::exp(-x) / std::tgamma(a);
  }
  double log_ratio_minus;  // ln(x/a) - (x/a - 1)
  const double t = (x - a) / a;
  if (std::fabs(t) < 0.25) {
    log_ratio_minus = log1p_minus_identity(t);
  } else {
    const double ratio = x / a;  // one rounding: ln(ratio) has an absolute error of about 1 ulp
    log_ratio_minus = (std::isnormal(ratio) ? std::log(ratio) : std::log(x) - std::log(a)) - t;
  }
  return std::exp(a * log_ratio_minus + 0.5 * std::log(a / (2.0 * std::numbers::pi)) - stirling_remainder(a));
}

// Generous iteration bound: both expansions need O(sqrt(a)) terms near x = a (which is why Press et
// al., Numerical Recipes 3rd ed. section 6.2, switch to quadrature for large a; the terms are cheap
// enough here: about 6000 for dof 1e6), a few dozen to a few hundred elsewhere.
int iteration_limit(double a) { return 1000 + static_cast<int>(std::min(50.0 * std::sqrt(a), 1e8)); }

// P(a, x), used for x < a + 1, by the series
// gamma(a, x) = e^-x x^a sum_{n>=0} Gamma(a) / Gamma(a + 1 + n) x^n (Numerical Recipes 3rd ed.
// section 6.2). The terms are positive: no cancellation.
double gamma_p_series(double a, double x) {
  double term = 1.0 / a;
  double sum = term;
  const int limit = iteration_limit(a);
  for (int n = 1; n < limit; ++n) {
    term *= x / (a + n);
    sum += term;
    if (term < sum * kEpsilon) return gamma_prefix(a, x) * sum;
  }
  return kNaN;  // not reached for finite arguments: the terms shrink geometrically once n > x - a
}

// Q(a, x), used for x >= a + 1 and for x >= 1/4 where Q < 0.05, by the continued fraction
// Gamma(a, x) = e^-x x^a (1/(x+1-a-) 1(1-a)/(x+3-a-) 2(2-a)/(x+5-a-) ...), evaluated with the
// modified Lentz method (Numerical Recipes 3rd ed. sections 6.2 and 5.2).
double gamma_q_continued_fraction(double a, double x) {
  double b = x + 1.0 - a;
  double c = 1.0 / kLentzFloor;
  double d = 1.0 / b;
  double h = d;
  const int limit = iteration_limit(a);
  for (int i = 1; i < limit; ++i) {
    const double an = -i * (i - a);
    b += 2.0;
    d = an * d + b;
    if (std::fabs(d) < kLentzFloor) d = kLentzFloor;
    c = b + an / c;
    if (std::fabs(c) < kLentzFloor) c = kLentzFloor;
    d = 1.0 / d;
    const double delta = d * c;
    h *= delta;
    if (std::fabs(delta - 1.0) <= kEpsilon) return gamma_prefix(a, x) * h;
  }
  return kNaN;
}

// Both tails at once. Numerical Recipes 3rd ed. section 6.2 uses the series below x = a + 1 and the
// continued fraction above, taking the other tail as 1 minus the computed one. Below a + 1 the
// series can give P close to 1 (for dof 0.01, Q(a, a + 1) is only about 1e-3), and 1 - P then has
// a relative error of about 1.5 eps / Q. There Q is computed directly by the continued fraction,
// which converges in a few hundred terms for x >= 1/4 and is accurate to about 2e-14; 1 - P is
// the better of the two while Q > 0.05, hence the switch at P = 0.95.
struct GammaTails {
  double lower;  // P(a, x)
  double upper;  // Q(a, x)
};

GammaTails gamma_tails(double a, double x) {
  if (x <= 0.0) return {0.0, 1.0};
  if (std::isinf(x)) return {1.0, 0.0};
  if (x < a + 1.0) {
    const double p = gamma_p_series(a, x);
    if (p > 0.95 && x >= 0.25) return {p, gamma_q_continued_fraction(a, x)};
    return {p, 1.0 - p};
  }
  const double q = gamma_q_continued_fraction(a, x);
  return {1.0 - q, q};
}

// Starting value for the chi-square quantile (dof = 2a) with lower tail p and upper tail q = 1 - p,
// following Best & Roberts, Algorithm AS 91, Applied Statistics 24(3), 385-388 (1975):
// - small dof relative to the lower tail: invert P(a, y) ~ y^a / Gamma(a + 1), the first series
//   term, giving x = 2 (p Gamma(a + 1))^(1/a);
// - otherwise Wilson & Hilferty's cube-root normal approximation (PNAS 17, 684-688, 1931):
//   x = dof (1 - 2/(9 dof) + z sqrt(2/(9 dof)))^3 with z the normal quantile;
// - far upper tail (x > 2.2 dof + 6): AS 91's correction from Q(a, y) ~ y^(a-1) e^-y / Gamma(a),
//   x = -2 (ln q - (a - 1) ln(x/2) + ln Gamma(a)), applied twice as a fixed-point iteration.
double chi_square_quantile_start(double dof, double p, double q) {
  const double a = 0.5 * dof;
  const double log_p = p < 0.5 ? std::log(p) : std::log1p(-q);
  if (dof < -1.24 * log_p) return 2.0 * std::exp((log_p + std::lgamma(a + 1.0)) / a);
  const double z = p < 0.5 ? normal_quantile(p) : -normal_quantile(q);
  const double c = 2.0 / (9.0 * dof);
  const double base = 1.0 - c + z * std::sqrt(c);
  if (base <= 0.0) return 2.0 * std::exp((log_p + std::lgamma(a + 1.0)) / a);
  double x = dof * base * base * base;
  if (x > 2.2 * dof + 6.0) {
    const double log_q = p < 0.5 ? std::log1p(-p) : std::log(q);
    for (int pass = 0; pass < 2; ++pass) x = -2.0 * (log_q - (a - 1.0) * std::log(0.5 * x) + std::lgamma(a));
  }
  return x;
}

// The chi-square quantile for lower tail p and upper tail q = 1 - p (both given, so the caller can
// pass whichever is exact). Newton's method on the logarithm of the smaller tail as a function of
// u = ln y, y = x/2: for the lower tail h(u) = ln P(a, e^u) - ln p, h'(u) = y f(y) / P with f the
// gamma density, so h'(u) = prefix / P; for the upper tail h(u) = ln Q - ln q, h'(u) = -prefix / Q.
// On this scale both tails are close to linear (P ~ y^a / Gamma(a + 1) for small y,
// Q ~ y^(a-1) e^-y / Gamma(a) for large y), so Newton converges from the AS 91 start in a few steps.
// y itself is the iterate (y <- y e^(du)) so the result is not limited by the resolution of ln y;
// a bracket [low, high] on y falls back to geometric bisection if a step leaves it.
double chi_square_quantile_from_tails(double dof, double p, double q) {
  const double a = 0.5 * dof;
  const bool use_lower = p <= q;
  const double target = use_lower ? p : q;
  double y = 0.5 * chi_square_quantile_start(dof, p, q);
  if (!(y > 0.0)) return 0.0;  // the quantile underflows: p is below P(a, smallest double)
  if (std::isinf(y)) return kInfinity;

  double low = 0.0;                         // largest y known to be below the quantile
  double high = kInfinity;                  // smallest y known to be above it
  constexpr double kStepTolerance = 1e-15;  // relative change of y at which Newton has converged
  double previous_step = kInfinity;
  for (int iteration = 0; iteration < 300; ++iteration) {
    const GammaTails tails = gamma_tails(a, y);
    const double tail = use_lower ? tails.lower : tails.upper;
    double step;  // change of u = ln y
    if (!(tail > 0.0)) {
      // The tail underflowed, so y is far out on its side; move one e-fold back.
      (use_lower ? low : high) = y;
      step = use_lower ? 1.0 : -1.0;
    } else {
      // ln(tail / target) rather than ln(tail) - ln(target): the logarithms of tiny numbers carry
      // absolute errors of |ln p| ulps (3e-14 at p = 1e-100), the ratio only one rounding.
      const double ratio = tail / target;
      const double residual = std::isnormal(ratio) ? std::log(ratio) : std::log(tail) - std::log(target);
      if (residual == 0.0) return 2.0 * y;
      // P grows with y and Q shrinks, so the quantile is below y when P is too large or Q too small.
      const bool root_below = use_lower ? residual > 0.0 : residual < 0.0;
      (root_below ? high : low) = y;
      const double slope = gamma_prefix(a, y) / tail;  // |dh/du|
      step = slope > 0.0 ? std::fabs(residual) / slope : 1.0;
      if (root_below) step = -step;
      // Newton is quadratic: once the step is this small the remaining error is far below it and
      // what is left is the error in evaluating the tail. When that error (relative to the slope,
      // large for small dof in the lower tail, where y ~ p^(1/a)) exceeds the tolerance, steps stop
      // shrinking: then y is as good as the tail evaluation allows.
      const bool at_noise_floor = std::fabs(step) < 1e-11 && std::fabs(step) >= 0.5 * previous_step;
      if (std::fabs(step) <= kStepTolerance || at_noise_floor) return 2.0 * y * std::exp(step);
      previous_step = std::fabs(step);
    }
    double next = y * std::exp(step);
    if (!(next > low && next < high)) {
      next = (low > 0.0 && std::isfinite(high)) ? std::sqrt(low) * std::sqrt(high)
             : std::isfinite(high)              ? 0.5 * high
                                                : 2.0 * std::max(low, y);
    }
    if (next == y) break;
    y = next;
  }
  return 2.0 * y;
}

}  // namespace

// ---------------------------------------------------------------------------------------------
// Normal distribution.

double normal_cdf(double x) {
  if (std::isinf(x)) return x > 0.0 ? 1.0 : 0.0;  // the correction below would compute inf - inf
  // Phi(x) = erfc(-x / sqrt 2) / 2 (erfc as defined in A&S 7.1.2, Phi in A&S section 26.2); erfc
  // keeps relative accuracy in the lower tail where 1 + erf would cancel.
  const double z = -x / std::numbers::sqrt2;
  // z carries the rounding of the division and of sqrt 2 itself, and erfc(z) ~ e^(-z^2) magnifies
  // a relative input error by 2 z^2 (2e-13 at x = -30). Correct to first order:
  // erfc(z + delta) = erfc(z) - delta 2/sqrt(pi) e^(-z^2), with delta = -x/sqrt(2) - z recovered
  // by fma from the exact remainder -x - z s (s = sqrt 2 rounded) and the tail of sqrt 2 beyond s.
  constexpr double kSqrt2Tail = -9.667293313452913e-17;  // sqrt(2) - s
  const double delta = (std::fma(-z, std::numbers::sqrt2, -x) - z * kSqrt2Tail) / std::numbers::sqrt2;
  return 0.5 * std::erfc(z) - delta * std::exp(-z * z) * std::numbers::inv_sqrtpi;
}

namespace {

// c[0] + c[1] r + ... + c[N-1] r^(N-1) by Horner's rule.
template <std::size_t N>
double polynomial(const std::array<double, N>& c, double r) {
  double value = c[N - 1];
  for (std::size_t i = N - 1; i-- > 0;) value = value * r + c[i];
  return value;
}

// Coefficients of Wichura's AS 241 (PPND16), lowest degree first, as printed in the algorithm.
// clang-format off
// Central region |p - 1/2| <= 0.425, in r = 0.180625 - (p - 1/2)^2:
constexpr std::array<double, 8> kCentralNumerator = {
    3.3871328727963666080e+0,  1.3314166789178437745e+2,  1.9715909503065514427e+3,
    1.3731693765509461125e+4,  4.5921953931549871457e+4,  6.7265770927008700853e+4,
    3.3430575583588128105e+4,  2.5090809287301226727e+3};
constexpr std::array<double, 8> kCentralDenominator = {
    1.0,                       4.2313330701600911252e+1,  6.8718700749205790830e+2,
    5.3941960214247511077e+3,  2.1213794301586595867e+4,  3.9307895800092710610e+4,
    2.8729085735721942674e+4,  5.2264952788528545610e+3};
// Intermediate tail, r = sqrt(-ln(min(p, 1 - p))) <= 5, in r - 1.6:
constexpr std::array<double, 8> kNearNumerator = {
    1.42343711074968357734e+0,  4.63033784615654529590e+0,  5.76949722146069140550e+0,
    3.64784832476320460504e+0,  1.27045825245236838258e+0,  2.41780725177450611770e-1,
    2.27238449892691845833e-2,  7.74545014278341407640e-4};
constexpr std::array<double, 8> kNearDenominator = {
    1.0,                        2.05319162663775882187e+0,  1.67638483018380384940e+0,
    6.89767334985100004550e-1,  1.48103976427480074590e-1,  1.51986665636164571966e-2,
    5.47593808499534494600e-4,  1.05075007164441684324e-9};
// Far tail, r > 5 (p below about 1e-11), in r - 5:
constexpr std::array<double, 8> kFarNumerator = {
    6.65790464350110377720e+0,  5.46378491116411436990e+0,  1.78482653991729133580e+0,
    2.96560571828504891230e-1,  2.65321895265761230930e-2,  1.24266094738807843860e-3,
    2.71155556874348757815e-5,  2.01033439929228813265e-7};
constexpr std::array<double, 8> kFarDenominator = {
    1.0,                         5.99832206555887937690e-1,   1.36929880922735805310e-1,
    1.48753612908506148525e-2,   7.86869131145613259100e-4,   1.84631831751005468180e-5,
    1.42151175831644588870e-7,   2.04426310338993978564e-15};
// clang-format on

}  // namespace

double normal_quantile(double p) {
  if (!is_probability(p)) return kNaN;
  // Wichura, Algorithm AS 241 (PPND16), Applied Statistics 37(3), 477-484 (1988): rational
  // approximations of degree 7 in three regions, relative accuracy about 1e-16.
  const double q = p - 0.5;
  if (std::fabs(q) <= 0.425) {
    const double r = 0.180625 - q * q;
    return q * polynomial(kCentralNumerator, r) / polynomial(kCentralDenominator, r);
  }
  // The smaller tail, which is exact for p < 1/2 and 1 - p (exact too) otherwise.
  double r = std::sqrt(-std::log(q < 0.0 ? p : 1.0 - p));
  double value;
  if (r <= 5.0) {
    r -= 1.6;
    value = polynomial(kNearNumerator, r) / polynomial(kNearDenominator, r);
  } else {
    r -= 5.0;
    value = polynomial(kFarNumerator, r) / polynomial(kFarDenominator, r);
  }
  return q < 0.0 ? -value : value;
}

// ---------------------------------------------------------------------------------------------
// Chi-square distribution: X ~ chi-square(dof) is 2 Y with Y ~ Gamma(dof/2, 1), so
// P(X <= x) = P(dof/2, x/2) (A&S section 26.4).

double chi_square_cdf(double x, double dof) {
  if (!(dof > 0.0) || std::isnan(x) || std::isinf(dof)) return kNaN;
  return gamma_tails(0.5 * dof, 0.5 * x).lower;
}

double chi_square_survival(double x, double dof) {
  if (!(dof > 0.0) || std::isnan(x) || std::isinf(dof)) return kNaN;
  return gamma_tails(0.5 * dof, 0.5 * x).upper;
}

double chi_square_quantile(double p, double dof) {
  if (!is_probability(p) || !(dof > 0.0) || std::isinf(dof)) return kNaN;
  return chi_square_quantile_from_tails(dof, p, 1.0 - p);
}

std::pair<double, double> chi_square_interval(double dof, double coverage) {
  if (!is_probability(coverage) || !(dof > 0.0) || std::isinf(dof)) return {kNaN, kNaN};
  const double tail = 0.5 * (1.0 - coverage);  // exact: 1 - coverage is exact for coverage >= 1/2
  return {chi_square_quantile_from_tails(dof, tail, 1.0 - tail),
          chi_square_quantile_from_tails(dof, 1.0 - tail, tail)};
}

// ---------------------------------------------------------------------------------------------
// Residual tests.

namespace {

// Mean-removed sums behind the sample autocorrelation, with NaN entries treated as missing.
//
// Without missing values this is the standard estimator (Box & Jenkins, Time Series Analysis,
// 1970, chapter 2) used by Ljung & Box: r_k = sum_{t=1..n-k} d_t d_{t+k} / sum_{t=1..n} d_t^2 with
// d_t = x_t - mean. With missing values we use a common practical treatment (the one of R's
// stats::acf with na.action = na.pass, as we recall its source): the mean and the lag-0 sum use
// the m present values; the lag-k sum
// runs over the n_k pairs where both values are present; and each sum is scaled as the complete-data
// estimator scales it, i.e. the lag-k autocovariance is S_k / (n_k + k) (complete data: S_k / n)
// and the variance is S_0 / m, so r_k = (S_k / S_0) * m / (n_k + k). With no missing value
// m = n_k + k = n and the factor is exactly 1.
struct LaggedSums {
  std::vector<double> correlation;  // r_0 .. r_max_lag (NaN where undefined)
  std::vector<std::size_t> pairs;   // n_0 .. n_max_lag, complete pairs per lag (n_0 = m)
  bool usable = false;              // at least two present values and nonzero variance
};

LaggedSums lagged_sums(std::span<const double> series, int max_lag) {
  LaggedSums sums;
  if (max_lag < 0) return sums;
  const auto lag_count = static_cast<std::size_t>(max_lag) + 1;
  sums.correlation.assign(lag_count, kNaN);
  sums.pairs.assign(lag_count, 0);

  std::size_t present = 0;
  double total = 0.0;
  double smallest = kInfinity;
  double largest = -kInfinity;
  for (const double x : series) {
    if (std::isnan(x)) continue;
    ++present;
    total += x;
    smallest = std::min(smallest, x);
    largest = std::max(largest, x);
  }
  sums.pairs[0] = present;
  // A constant series has zero variance and no defined autocorrelation. Compare the values
  // themselves: the deviations from a rounded mean need not be exactly zero.
  if (present < 2 || !(smallest < largest)) return sums;
  const double mean = total / static_cast<double>(present);

  std::vector<double> deviation(series.size());
  double sum_squares = 0.0;
  for (std::size_t t = 0; t < series.size(); ++t) {
    deviation[t] = series[t] - mean;  // stays NaN for a missing value
    if (!std::isnan(deviation[t])) sum_squares += deviation[t] * deviation[t];
  }
  if (!(sum_squares > 0.0) || !std::isfinite(sum_squares)) return sums;
  sums.usable = true;
  sums.correlation[0] = 1.0;

  for (std::size_t k = 1; k < lag_count && k < series.size(); ++k) {
    double lag_sum = 0.0;
    std::size_t pairs = 0;
    for (std::size_t t = 0; t + k < series.size(); ++t) {
      const double product = deviation[t] * deviation[t + k];
      if (std::isnan(product)) continue;
      lag_sum += product;
      ++pairs;
    }
    sums.pairs[k] = pairs;
    if (pairs == 0) continue;
    const double scale = static_cast<double>(present) / static_cast<double>(pairs + k);
    sums.correlation[k] = lag_sum / sum_squares * scale;
  }
  return sums;
}

}  // namespace

std::vector<double> autocorrelation(std::span<const double> series, int max_lag) {
  return lagged_sums(series, max_lag).correlation;
}

int default_ljung_box_lags(std::size_t n) { return static_cast<int>(std::clamp<std::size_t>(n / 5, 1, 10)); }

LjungBoxResult ljung_box(std::span<const double> series, int lags, int fitted_parameters) {
  LjungBoxResult result{kNaN, lags, lags - fitted_parameters, kNaN, 0};
  if (lags < 1) return result;
  const LaggedSums sums = lagged_sums(series, lags);
  for (std::size_t k = 1; k < sums.pairs.size(); ++k) result.pairs_used += sums.pairs[k];
  if (!sums.usable) return result;

  // Ljung & Box, Biometrika 65(2), 297-303 (1978): Q = n(n+2) sum_{k=1..h} r_k^2 / (n-k).
  // n(n+2)/(n-k) is the reciprocal of the small-sample variance of r_k; with missing values each lag
  // uses its own effective length N_k = n_k + k (the n the complete-data estimator of r_k would
  // have), so the weight N_k (N_k + 2) / n_k is again about 1 / var(r_k). Without missing values
  // N_k = n and n_k = n - k: the textbook statistic.
  double statistic = 0.0;
  for (std::size_t k = 1; k < sums.correlation.size(); ++k) {
    const double r = sums.correlation[k];
    if (std::isnan(r)) return result;  // no complete pair at this lag: too few values for h lags
    const auto pairs = static_cast<double>(sums.pairs[k]);
    const double length = pairs + static_cast<double>(k);
    statistic += length * (length + 2.0) * (r * r / pairs);
  }
  result.statistic = statistic;
  // Under whiteness Q is approximately chi-square with h - (fitted parameters) degrees of freedom
  // (Ljung & Box 1978, section 2; Box & Pierce, JASA 65, 1970, for the reduction by fitted ARMA
  // parameters).
  if (result.degrees_of_freedom >= 1) {
    result.p_value = chi_square_survival(statistic, static_cast<double>(result.degrees_of_freedom));
  }
  return result;
}

JarqueBeraResult jarque_bera(std::span<const double> sample) {
  JarqueBeraResult result{kNaN, kNaN, kNaN, kNaN, 0};
  double total = 0.0;
  double smallest = kInfinity;
  double largest = -kInfinity;
  for (const double x : sample) {
    if (std::isnan(x)) continue;
    ++result.n;
    total += x;
    smallest = std::min(smallest, x);
    largest = std::max(largest, x);
  }
  if (result.n < 2 || !(smallest < largest)) return result;  // no spread: moments ratios undefined
  const auto n = static_cast<double>(result.n);
  const double mean = total / n;

  // Population (biased) central moments m_j = (1/n) sum (x - mean)^j, as in Jarque & Bera,
  // Economics Letters 6(3), 255-259 (1980).
  double m2 = 0.0;
  double m3 = 0.0;
  double m4 = 0.0;
  for (const double x : sample) {
    if (std::isnan(x)) continue;
    const double d = x - mean;
    const double d2 = d * d;
    m2 += d2;
    m3 += d2 * d;
    m4 += d2 * d2;
  }
  m2 /= n;
  m3 /= n;
  m4 /= n;
  if (!(m2 > 0.0) || !std::isfinite(m4)) return result;

  // S = m3 / m2^(3/2), K = m4 / m2^2, JB = n/6 (S^2 + (K - 3)^2 / 4) (Jarque & Bera 1980),
  // asymptotically chi-square with 2 degrees of freedom under normality.
  const double skewness = m3 / (m2 * std::sqrt(m2));
  const double excess = m4 / (m2 * m2) - 3.0;
  result.skewness = skewness;
  result.excess_kurtosis = excess;
  result.statistic = n / 6.0 * (skewness * skewness + 0.25 * excess * excess);
  result.p_value = chi_square_survival(result.statistic, 2.0);
  return result;
}

}  // namespace statewise
