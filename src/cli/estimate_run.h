#pragma once
// One run of the filter or the smoother over a log's rows, whatever the rows come from (a CSV file,
// or one group of a table split by --by), writing table rows into a caller's buffer, and the pieces the
// estimate commands share (filter, smooth, smooth --lag). `filter` and
// `smooth` run it once over the whole log; `--by` runs it once per group (cli/grouped_run.h).

#include <cstddef>
#include <functional>
#include <string>

#include "cli/commands.h"
#include "cli/log_input.h"
#include "statewise/csv.h"
#include "statewise/time_axis.h"
#include "statewise/forward_pass.h"
#include "statewise/model.h"
#include "statewise/output_table.h"
#include "statewise/report.h"
#include "statewise/run_state.h"
#include "statewise/series.h"

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
/// A report with the command, the paths and the state count filled in.
RunReport start_report(const char* command, const EstimateOptions& options, const StateSpaceModel& model);
/// Fills the report from the forward pass (statistics, diagnostics, warnings); `file` names the log.
void finish_report(RunReport& report, const ForwardPass& pass, const std::string& file);
/// Writes the report to --report, if given.
void write_report_file(const EstimateOptions& options, const RunReport& report);

/// The log rows of one run in the log's order: fills `row` with the next one; false at the end.
using RowSource = std::function<bool(ObservationRow&)>;

/// A text column written before every row of a table (the group column of --by), in the table's syntax.
class LeadColumn {
 public:
  /// The column `name` holding `value` on every row, for tables in `format`'s syntax.
  LeadColumn(const std::string& name, const std::string& value, const TableFormat& format);
  /// Appends the column's part of the header line (csv, tsv: the name and a separator; jsonl: nothing).
  void append_header(std::string& out) const { out += header_; }
  /// Puts the cell into the row that starts at `row_start` of `out` (the row is the last thing in it).
  void apply(std::string& out, std::size_t row_start) const;

 private:
  std::string header_;
  std::string cell_;     // the cell with its separator: `A,` (csv), `A\t` (tsv), `"sensor":"A",` (jsonl)
  bool inside_ = false;  // jsonl: after the row's opening brace
};

/// Where a run puts its table rows.
struct TableSink {
  std::string& buffer;                           // rows are appended here
  const LeadColumn* lead = nullptr;              // written before each row; null = none
  std::function<void(std::string&)> after_row;   // called after each row (to write out); may be empty
};

/// The estimates table's format from the options: digits, --format, and the optional columns
/// (c_rejected with --reject; c_innov and c_z when `innovations`).
TableFormat table_format(const EstimateOptions& options, bool innovations);

/// Raises InputError at --plot when it is combined with a --format other than csv (the page draws a CSV table).
void check_plot_format(const EstimateOptions& options);

/// Checks the options that do not depend on the log (--sort, --regular, --duplicates, the trust
/// options, --format) against the model before any file is read; raises InputError naming the option.
void check_estimate_options(const StateSpaceModel& model, const EstimateOptions& options);

/// A filter run that continues a saved one (--state): the log rows the saved state accounts for are
/// skipped, the timeline and the filter start where it stopped, and what the next state needs is kept.
struct FilterResume {
  const SeriesState* saved = nullptr;  ///< the saved point; null = start at the model's prior
  std::string group;                   ///< the group's name in the state file ("" without --by)
  SeriesState next;                    ///< after the run: the state to save
  std::uint64_t skipped = 0;           ///< log rows skipped as already processed
};

/// Runs the Kalman filter from `filter`'s current state over `rows` (through the time axis of
/// --sort, --duplicates, --regular), appending a row per timeline row to `sink`, and returns the
/// report (not written anywhere). `file` names the log in messages. With `resume`, continues the saved
/// run it names and fills in its next state. Raises InputError for bad input and NumericalFailure when
/// the filter breaks down.
RunReport filter_rows(const StateSpaceModel& model, const EstimateOptions& options, const RowSource& rows,
                      const std::string& file, ForwardPass& filter, TableSink& sink, FilterResume* resume = nullptr);

/// Filters `rows` (as filter_rows), then runs the RTS smoother backwards and appends the smoothed
/// rows to `sink`; with `plot_table`, also the table with innovation columns, for --plot.
RunReport smooth_rows(const StateSpaceModel& model, const EstimateOptions& options, const RowSource& rows,
                      const std::string& file, TableSink& sink, std::string* plot_table);

}  // namespace statewise::cli
