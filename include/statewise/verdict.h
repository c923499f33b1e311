#pragma once
/// \file verdict.h
/// Plain-sentence verdicts on a filter's consistency, from the test results of consistency.h: whether
/// the innovations are too large or too small (and by what factor), biased, correlated in time,
/// heavy-tailed or otherwise not Gaussian, or rejected by the gate far more often than the gate's
/// probability allows; or that they look as the model predicts.
///
/// Each finding rests on one test. So that a model that fits draws a false complaint in at most about
/// 1% of runs, a test counts only when its p-value is below the level divided by the number of tests
/// made (Bonferroni's correction). The rules are in docs/algorithms.md.

#include <cstddef>
#include <string>
#include <vector>

#include "statewise/consistency.h"

namespace statewise {

/// What a verdict says.
enum class Finding {
  consistent,         ///< no test failed: white, Gaussian and of the expected size
  too_large,          ///< the average NIS is above its range: Q or R too small
  too_small,          ///< the average NIS is below its range: Q or R too large
  channel_too_large,  ///< a channel's standardized innovations have a mean square above its expectation
  channel_too_small,  ///< ... below it
  biased,             ///< a channel's innovations have a nonzero mean
  correlated,         ///< Ljung–Box rejects whiteness: the dynamics miss something
  heavy_tailed,       ///< Jarque–Bera rejects with positive excess kurtosis: outliers
  not_gaussian,       ///< Jarque–Bera rejects otherwise: skewed or light-tailed
  many_rejected,      ///< the gate rejected far more values than 1 - P
  too_few_values,     ///< a channel has too few values to be tested
};

/// The finding's name in reports: "consistent", "too_large", "channel_too_large", ...
const char* finding_code(Finding finding);

/// One verdict.
struct Verdict {
  Finding finding = Finding::consistent;  ///< what it says
  std::string channel;                    ///< the channel it is about; empty for the whole model
  std::string text;                       ///< the plain sentence(s)
};

/// How verdicts are reached.
struct VerdictOptions {
  double level = 0.01;              ///< family-wise significance level, in (0, 1)
  double gate_probability = 0.0;    ///< the outlier gate's P, 0 when no gate was used
  std::size_t minimum_values = 20;  ///< channels with fewer used values are not tested
};

/// The verdicts on a run, model-wide findings first, then per channel in model order. Never empty
/// for a model with channels: a run where no test fails gets one `consistent` verdict first, and each
/// channel that could not be tested a `too_few_values` verdict.
std::vector<Verdict> judge(const ConsistencySummary& summary, const VerdictOptions& options = {});

/// True when no verdict reports a failed test (only `consistent` and `too_few_values`).
bool all_consistent(const std::vector<Verdict>& verdicts);

/// A number in at most `digits` significant digits for sentences ("9.83", "0.0012", "1.2e-05").
std::string format_significant(double value, int digits = 3);

/// A p-value for sentences: "p = 0.0031", "p = 2.1e-13", or "p < 1e-16" below that.
std::string format_p_value(double p);

}  // namespace statewise
