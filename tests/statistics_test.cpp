// Tests for the statistics module. Every known answer names its source beside it.
//
// Reference values marked "scipy" were generated once with Debian's python3-scipy 1.10.1 and
// python3-numpy 1.24.2 (/usr/bin/python3), printed with repr() (17 significant digits, round-trips
// to the same double), and pasted here; the exact expression is given beside each table.

#include "statewise/statistics.h"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <iomanip>
#include <limits>
#include <numbers>
#include <sstream>
#include <string>
#include <vector>

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kEpsilon = std::numeric_limits<double>::epsilon();  // 2.2e-16

// |actual - expected| / |expected|, or |actual| when expected is 0; NaN if either is NaN.
double relative_error(double actual, double expected) {
  if (expected == 0.0) return std::fabs(actual);
  return std::fabs(actual - expected) / std::fabs(expected);
}

std::string describe(double actual, double expected) {
  std::ostringstream out;
  out << std::setprecision(17) << "actual " << actual << ", expected " << expected << ", relative error "
      << std::setprecision(3) << relative_error(actual, expected);
  return out.str();
}

}  // namespace

// Fails with both values printed to 17 digits when the relative error exceeds the tolerance.
#define CHECK_RELATIVE(actual, expected, tolerance)                            \
  do {                                                                         \
    const double actual_value = (actual);                                      \
    const double expected_value = (expected);                                  \
    CHECK_MESSAGE(relative_error(actual_value, expected_value) <= (tolerance), \
                  describe(actual_value, expected_value));                     \
  } while (false)

