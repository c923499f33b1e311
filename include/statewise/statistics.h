#pragma once
/// \file statistics.h
/// Distribution functions used to judge a filter's consistency: the standard normal and chi-square
/// distributions (cdf, upper tail, quantile).
///
/// Conventions: nothing here throws. Arguments outside a function's domain (a probability outside
/// the open interval (0, 1), degrees of freedom <= 0, NaN) give NaN. Formulas and their sources
/// are in src/statistics.cpp.

#include <utility>

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

}  // namespace statewise
