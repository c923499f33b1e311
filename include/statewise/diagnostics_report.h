#pragma once
/// \file diagnostics_report.h
/// What a run found out about the model and the data, for the JSON report of `filter` and `smooth`
/// and the readable text of `diagnose`: the consistency tests and verdicts, the numerics used, the
/// values the outlier gate rejected and the stuck sensors found. Keys and layout are documented in
/// docs/outputs.md.

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "statewise/consistency.h"
#include "statewise/forward_pass.h"
#include "statewise/screening.h"
#include "statewise/verdict.h"

namespace statewise {

struct RunReport;

/// The diagnostics of one run.
struct DiagnosticsReport {
  ConsistencySummary consistency;                 ///< the tests, per channel and for the whole model
  std::vector<Verdict> verdicts;                  ///< plain sentences (verdict.h)
  double level = 0.01;                            ///< family-wise level of the verdicts
  int ljung_box_lags_option = 0;                  ///< the lags asked for; 0 = automatic (min(10, n/5))
  Numerics numerics_requested = Numerics::plain;  ///< what the user asked for
  Numerics numerics_used = Numerics::plain;       ///< what the run ended with
  std::optional<NumericsSwitch> numerics_switch;  ///< where plain switched to square-root
  double reject_probability = 0.0;                ///< the gate's P; 0 = no gate
  GateMode gate_mode = GateMode::per_channel;     ///< how the gate tested rows
  RejectionLog rejections;                        ///< what it rejected
  std::size_t stuck_run_length = 0;               ///< run length that counts as stuck; 0 = detection off
  std::size_t stuck_run_count = 0;                ///< stuck runs found
  std::vector<StuckRun> stuck_runs;               ///< the first kStuckRunsKept of them
};

/// Collects the diagnostics of a finished forward pass and judges them (judge() at the default level).
DiagnosticsReport make_diagnostics_report(const ForwardPass& pass);

/// Plain-sentence warnings for the report: each stuck run with its lines, and the switch to the
/// square-root form. `input` names the log in the sentences.
std::vector<std::string> diagnostics_warnings(const DiagnosticsReport& diagnostics, const std::string& input);

/// The readable text of `statewise diagnose`: the run, the verdicts, the whole-model and per-channel
/// test results, rejected values and warnings, lines of at most about 100 characters.
/// `report.diagnostics` must be set.
std::string write_diagnostics_text(const RunReport& report);

}  // namespace statewise