namespace statewise {

// ------------------------------------------------------------------------------------------------
// Normal distribution

TEST_CASE("normal_quantile reproduces standard table values") {
  // Upper percentage points of the standard normal distribution. Abramowitz & Stegun, Handbook of
  // Mathematical Functions (1964), Table 26.5 lists them to fewer digits; these full-precision
  // values are recalled from memory, not read from a printed table, and each was confirmed
  // digit for digit with scipy 1.10.1: scipy.stats.norm.ppf(p).
  // Tolerance 1e-15: AS 241 is accurate to about 1e-16 relative, and the quantile's condition
  // number p / (x phi(x)) is below 1 here, so the rounding of p adds nothing.
  CHECK_RELATIVE(normal_quantile(0.975), 1.959963984540054, 1e-15);   // recalled; scipy agrees
  CHECK_RELATIVE(normal_quantile(0.995), 2.5758293035489004, 1e-15);  // recalled; scipy agrees
  CHECK_RELATIVE(normal_quantile(0.999), 3.090232306167813, 1e-15);   // recalled; scipy agrees
  CHECK_RELATIVE(normal_quantile(0.9999), 3.719016485455709, 1e-15);  // recalled; scipy agrees
  // Symmetry Phi^-1(1 - p) = -Phi^-1(p): exact for the 0.5 split of AS 241 when 1 - p is exact.
  CHECK(normal_quantile(0.25) == -normal_quantile(0.75));
  CHECK(normal_quantile(0.5) == 0.0);
}

TEST_CASE("normal_quantile matches scipy from 1e-300 to 1 - 1e-6") {
  // scipy 1.10.1: [(p, scipy.stats.norm.ppf(p)) for p in [1e-300, 1e-100, 1e-20, 1e-10, 1e-5,
  //   0.001, 0.01, 0.025, 0.1, 0.3, 0.42, 0.5, 0.6, 0.9, 0.975, 0.99, 0.999, 1 - 1e-6]]
  // Tolerance 1e-14 relative: both AS 241 here and scipy's ndtri (Cephes) are accurate to a few
  // ulps (the largest difference measured was 4.2e-16); 1e-14 leaves a 20x margin and still
  // catches a wrong coefficient, which would show up at 1e-8 or worse.
  struct Case {
    double p;
    double quantile;
  };
  const std::vector<Case> cases = {
      {1e-300, -37.0470962993612}, {1e-100, -21.273453560965322}, {1e-20, -9.262340089798409},
      {1e-10, -6.361340902404056}, {1e-05, -4.264890793922825},   {0.001, -3.090232306167813},
      {0.01, -2.3263478740408408}, {0.025, -1.9599639845400545},  {0.1, -1.2815515655446004},
      {0.3, -0.5244005127080409},  {0.42, -0.20189347914185088},  {0.5, 0.0},
      {0.6, 0.2533471031357997},   {0.9, 1.2815515655446004},     {0.975, 1.959963984540054},
      {0.99, 2.3263478740408408},  {0.999, 3.090232306167813},    {0.999999, 4.753424308817087},
  };
  for (const Case& c : cases) {
    CAPTURE(c.p);
    CHECK_RELATIVE(normal_quantile(c.p), c.quantile, 1e-14);
  }
}

TEST_CASE("normal_cdf matches scipy and an extended-precision erfc") {
  // scipy 1.10.1: [(x, scipy.stats.norm.cdf(x)) for x in [-37.0, -30.0, -20.0, -10.0, -5.0,
  //   -1.96, -1.0, 0.0, 0.5, 1.0, 3.0, 8.0]]
  // Tolerance 4 eps + 2 x^2 eps: scipy's ndtr evaluates erfc(x * (1/sqrt 2)) with the argument
  // rounded, and erfc(z) ~ e^(-z^2) turns a relative argument error e into a relative result error
  // of 2 z^2 e = x^2 e; normal_cdf corrects that rounding, so in the far tail scipy is the less
  // accurate of the two (1.1e-13 apart at x = -37).
  struct Case {
    double x;
    double cdf;
  };
  const std::vector<Case> cases = {
      {-37.0, 5.7255712225239266e-300}, {-30.0, 4.906713927147908e-198},
      {-20.0, 2.7536241186061556e-89},  {-10.0, 7.61985302416047e-24},
      {-5.0, 2.866515718791933e-07},    {-1.96, 0.024997895148220435},
      {-1.0, 0.15865525393145707},      {0.0, 0.5},
      {0.5, 0.6914624612740131},        {1.0, 0.8413447460685429},
      {3.0, 0.9986501019683699},        {8.0, 0.9999999999999993},
  };
  for (const Case& c : cases) {
    CAPTURE(c.x);
    CHECK_RELATIVE(normal_cdf(c.x), c.cdf, 4.0 * kEpsilon + 2.0 * c.x * c.x * kEpsilon);
  }

  // Independent reference: erfcl in long double (64-bit significand on x86-64, more elsewhere),
  // where the argument's rounding costs x^2 2^-64 < 1e-16 relative. Tolerance 1e-15 (measured
  // worst 3.7e-16 on this grid); skipped where long double is no wider than double.
  if constexpr (std::numeric_limits<long double>::digits >= 64) {
    for (int i = -3750; i <= 800; i += 7) {
      const double x = i / 100.0;
      const long double reference = 0.5L * std::erfc(-static_cast<long double>(x) / std::sqrt(2.0L));
      CAPTURE(x);
      CHECK_RELATIVE(normal_cdf(x), static_cast<double>(reference), 1e-15);
    }
  }
}

TEST_CASE("normal_cdf inverts normal_quantile") {
  // Round trip p -> x -> p. The cdf's relative condition number with respect to x is
  // |x phi(x) / Phi(x)| ~ x^2 in the lower tail, so a 1e-16 relative error in x becomes
  // x^2 1e-16 in p: tolerance 1e-15 + 4 x^2 eps.
  for (const double p : {1e-200, 1e-30, 1e-8, 0.001, 0.02, 0.2, 0.5, 0.7, 0.95, 0.999}) {
    const double x = normal_quantile(p);
    CAPTURE(p);
    CHECK_RELATIVE(normal_cdf(x), p, 1e-15 + 4.0 * x * x * kEpsilon);
  }
}

// ------------------------------------------------------------------------------------------------
// Chi-square distribution

TEST_CASE("chi_square_quantile reproduces the NIST/SEMATECH critical values") {
  // NIST/SEMATECH e-Handbook of Statistical Methods, section 1.3.6.7.4, "Critical values of the
  // chi-square distribution", upper-tail critical values printed to 3 decimals. Values recalled
  // from memory of that table; each agrees with scipy 1.10.1 round(scipy.stats.chi2.isf(q, dof), 3).
  // Tolerance: half a unit of the last printed digit, 0.0005.
  struct Case {
    double dof;
    double upper_tail;
    double critical_value;
  };
  const std::vector<Case> cases = {
      {1, 0.05, 3.841},   {1, 0.01, 6.635},  {2, 0.01, 9.210},   {3, 0.025, 9.348},   {5, 0.05, 11.070},
      {10, 0.05, 18.307}, {10, 0.95, 3.940}, {20, 0.05, 31.410}, {30, 0.001, 59.703}, {100, 0.05, 124.342},
  };
  for (const Case& c : cases) {
    CAPTURE(c.dof);
    CAPTURE(c.upper_tail);
    CHECK(std::fabs(chi_square_quantile(1.0 - c.upper_tail, c.dof) - c.critical_value) <= 0.0005);
  }
}

TEST_CASE("chi_square_quantile matches scipy for dof 0.5 to 1e6 and p 1e-10 to 1 - 1e-10") {
  // scipy 1.10.1: [(p, dof, scipy.stats.chi2.ppf(p, dof)) for dof in [0.5, 1, 2, 3, 10, 100, 1000,
  //   1e5, 1e6] for p in [1e-10, 0.001, 0.025, 0.5, 0.975, 0.999, 1 - 1e-10]]
  // Tolerance 1e-12 relative. Derivation: both sides evaluate the tail probability to better than
  // about 1e-13 relative, and the quantile's condition number P / (x f(x)) is at most 1/a = 4 on
  // this grid (dof 0.5, lower tail, where x ~ p^(1/a)), elsewhere below 1. Measured: the largest
  // difference is 4.2e-14 (dof 1e6, p 1e-10), where an 80-digit evaluation showed scipy to be the
  // one that is off; elsewhere below 1e-14.
  struct Case {
    double p;
    double dof;
    double quantile;
  };
  const std::vector<Case> cases = {
      // dof 0.5
      {1e-10, 0.5, 1.3499395786223568e-40},
      {0.001, 0.5, 1.3499395786230753e-12},
      {0.025, 0.5, 5.273202591259991e-07},
      {0.5, 0.5, 0.0873476047057468},
      {0.975, 0.5, 3.433235299960771},
      {0.999, 0.5, 8.752888515773373},
      {0.9999999999, 0.5, 38.949754531329184},
      // dof 1
      {1e-10, 1, 1.570796326794896e-20},
      {0.001, 1, 1.5707971492624921e-06},
      {0.025, 1, 0.0009820691171752555},
      {0.5, 1, 0.454936423119572},
      {0.975, 1, 5.023886187314888},
      {0.999, 1, 10.827566170662733},
      {0.9999999999, 1, 41.82145620298279},
      // dof 2
      {1e-10, 2, 2.0000000000999938e-10},
      {0.001, 2, 0.002001000667167068},
      {0.025, 2, 0.05063561596857975},
      {0.5, 2, 1.386294361119891},
      {0.975, 2, 7.377758908227871},
      {0.999, 2, 13.815510557964274},
      {0.9999999999, 2, 46.05170169440018},
      // dof 3
      {1e-10, 3, 5.20939762143448e-07},
      {0.001, 3, 0.024297585815692732},
      {0.025, 3, 0.21579528262389785},
      {0.5, 3, 2.3659738843753377},
      {0.975, 3, 9.348403604496148},
      {0.999, 3, 16.26623619623813},
      {0.9999999999, 3, 49.542155758766434},
      // dof 10
      {1e-10, 10, 0.05233106563190542},
      {0.001, 10, 1.4787434638356647},
      {0.025, 10, 3.2469727802368413},
      {0.5, 10, 9.34181776559197},
      {0.975, 10, 20.483177350807388},
      {0.999, 10, 29.58829844507442},
      {0.9999999999, 10, 68.16761795190413},
      // dof 100
      {1e-10, 100, 34.399823909124784},
      {0.001, 100, 61.91793920693662},
      {0.025, 100, 74.22192747492373},
      {0.5, 100, 99.33412923598846},
      {0.975, 100, 129.5611971858366},
      {0.999, 100, 149.44925277903886},
      {0.9999999999, 100, 217.71420284120487},
      // dof 1000
      {1e-10, 1000, 741.2680717193529},
      {0.001, 1000, 867.479082607277},
      {0.025, 1000, 914.257153799259},
      {0.5, 1000, 999.333412403381},
      {0.975, 1000, 1089.5309127749135},
      {0.999, 1000, 1143.9170926196791},
      {0.9999999999, 1000, 1311.3030076011555},
      // dof 1e5
      {1e-10, 1e5, 97181.37981805389},
      {0.001, 1e5, 98623.7038163696},
      {0.025, 1e5, 99125.37330064735},
      {0.5, 1e5, 99999.33333412347},
      {0.975, 1e5, 100878.41530566558},
      {0.999, 1e5, 101387.69553252945},
      {0.9999999999, 1e5, 102871.2418753302},
      // dof 1e6
      {1e-10, 1e6, 991029.9997743246},
      {0.001, 1e6, 995635.4506315956},
      {0.025, 1e6, 997230.0871432901},
      {0.5, 1e6, 999999.3333334123},
      {0.975, 1e6, 1002773.701467926},
      {0.999, 1e6, 1004375.9487461417},
      {0.9999999999, 1e6, 1009022.6223672478},
  };
  for (const Case& c : cases) {
    CAPTURE(c.p);
    CAPTURE(c.dof);
    CHECK_RELATIVE(chi_square_quantile(c.p, c.dof), c.quantile, 1e-12);
  }
}

TEST_CASE("chi_square_quantile has the closed forms of 1 and 2 degrees of freedom") {
  // dof 2 is the exponential distribution with mean 2: P(X <= x) = 1 - e^(-x/2), so
  // x = -2 log1p(-p) (exact algebra). Tolerance 1e-15: log1p is accurate
  // to an ulp and the condition number of the quantile is below 1.
  for (const double p : {1e-100, 1e-10, 0.3, 0.5, 0.9}) {
    CAPTURE(p);
    CHECK_RELATIVE(chi_square_quantile(p, 2.0), -2.0 * std::log1p(-p), 1e-15);
  }
  // dof 1: X = Z^2 with Z standard normal, so for small p, P(X <= x) = erf(sqrt(x/2)) ~
  // sqrt(2x/pi), x = pi p^2 / 2 (the next term is relative 1e-200 here). Tolerance 1e-15.
  CHECK_RELATIVE(chi_square_quantile(1e-100, 1.0), 0.5 * std::numbers::pi * 1e-200, 1e-15);
  // ... and in the upper tail x = z^2 with z = -Phi^-1(q/2). q is taken as 1 - p for the double p
  // passed in (exact for p >= 1/2), and q/2 is exact. normal_quantile is accurate to about 4e-16
  // relative, x to twice that: tolerance 2e-15.
  for (const double nominal_tail : {1e-15, 1e-10, 1e-4, 0.01, 0.3}) {
    const double p = 1.0 - nominal_tail;
    const double q = 1.0 - p;
    const double z = normal_quantile(0.5 * q);
    CAPTURE(q);
    CHECK_RELATIVE(chi_square_quantile(p, 1.0), z * z, 2e-15);
  }
}

TEST_CASE("chi_square_cdf and chi_square_survival match scipy, including tiny p-values") {
  // scipy 1.10.1: [(x, dof, scipy.stats.chi2.cdf(x, dof), scipy.stats.chi2.sf(x, dof)) for (x, dof)
  //   in [(3.841458820694124, 1), (100.0, 1), (1000.0, 10), (200.0, 3), (50.0, 100), (150.0, 100),
  //   (1e6, 1e6), (1.01e6, 1e6), (0.001, 0.5), (40.0, 0.5)]]
  // Tolerance 1e-13 relative on each tail: both implementations are accurate to a few 1e-14 here
  // (measured differences up to 1.8e-14, at dof 1e6, x = 1e6, where our series sums ~6000 terms).
  struct Case {
    double x;
    double dof;
    double cdf;
    double survival;
  };
  const std::vector<Case> cases = {
      {3.841458820694124, 1, 0.9500000000000001, 0.04999999999999989},
      {100.0, 1, 1.0, 1.5239706048320995e-23},
      {1000.0, 10, 1.0, 1.870290720915977e-208},
      {200.0, 3, 1.0, 4.218541107192018e-43},
      {50.0, 100, 6.953305247616201e-06, 0.9999930466947524},
      {150.0, 100, 0.9990960679576459, 0.0009039320423540184},
      {1000000.0, 1000000.0, 0.5001880631966055, 0.4998119368033945},
      {1010000.0, 1000000.0, 0.9999999999990932, 9.068528823262108e-13},
      {0.001, 0.5, 0.16495975076841285, 0.8350402492315872},
      {40.0, 0.5, 0.9999999999419685, 5.8031474753692365e-11},
  };
  for (const Case& c : cases) {
    CAPTURE(c.x);
    CAPTURE(c.dof);
    CHECK_RELATIVE(chi_square_cdf(c.x, c.dof), c.cdf, 1e-13);
    CHECK_RELATIVE(chi_square_survival(c.x, c.dof), c.survival, 1e-13);
  }
}

TEST_CASE("chi-square tails have the closed forms of 1 and 2 degrees of freedom") {
  // dof 2: P(X > x) = e^(-x/2), P(X <= x) = -expm1(-x/2). The relative condition number of e^(-x/2)
  // in x is x/2, so tolerance 4 eps (1 + x/2) covers the rounding inside both computations.
  for (const double x : {1e-20, 0.01, 1.0, 7.5, 60.0, 1000.0, 1400.0}) {
    CAPTURE(x);
    const double tolerance = 4.0 * kEpsilon * (1.0 + 0.5 * x);
    CHECK_RELATIVE(chi_square_survival(x, 2.0), std::exp(-0.5 * x), tolerance);
    CHECK_RELATIVE(chi_square_cdf(x, 2.0), -std::expm1(-0.5 * x), tolerance);
  }
  // dof 1: P(X > x) = erfc(sqrt(x/2)); x = 2 k^2 makes sqrt(x/2) = k exact, so erfc is evaluated
  // at an exact argument. Tolerance 8 eps (1 + x): condition number of erfc(sqrt(x/2)) in x is ~x/2.
  for (const double k : {0.5, 1.0, 2.0, 3.0, 5.0, 10.0, 20.0, 26.0}) {
    const double x = 2.0 * k * k;
    CAPTURE(x);
    const double tolerance = 8.0 * kEpsilon * (1.0 + x);
    CHECK_RELATIVE(chi_square_survival(x, 1.0), std::erfc(k), tolerance);
    CHECK_RELATIVE(chi_square_cdf(x, 1.0), std::erf(k), tolerance);
  }
}

TEST_CASE("chi_square_quantile inverts chi_square_cdf and the tails add to one") {
  // Round trip x -> p = cdf(x) -> quantile(p). The error in x is the cdf's relative error
  // (below 2e-13 against an 80-digit evaluation) times the condition number P / (x f(x)), which is
  // at most 1/a = 4 here: tolerance 1e-12.
  for (const double dof : {0.5, 1.0, 3.0, 10.0, 100.0, 1e4, 1e6}) {
    for (const double z : {-5.0, -2.0, 0.0, 1.0, 4.0}) {
      const double x = std::max(dof * 1e-3, dof + z * std::sqrt(2.0 * dof));
      const double p = chi_square_cdf(x, dof);
      CAPTURE(dof);
      CAPTURE(x);
      CHECK_RELATIVE(chi_square_quantile(p, dof), x, 1e-12);
      // P + Q = 1 up to the errors of the two tails, which are computed independently where the
      // smaller one would lose accuracy as 1 minus the larger: each is within a few 1e-14 near the
      // median (2.4e-14 measured against an 80-digit evaluation at dof 1e6): tolerance 1e-13.
      CHECK(std::fabs(p + chi_square_survival(x, dof) - 1.0) <= 1e-13);
    }
  }
}

TEST_CASE("chi_square_interval gives the two-sided quantiles") {
  // scipy 1.10.1: scipy.stats.chi2.interval(0.95, 10) and scipy.stats.chi2.interval(0.99, 1e6).
  // Tolerance 1e-12 as for the quantile grid above.
  const auto [low10, high10] = chi_square_interval(10.0, 0.95);
  CHECK_RELATIVE(low10, 3.246972780236842, 1e-12);
  CHECK_RELATIVE(high10, 20.483177350807388, 1e-12);
  const auto [low_large, high_large] = chi_square_interval(1e6, 0.99);
  CHECK_RELATIVE(low_large, 996360.9839353822, 1e-12);
  CHECK_RELATIVE(high_large, 1003646.5292584808, 1e-12);
  // Coverage close to 1: the upper point is solved from its tail (1 - c)/2 = 4.999889391399392e-13
  // (in double) rather than from (1 + c)/2, which would have lost 4 digits of that tail.
  // scipy 1.10.1: c = 1 - 1e-12; scipy.stats.chi2.isf((1 - c)/2, 3), scipy.stats.chi2.ppf((1 - c)/2, 3).
  const auto [low3, high3] = chi_square_interval(3.0, 1.0 - 1e-12);
  CHECK_RELATIVE(low3, 1.5232144864881596e-08, 1e-12);
  CHECK_RELATIVE(high3, 60.3289746962277, 1e-12);
}

TEST_CASE("distribution functions return NaN outside their domain") {
  CHECK(std::isnan(normal_quantile(0.0)));
  CHECK(std::isnan(normal_quantile(1.0)));
  CHECK(std::isnan(normal_quantile(-0.1)));
  CHECK(std::isnan(normal_quantile(kNaN)));
  CHECK(std::isnan(normal_cdf(kNaN)));
  CHECK(normal_cdf(-std::numeric_limits<double>::infinity()) == 0.0);
  CHECK(normal_cdf(std::numeric_limits<double>::infinity()) == 1.0);

  CHECK(std::isnan(chi_square_quantile(0.0, 3.0)));
  CHECK(std::isnan(chi_square_quantile(1.0, 3.0)));
  CHECK(std::isnan(chi_square_quantile(0.5, 0.0)));
  CHECK(std::isnan(chi_square_quantile(0.5, -2.0)));
  CHECK(std::isnan(chi_square_quantile(kNaN, 2.0)));
  CHECK(std::isnan(chi_square_quantile(0.5, kNaN)));
  CHECK(std::isnan(chi_square_cdf(1.0, 0.0)));
  CHECK(std::isnan(chi_square_cdf(kNaN, 1.0)));
  CHECK(std::isnan(chi_square_survival(1.0, -1.0)));
  CHECK(chi_square_cdf(-1.0, 3.0) == 0.0);
  CHECK(chi_square_cdf(0.0, 3.0) == 0.0);
  CHECK(chi_square_survival(0.0, 3.0) == 1.0);
  CHECK(chi_square_cdf(std::numeric_limits<double>::infinity(), 3.0) == 1.0);
  CHECK(chi_square_survival(std::numeric_limits<double>::infinity(), 3.0) == 0.0);

  const auto [low, high] = chi_square_interval(3.0, 1.0);
  CHECK(std::isnan(low));
  CHECK(std::isnan(high));
  CHECK(std::isnan(chi_square_interval(0.0, 0.9).first));
}

// ------------------------------------------------------------------------------------------------
// Ljung-Box

TEST_CASE("ljung_box on eight values, worked by hand") {
  // x = 1 3 2 5 4 6 3 4, n = 8, mean 28/8 = 3.5
  // d = x - mean = -2.5 -0.5 -1.5 1.5 0.5 2.5 -0.5 0.5
  // sum d^2 = 6.25 + 0.25 + 2.25 + 2.25 + 0.25 + 6.25 + 0.25 + 0.25 = 18
  // lag 1: 1.25 + 0.75 - 2.25 + 0.75 + 1.25 - 1.25 - 0.25 = 0.25          -> r1 = 0.25/18 = 1/72
  // lag 2: 3.75 - 0.75 - 0.75 + 3.75 - 0.25 + 1.25 = 7                      -> r2 = 7/18
  // Q = n(n+2) (r1^2/(n-1) + r2^2/(n-2)) = 80 (1/(5184*7) + (49/324)/6)
  //   = 80 (3 + 2744)/108864 = 13735/6804 = 2.018665490887713 (checked with Python fractions)
  // p = P(chi2(2) > Q) = exp(-Q/2) = 0.36446208744347397 (scipy 1.10.1: scipy.stats.chi2.sf(Q, 2))
  // Tolerance 1e-14: a few roundings in sums of exactly representable values and two divisions.
  const std::vector<double> x = {1, 3, 2, 5, 4, 6, 3, 4};
  const LjungBoxResult result = ljung_box(x, 2);
  CHECK_RELATIVE(result.statistic, 13735.0 / 6804.0, 1e-14);
  CHECK_RELATIVE(result.p_value, 0.36446208744347397, 1e-14);
  CHECK(result.lags == 2);
  CHECK(result.degrees_of_freedom == 2);
  CHECK(result.pairs_used == 13);  // 7 pairs at lag 1 + 6 at lag 2

  const std::vector<double> r = autocorrelation(x, 2);
  REQUIRE(r.size() == 3);
  CHECK(r[0] == 1.0);
  CHECK_RELATIVE(r[1], 1.0 / 72.0, 1e-15);
  CHECK_RELATIVE(r[2], 7.0 / 18.0, 1e-15);
}

TEST_CASE("ljung_box matches a numpy evaluation of the textbook formula") {
  // Fixed 20-value series; numpy 1.24.2, scipy 1.10.1:
  //   x = np.asarray(y, float); n = len(x); d = x - x.mean(); c0 = np.sum(d*d)
  //   r = np.array([np.sum(d[:n-k]*d[k:])/c0 for k in range(1, 6)])
  //   Q = n*(n+2)*np.sum(r**2/(n - np.arange(1, 6)))        -> 11.457565361534439
  //   scipy.stats.chi2.sf(Q, 5) -> 0.043025777531465074, scipy.stats.chi2.sf(Q, 4) -> 0.02187549030600944
  // Tolerance 1e-12: numpy sums pairwise and we sum in order; the lag sums cancel (|r_k| down to
  // 0.04), which amplifies summation differences of ~n eps by about 25.
  const std::vector<double> y = {0.3, -1.2, 0.8,  1.5,  -0.4, 0.1, -0.9, 2.1, 0.6,  -1.7,
                                 0.2, 1.1,  -0.3, -0.8, 1.4,  0.5, -1.1, 0.9, -0.2, 0.7};
  const LjungBoxResult result = ljung_box(y, 5);
  CHECK_RELATIVE(result.statistic, 11.457565361534439, 1e-12);
  CHECK_RELATIVE(result.p_value, 0.043025777531465074, 1e-12);
  CHECK(result.pairs_used == 19 + 18 + 17 + 16 + 15);

  // One fitted parameter removes one degree of freedom; the statistic is unchanged.
  const LjungBoxResult fitted = ljung_box(y, 5, 1);
  CHECK(fitted.degrees_of_freedom == 4);
  CHECK(fitted.statistic == result.statistic);
  CHECK_RELATIVE(fitted.p_value, 0.02187549030600944, 1e-12);

  // Same numpy estimator for r_1..r_5, as printed by numpy 1.24.2.
  const std::vector<double> expected_r = {-0.28667502088554725, -0.5119465329991647, 0.20827067669172927,
                                          0.26777360066833755, -0.04260651629072682};
  const std::vector<double> r = autocorrelation(y, 5);
  REQUIRE(r.size() == 6);
  for (std::size_t k = 1; k <= 5; ++k) {
    CAPTURE(k);
    CHECK_RELATIVE(r[k], expected_r[k - 1], 1e-12);
  }
}

TEST_CASE("ljung_box keeps tiny p-values of strongly correlated series") {
  // x_t = sin(0.3 t), t = 0..29, 4 lags. numpy 1.24.2 with the expression of the previous test:
  //   Q = 72.33291837473091; scipy 1.10.1: scipy.stats.chi2.sf(Q, 4) = 7.298902010776192e-15.
  // Tolerances: Q 1e-12 as above; the p-value's relative condition number in Q is about Q/2 = 36,
  // so 1e-12 on Q allows 4e-11 on p: tolerance 1e-10.
  std::vector<double> x(30);
  for (std::size_t t = 0; t < x.size(); ++t) x[t] = std::sin(0.3 * static_cast<double>(t));
  const LjungBoxResult result = ljung_box(x, 4);
  CHECK_RELATIVE(result.statistic, 72.33291837473091, 1e-12);
  CHECK_RELATIVE(result.p_value, 7.298902010776192e-15, 1e-10);
}

TEST_CASE("ljung_box with missing values uses the pairs where both values are present") {
  // x = 1 NaN 3 5 2 4: m = 5 present values, mean 15/5 = 3, d = -2 NaN 0 2 -1 1, S0 = 4+0+4+1+1 = 10
  // lag 1 pairs (t, t+1) with both present: (2,3) 0*2, (3,4) 2*-1, (4,5) -1*1  -> n1 = 3, S1 = -3
  //   r1 = (S1 / (n1 + 1)) / (S0 / m) = (-3/4) / 2 = -0.375
  // lag 2 pairs: (0,2) -2*0, (2,4) 0*-1, (3,5) 2*1                          -> n2 = 3, S2 = 2
  //   r2 = (2/5) / 2 = 0.2
  // Q = sum_k N_k (N_k + 2) r_k^2 / n_k with N_k = n_k + k:
  //   4*6*0.140625/3 + 5*7*0.04/3 = 1.125 + 7/15 = 191/120 (checked with Python fractions)
  const std::vector<double> x = {1, kNaN, 3, 5, 2, 4};
  const LjungBoxResult result = ljung_box(x, 2);
  CHECK_RELATIVE(result.statistic, 191.0 / 120.0, 1e-15);
  CHECK(result.pairs_used == 6);
  const std::vector<double> r = autocorrelation(x, 2);
  CHECK_RELATIVE(r[1], -0.375, 1e-15);
  CHECK_RELATIVE(r[2], 0.2, 1e-15);

  // Missing values at either end change nothing: no pair is lost and the scaling N_k = n_k + k
  // stays as for the trimmed series.
  const std::vector<double> eight = {1, 3, 2, 5, 4, 6, 3, 4};
  const std::vector<double> padded = {kNaN, 1, 3, 2, 5, 4, 6, 3, 4, kNaN, kNaN};
  CHECK(ljung_box(padded, 2).statistic == ljung_box(eight, 2).statistic);
  CHECK(ljung_box(padded, 2).pairs_used == 13);
}

TEST_CASE("default_ljung_box_lags is min(10, n/5) and at least 1") {
  CHECK(default_ljung_box_lags(0) == 1);
  CHECK(default_ljung_box_lags(4) == 1);
  CHECK(default_ljung_box_lags(10) == 2);
  CHECK(default_ljung_box_lags(49) == 9);
  CHECK(default_ljung_box_lags(50) == 10);
  CHECK(default_ljung_box_lags(1000000) == 10);
}

// ------------------------------------------------------------------------------------------------
// Jarque-Bera

TEST_CASE("jarque_bera on five values, worked by hand") {
  // x = 1 2 3 4 10, n = 5, mean 4, d = -3 -2 -1 0 6
  // m2 = (9 + 4 + 1 + 0 + 36)/5 = 10, m3 = (-27 - 8 - 1 + 0 + 216)/5 = 36,
  // m4 = (81 + 16 + 1 + 0 + 1296)/5 = 278.8
  // S = 36 / 10^1.5 = 1.1384199576606167, S^2 = 1.296, K = 278.8/100 = 2.788, K - 3 = -0.212
  // JB = 5/6 (1.296 + 0.044944/4) = 5/6 * 1.307236 = 326809/300000 = 1.0893633333333333
  // scipy 1.10.1: scipy.stats.jarque_bera([1, 2, 3, 4, 10]) -> statistic 1.0893633333333337,
  //   pvalue 0.5800263956901164; scipy.stats.skew(x) -> 1.1384199576606167,
  //   scipy.stats.kurtosis(x) -> -0.21199999999999974 (both biased, Fisher's excess kurtosis).
  // Tolerance 1e-14 (1e-13 for the excess kurtosis, which cancels 2.788 - 3 and so loses a digit).
  const std::vector<double> x = {1, 2, 3, 4, 10};
  const JarqueBeraResult result = jarque_bera(x);
  CHECK(result.n == 5);
  CHECK_RELATIVE(result.statistic, 326809.0 / 300000.0, 1e-14);
  CHECK_RELATIVE(result.statistic, 1.0893633333333337, 1e-14);
  CHECK_RELATIVE(result.p_value, 0.5800263956901164, 1e-14);
  CHECK_RELATIVE(result.skewness, 1.1384199576606167, 1e-14);
  CHECK_RELATIVE(result.excess_kurtosis, -0.212, 1e-13);
}

TEST_CASE("jarque_bera matches scipy and skips missing values") {
  // The 20-value series of the Ljung-Box test. scipy 1.10.1: scipy.stats.jarque_bera(y) ->
  //   statistic 0.47362941111131734, pvalue 0.7891374972653754; scipy.stats.skew(y) ->
  //   -0.05862472631917642; scipy.stats.kurtosis(y) -> -0.7447199871022581.
  // Tolerance 1e-12: m3 is a sum of cubes of both signs that cancels to 6% of its terms.
  const std::vector<double> y = {0.3, -1.2, 0.8,  1.5,  -0.4, 0.1, -0.9, 2.1, 0.6,  -1.7,
                                 0.2, 1.1,  -0.3, -0.8, 1.4,  0.5, -1.1, 0.9, -0.2, 0.7};
  const JarqueBeraResult result = jarque_bera(y);
  CHECK(result.n == 20);
  CHECK_RELATIVE(result.statistic, 0.47362941111131734, 1e-12);
  CHECK_RELATIVE(result.p_value, 0.7891374972653754, 1e-12);
  CHECK_RELATIVE(result.skewness, -0.05862472631917642, 1e-12);
  CHECK_RELATIVE(result.excess_kurtosis, -0.7447199871022581, 1e-12);

  std::vector<double> with_gaps = y;
  with_gaps.insert(with_gaps.begin() + 3, kNaN);
  with_gaps.push_back(kNaN);
  const JarqueBeraResult gaps = jarque_bera(with_gaps);
  CHECK(gaps.n == 20);
  CHECK(gaps.statistic == result.statistic);
}

// ------------------------------------------------------------------------------------------------
// Degenerate inputs: NaN results, no crash.

TEST_CASE("residual tests on too few values, constant series and all-missing series") {
  const std::vector<double> empty;
  const std::vector<double> two = {1.0, 2.0};
  const std::vector<double> constant(50, 0.1);
  const std::vector<double> missing(12, kNaN);

  SUBCASE("too few values for the lags") {
    const LjungBoxResult short_series = ljung_box(two, 5);
    CHECK(std::isnan(short_series.statistic));
    CHECK(std::isnan(short_series.p_value));
    CHECK(short_series.pairs_used == 1);  // only lag 1 has a pair
    CHECK(std::isnan(ljung_box(empty, 1).statistic));
    CHECK(std::isnan(ljung_box(two, 0).statistic));  // lags < 1
    const std::vector<double> r = autocorrelation(two, 3);
    REQUIRE(r.size() == 4);
    CHECK(r[0] == 1.0);
    CHECK(r[1] == -0.5);  // d = -0.5 0.5: S1 = -0.25, S0 = 0.5
    CHECK(std::isnan(r[2]));
    CHECK(std::isnan(r[3]));
    CHECK(autocorrelation(two, -1).empty());
    CHECK(std::isnan(jarque_bera(std::vector<double>{3.0}).statistic));
    CHECK(jarque_bera(std::vector<double>{3.0}).n == 1);
    CHECK(std::isnan(jarque_bera(empty).statistic));
  }

  SUBCASE("fitted parameters leave no degrees of freedom") {
    const std::vector<double> x = {1, 3, 2, 5, 4, 6, 3, 4};
    const LjungBoxResult result = ljung_box(x, 2, 2);
    CHECK(result.degrees_of_freedom == 0);
    CHECK(std::isfinite(result.statistic));
    CHECK(std::isnan(result.p_value));
  }

  SUBCASE("constant series: zero variance") {
    const LjungBoxResult result = ljung_box(constant, 5);
    CHECK(std::isnan(result.statistic));
    CHECK(std::isnan(result.p_value));
    for (const double r : autocorrelation(constant, 3)) CHECK(std::isnan(r));
    const JarqueBeraResult jb = jarque_bera(constant);
    CHECK(jb.n == 50);
    CHECK(std::isnan(jb.statistic));
    CHECK(std::isnan(jb.skewness));
    CHECK(std::isnan(jb.p_value));
  }

  SUBCASE("infinite values give NaN, not a crash") {
    const std::vector<double> x = {1.0, std::numeric_limits<double>::infinity(), 2.0, 3.0};
    CHECK(std::isnan(ljung_box(x, 1).statistic));
    CHECK(std::isnan(jarque_bera(x).statistic));
  }

  SUBCASE("all values missing") {
    const LjungBoxResult result = ljung_box(missing, 3);
    CHECK(std::isnan(result.statistic));
    CHECK(std::isnan(result.p_value));
    CHECK(result.pairs_used == 0);
    for (const double r : autocorrelation(missing, 2)) CHECK(std::isnan(r));
    const JarqueBeraResult jb = jarque_bera(missing);
    CHECK(jb.n == 0);
    CHECK(std::isnan(jb.statistic));
  }
}

}  // namespace statewise
