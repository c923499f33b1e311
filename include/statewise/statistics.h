#pragma once
/// \file statistics.h
/// Distribution functions and residual tests used to judge a filter's consistency: the standard
/// normal and chi-square distributions (cdf, upper tail, quantile), the Ljung-Box portmanteau test
/// for whiteness of innovations, and the Jarque-Bera test for their normality.
///
/// Conventions: nothing here throws. Arguments outside a function's domain (a probability outside
/// the open interval (0, 1), degrees of freedom <= 0, NaN) give NaN. Missing values in a series are
/// NaN entries. Formulas and their sources are in src/statistics.cpp.

#include <cstddef>
#include <span>
#include <utility>
#include <vector>

namespace statewise {

/// Standard normal cumulative distribution function P(Z <= x). Relative error below 4e-16 over
/// [-37.5, 8] (measured against an extended-precision erfc), including the far lower tail: it is
/// computed from erfc, not as 1 minus something, and the rounding of x / sqrt(2) is corrected.
double normal_cdf(double x);

/// Standard normal quantile: the x with normal_cdf(x) = p. Valid for 0 < p < 1 (NaN otherwise,
/// including p = 0 and p = 1). Relative error about 1e-16 (within 4.3e-16 of scipy's ndtri). In the
/// upper tail the result can only be as precise as 1 - p is in double precision.
double normal_quantile(double p);

/// Chi-square cumulative distribution function P(X <= x) for X with `dof` degrees of freedom.
/// `dof` is any real > 0 (NaN otherwise). Returns 0 for x <= 0 and 1 for x = +infinity.
/// Relative error: a few 1e-15 for moderate dof and probabilities, up to 2e-14 near the median at
/// dof 1e6, up to 2e-13 for probabilities below 1e-100 (it grows like |ln P| eps).
/// Cost: O(sqrt(dof)) operations near the median (about 6000 terms at dof 1e6).
double chi_square_cdf(double x, double dof);

/// Chi-square upper tail P(X > x) (the p-value of a statistic x). Computed directly, not as
/// 1 - cdf, so tiny p-values (1e-300) keep their relative accuracy. Same domain and accuracy as
/// chi_square_cdf.
double chi_square_survival(double x, double dof);

/// Chi-square quantile: the x >= 0 with chi_square_cdf(x, dof) = p, for 0 < p < 1 and real dof > 0
/// (NaN otherwise). For dof 0.5 to 1e6 and p from 1e-10 to 1 - 1e-10 the result is within 6e-16
/// relative of an 80-digit evaluation; in general the error is the cdf's relative error times the
/// condition number P / (x f(x)), at most about max(1, 2/dof). Works beyond dof 1e6
/// (a few ms at dof 1e8). Returns 0 when the quantile underflows.
double chi_square_quantile(double p, double dof);

/// Two-sided chi-square interval with the given central coverage in (0, 1): the (1 - coverage)/2
/// and (1 + coverage)/2 quantiles, e.g. coverage 0.95 gives the 2.5% and 97.5% points. The upper
/// point is solved from its tail probability, so it stays accurate for coverage close to 1.
/// Both are NaN for coverage outside (0, 1) or dof <= 0.
std::pair<double, double> chi_square_interval(double dof, double coverage);

/// Outcome of a Ljung-Box test. statistic and p_value are NaN when the test cannot be computed
/// (fewer usable values than lags + 1, zero variance, all values missing, lags < 1).
struct LjungBoxResult {
  double statistic;        ///< Q, approximately chi-square with degrees_of_freedom under whiteness
  int lags;                ///< h, the number of autocorrelations summed
  int degrees_of_freedom;  ///< h minus the number of fitted parameters
  double p_value;          ///< P(chi-square(dof) > Q); NaN when degrees_of_freedom < 1
  std::size_t pairs_used;  ///< products summed over lags 1..h: sum of (n - k) without missing values
};

/// Ljung-Box portmanteau test of "no autocorrelation up to lag `lags`". `fitted_parameters` is
/// subtracted from `lags` to give the degrees of freedom (0 for innovations of a known model).
/// Without NaN the statistic is exactly Ljung & Box's Q = n(n+2) sum_{k=1..h} r_k^2 / (n - k).
/// NaN entries are missing values: the mean and variance use the present values, r_k sums the
/// products over pairs where both values are present, scaled as the complete-data estimator scales
/// them (see autocorrelation), and each lag is weighted with its own effective length
/// N_k = (pairs at lag k) + k in place of n. Missing values at either end change nothing.
/// Infinite values make the result NaN.
LjungBoxResult ljung_box(std::span<const double> series, int lags, int fitted_parameters = 0);

/// Sample autocorrelations r_0 .. r_max_lag (r_0 = 1) with the estimator used by ljung_box: mean
/// removed, every lag divided by the lag-0 sum over all values. NaN entries are missing values:
/// with m present values and n_k complete pairs at lag k, r_k = (S_k / (n_k + k)) / (S_0 / m), where
/// S_k is the sum of products of deviations over those pairs (for complete data n_k + k = m = n).
/// Entries are NaN where they cannot be computed (zero variance, no complete pair at that lag).
/// Empty when max_lag < 0.
std::vector<double> autocorrelation(std::span<const double> series, int max_lag);

/// Number of Ljung-Box lags for a series of n values: min(10, n / 5), and at least 1. A common rule
/// of thumb: enough lags to see short-range correlation, few enough that each r_k rests on many
/// pairs.
int default_ljung_box_lags(std::size_t n);

/// Outcome of a Jarque-Bera test. Fields other than n are NaN when fewer than 2 values are present
/// or the values are all equal.
struct JarqueBeraResult {
  double statistic;        ///< JB = n/6 (S^2 + (K - 3)^2 / 4)
  double skewness;         ///< S = m3 / m2^(3/2), population (biased) moments
  double excess_kurtosis;  ///< K - 3 with K = m4 / m2^2, population (biased) moments
  double p_value;          ///< P(chi-square(2) > JB)
  std::size_t n;           ///< number of values used (NaN entries skipped)
};

/// Jarque-Bera test of normality on the non-NaN values of `sample`.
JarqueBeraResult jarque_bera(std::span<const double> sample);

}  // namespace statewise
