#pragma once
// Pieces shared by the commands that estimate rows of a log (filter, smooth, smooth --lag), defined
// in cli/estimate_commands.cpp.

#include <cstddef>
#include <string>

#include "cli/commands.h"
#include "cli/log_input.h"
#include "statewise/csv.h"
#include "statewise/filter.h"
#include "statewise/forward_pass.h"
#include "statewise/output_table.h"
#include "statewise/report.h"
#include "statewise/time_axis.h"

namespace statewise::cli {

/// Transitions kept by the streaming commands: enough for every gap of a regular or step-based log,
/// bounded for an endless stream of ever-new gaps.
inline constexpr std::size_t kStreamingCacheCapacity = 256;

/// The CSV reading options of --delimiter and --missing.
CsvOptions csv_options(const EstimateOptions& options);
/// The time-axis options of --duplicates and --regular.
TimelineOptions timeline_options(const EstimateOptions& options);
/// Throws NumericalFailure for a failed filter step at `place` (file:line).
[[noreturn]] void fail_step(StepStatus status, const std::string& place);
/// Adds the warnings about inserted and merged rows and uneven spacing.
void add_timeline_warnings(RunReport& report, const Timeline& timeline, const SpacingWatch& spacing,
                           const EstimateOptions& options);
/// The estimates table's format: the optional columns follow --reject and `innovations`.
TableFormat table_format(const EstimateOptions& options, bool innovations);
/// A report with the command, the paths and the state count filled in.
RunReport start_report(const char* command, const EstimateOptions& options, const StateSpaceModel& model);
/// Fills the report from the forward pass (statistics, diagnostics, warnings) and writes it to --report.
void finish_report(RunReport& report, const ForwardPass& pass, const EstimateOptions& options,
                   const CsvReader& reader);

}  // namespace statewise::cli
