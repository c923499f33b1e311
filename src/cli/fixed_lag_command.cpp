// `statewise smooth --lag K`: the filter streams the log as in `filter`, a fixed-lag smoother
// (statewise/fixed_lag.h) turns its moments into each row's estimate given K more rows, and the row
// is written as soon as that estimate is final. Memory holds K+1 rows, whatever the log's length.

#include <string>
#include <vector>

#include "cli/commands.h"
#include "cli/estimate_run.h"
#include "cli/exit_codes.h"
#include "cli/log_input.h"
#include "cli/output_file.h"
#include "statewise/discretize.h"
#include "statewise/error.h"
#include "statewise/fixed_lag.h"
#include "statewise/forward_pass.h"
#include "statewise/output_table.h"
#include "statewise/report.h"
#include "statewise/series.h"

namespace statewise::cli {

namespace {

// What a row's output line needs besides its smoothed moments, kept until they are final.
struct PendingRow {
  std::string time_text;
  std::size_t line = 0;                 // 0 for a row inserted by --regular
  std::vector<double> values;           // m values as the filter used them (NaN = missing or rejected)
  std::vector<unsigned char> rejected;  // m flags of the gate
  InnovationRecord record;              // the filter's innovations of the row
};

// A ring of the last K+1 rows' PendingRow, grown during the first K+1 rows and reused after.
class PendingRows {
 public:
  explicit PendingRows(std::size_t lag) : ring_size_(lag + 1 == 0 ? lag : lag + 1) {}
  PendingRow& add(std::size_t row) {
    if (rows_.size() < ring_size_ && rows_.size() == row) rows_.emplace_back();
    return at(row);
  }
  PendingRow& at(std::size_t row) { return rows_[row % ring_size_]; }

 private:
  std::size_t ring_size_;
  std::vector<PendingRow> rows_;
};

}  // namespace

int run_fixed_lag_smooth(const EstimateOptions& options) {
  if (!options.by.empty())
    raise_input_error({"--lag", 0, 0, ""},
                      "fixed-lag smoothing streams one log and cannot be combined with --by; run smooth --by "
                      "without --lag, or one smooth --lag per sensor");
  const StateSpaceModel model = load_model(options.model_path);
  if (model.has_diffuse_states())
    raise_input_error({options.model_path, 0, 0, "initial.diffuse"},
                      "smooth --lag needs a proper initial covariance for every state (the exact diffuse "
                      "smoother works on the whole log); give the states an initial covariance instead of "
                      "\"diffuse\", or run smooth without --lag");
  check_plot_format(options);
  check_sort_flag(model, options.sort);
  const auto lag = static_cast<std::size_t>(options.lag);
  Timeline timeline(model, timeline_options(options), options.input_path == "-" ? "<stdin>" : options.input_path);
  const ForwardPassOptions pass_options = forward_pass_options(options.trust);
  CsvReader reader = CsvReader::open(options.input_path, csv_options(options));
  ObservationStream stream(reader, model);
  OutputFile output(options.output_path, options.input_path);
  const std::string& file = reader.display_name();

  const EstimateTableWriter writer(model, EstimateKind::smoothed, table_format(options, options.trust.innovations));
  // With --plot, the table (with innovation columns, as smooth draws it) is kept for the plot.
  const EstimateTableWriter plot_writer(model, EstimateKind::smoothed, table_format(options, true));
  const bool plot = !options.trust.plot_path.empty();
  const bool gated = !options.trust.reject.empty();
  const auto m = static_cast<std::size_t>(model.channel_count());
  TransitionCache transitions(model, kStreamingCacheCapacity);
  SpacingWatch spacing(model, options.regular_step);
  ForwardPass filter(model, pass_options);
  FixedLagSmoother smoother(model.state_count(), lag);
  PendingRows pending(lag);

  std::string buffer, plot_table;
  if (options.header) writer.append_header(buffer);
  if (plot) plot_writer.append_header(plot_table);
  if (output.interactive()) {  // the header at once: the first row may be K rows away
    output.write_buffer(buffer);
    output.flush();
  }
  auto check_smoother = [&]() {
    const SmoothStatus& status = smoother.status();
    if (status.ok) return;
    const PendingRow& row = pending.at(status.row);
    throw NumericalFailure{row_place(file, row.line, row.time_text) + ": " + status.message};
  };
  // Writes the row the smoother has just handed out.
  auto write_ready = [&]() {
    const PendingRow& row = pending.at(smoother.row());
    const unsigned char* rejected = gated ? row.rejected.data() : nullptr;
    writer.append_row(buffer, row.time_text, row.values.data(), smoother.mean(), smoother.covariance(), &row.record,
                      rejected);
    if (plot)
      plot_writer.append_row(plot_table, row.time_text, row.values.data(), smoother.mean(), smoother.covariance(),
                             &row.record, rejected);
    if (output.interactive()) {
      output.write_buffer(buffer);
      output.flush();
    } else if (buffer.size() >= (1u << 16)) {
      output.write_buffer(buffer);
    }
  };

  std::vector<double> previous_inputs;
  std::size_t rows = 0;
  read_timeline(stream, timeline, options.sort, [&](TimelineRow& row) {
    const Transition* transition = nullptr;
    const double* inputs = previous_inputs.empty() ? nullptr : previous_inputs.data();
    if (rows > 0) {
      transition = &transitions.transition(row.gap);
      filter.predict(*transition, inputs);
    }
    const StepStatus status = filter.update(row.row.values.data(), row.row.line);
    if (status != StepStatus::ok) fail_step(status, row_place(file, row));
    spacing.add(row);
    PendingRow& kept = pending.add(rows);
    kept.time_text = row.row.time_text;
    kept.line = row.row.line;
    kept.values.assign(filter.used_values(), filter.used_values() + m);
    kept.rejected.assign(filter.rejected(), filter.rejected() + m);
    kept.record = filter.record();
    ++rows;
    if (smoother.push(transition, inputs, filter.mean(), filter.covariance())) write_ready();
    check_smoother();
    previous_inputs = row.row.inputs;
  });
  while (smoother.flush()) write_ready();
  check_smoother();
  output.write_buffer(buffer);
  output.commit();

  RunReport report = start_report("smooth", options, model);
  report.lag = options.lag;
  if (smoother.status().pseudo_inverse_rows > 0)
    report.warnings.push_back("the predicted covariance was singular on " +
                              std::to_string(smoother.status().pseudo_inverse_rows) +
                              " rows; the smoother used a pseudo-inverse there (Q may be zero in some direction)");
  add_timeline_warnings(report, timeline, spacing, options);
  finish_report(report, filter, reader.display_name());
  write_report_file(options, report);
  if (plot) write_plot_file(plot_table, options, report);
  return kExitSuccess;
}

}  // namespace statewise::cli
