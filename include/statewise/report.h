#pragma once
/// \file report.h
/// The JSON report of a filter or smooth run (keys documented in docs/outputs.md).

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "statewise/diagnostics.h"
#include "statewise/diagnostics_report.h"

namespace statewise {

/// Everything a run reports besides its rows.
struct RunReport {
  std::string command;                             ///< "filter" or "smooth"
  long long lag = -1;                              ///< smooth --lag K: K (written as "lag"); -1 = none
  std::string model_path;                          ///< the model file as given
  std::string input_path;                          ///< the log as given ("-" for standard input)
  std::size_t rows = 0;                            ///< rows read and estimated
  int states = 0;                                  ///< n
  double log_likelihood = 0.0;                     ///< sum over rows of log N(v_t; 0, S_t) of the observed values
  std::vector<ChannelInnovationSummary> channels;  ///< one per measured channel
  NisSummary nis;                                  ///< time-averaged normalized innovation squared
  std::vector<std::string> warnings;               ///< plain sentences
  /// Consistency tests, verdicts, numerics, rejected values and stuck sensors (diagnostics_report.h);
  /// written as the keys `numerics`, `diagnostics`, `verdicts`, `rejected` and `stuck` when set.
  std::optional<DiagnosticsReport> diagnostics;
};

/// The report as pretty JSON text (NaN becomes null), ending with a newline.
std::string write_report_json(const RunReport& report);

}  // namespace statewise
