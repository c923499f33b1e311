// `statewise filter` and `statewise smooth`.

#include <iostream>
#include <memory>

#include "cli/commands.h"
#include "cli/estimate_run.h"
#include "cli/grouped_run.h"
#include "cli/exit_codes.h"
#include "cli/log_input.h"
#include "cli/output_file.h"
#include "cli/progress.h"
#include "cli/state_file.h"
#include "statewise/csv.h"
#include "statewise/diagnostics.h"
#include "statewise/discretize.h"
#include "statewise/diffuse.h"
#include "statewise/error.h"
#include "statewise/filter.h"
#include "statewise/forward_pass.h"
#include "statewise/output_table.h"
#include "statewise/report.h"
#include "statewise/series.h"
#include "statewise/smoother.h"
#include "statewise/time_axis.h"

namespace statewise::cli {

NumericalFailure step_failure(StepStatus status, const std::string& place) {
  const char* hint = status == StepStatus::not_finite
                         ? "; the numbers overflowed: check that the values are on a sensible scale and that A "
                           "does not make the state grow without bound (eigenvalues far above 1 in magnitude)"
                         : "; check that R (or Q and the initial covariance) are not zero where a channel is observed";
  return NumericalFailure{place + ": " + describe(status) + hint};
}

char parse_delimiter(const std::string& text) {
  if (text == "\\t" || text == "tab" || text == "\t") return '\t';
  if (text.size() != 1 || text == "\"" || text == "\n" || text == "\r")
    raise_input_error({"--delimiter", 0, 0, ""},
                      "expected one character such as \",\" \";\" \"|\" or \"tab\", got \"" + text + "\"");
  return text[0];
}

CsvOptions csv_options(const EstimateOptions& options) {
  return make_csv_options(options.delimiter, options.missing_tokens);
}

TimelineOptions timeline_options(const EstimateOptions& options) {
  TimelineOptions timeline;
  timeline.duplicates = parse_duplicate_policy(options.duplicates);
  timeline.regular_step = options.regular_step;
  return timeline;
}

[[noreturn]] void fail_step(StepStatus status, const std::string& place) { throw step_failure(status, place); }

void add_timeline_warnings(RunReport& report, const Timeline& timeline, const SpacingWatch& spacing,
                           const EstimateOptions& options) {
  if (timeline.inserted_rows() > 0)
    report.warnings.push_back(
        std::to_string(timeline.inserted_rows()) +
        " rows were inserted on the --regular grid where the log had none; every channel "
        "is imputed there");
  if (timeline.merged_rows() > 0)
    report.warnings.push_back(std::to_string(timeline.merged_rows()) +
                              " rows repeated an earlier row's time and were merged into it (--duplicates " +
                              options.duplicates + ")");
  const std::string spacing_warning = spacing.warning();
  if (!spacing_warning.empty()) report.warnings.push_back(spacing_warning);
}

namespace {

void add_channel_warnings(RunReport& report) {
  for (const auto& channel : report.channels)
    if (channel.observed == 0)
      report.warnings.push_back("channel \"" + channel.name +
                                "\" has no observed values; its estimates come from the model alone");
}

}  // namespace

RunReport start_report(const char* command, const EstimateOptions& options, const StateSpaceModel& model) {
  RunReport report;
  report.command = command;
  report.model_path = options.model_path;
  report.input_path = options.input_path;
  report.states = model.state_count();
  return report;
}

void finish_report(RunReport& report, const ForwardPass& pass, const std::string& file) {
  const InnovationAccumulator& accumulator = pass.accumulator();
  report.rows = accumulator.rows();
  report.log_likelihood = accumulator.log_likelihood();
  report.channels = accumulator.channels();
  report.nis = accumulator.nis();
  add_channel_warnings(report);
  if (report.rows == 0) report.warnings.push_back("the log has no data rows");
  attach_diagnostics(report, pass, file);
}

namespace {

// Appends one table row through the sink: its lead column, then the caller's hook.
template <typename AppendRow>
void sink_row(TableSink& sink, AppendRow&& append_row) {
  const std::size_t start = sink.buffer.size();
  append_row(sink.buffer);
  if (sink.lead != nullptr) sink.lead->apply(sink.buffer, start);
  if (sink.after_row) sink.after_row(sink.buffer);
}

}  // namespace

void write_report_file(const EstimateOptions& options, const RunReport& report) {
  if (!options.report_path.empty())
    write_whole_file(options.report_path, write_report_json(report), options.input_path);
}

void check_plot_format(const EstimateOptions& options) {
  if (!options.trust.plot_path.empty() && options.format != "csv")
    raise_input_error({"--plot", 0, 0, ""}, "draws the CSV table and cannot be combined with --format " +
                                                options.format + "; leave out --format, or run statewise plot on a "
                                                "CSV table");
}

void check_estimate_options(const StateSpaceModel& model, const EstimateOptions& options) {
  check_plot_format(options);
  check_sort_flag(model, options.sort);
  (void)Timeline(model, timeline_options(options), options.input_path);
  (void)forward_pass_options(options.trust);
  (void)table_format(options, true);
}

TableFormat table_format(const EstimateOptions& options, bool innovations) {
  TableFormat format;
  format.digits = options.digits;
  format.syntax = parse_table_syntax(options.format, {"--format", 0, 0, ""});
  format.rejected_column = !options.trust.reject.empty();
  format.innovations = innovations;
  return format;
}

LeadColumn::LeadColumn(const std::string& name, const std::string& value, const TableFormat& format) {
  // A one-column table in the same syntax quotes or escapes the name and the value as the table would.
  const TableLayout layout({name}, format);
  std::string row;
  TableLayout::Row cells = layout.start_row(row);
  cells.text(value);
  cells.finish();
  row.pop_back();  // the line break
  if (format.syntax == TableSyntax::jsonl) {
    cell_ = row.substr(1, row.size() - 2) + ",";  // `"name":"value",` from `{"name":"value"}`
    inside_ = true;
    return;
  }
  const char separator = format.syntax == TableSyntax::tsv ? '\t' : format.delimiter;
  cell_ = row + separator;
  layout.append_header(header_);
  header_.back() = separator;  // the line break
}

void LeadColumn::apply(std::string& out, std::size_t row_start) const {
  out.insert(row_start + (inside_ ? 1 : 0), cell_);
}

RunReport filter_rows(const StateSpaceModel& model, const EstimateOptions& options, const RowSource& rows,
                      const std::string& file, ForwardPass& filter, TableSink& sink, FilterResume* resume) {
  Timeline timeline(model, timeline_options(options), file);
  const EstimateTableWriter writer(model, EstimateKind::filtered, table_format(options, true));
  TransitionCache transitions(model, kStreamingCacheCapacity);
  SpacingWatch spacing(model, options.regular_step);
  std::vector<double> previous_inputs;
  std::uint64_t rows_before = 0;
  const SeriesState* saved = resume != nullptr ? resume->saved : nullptr;
  if (saved != nullptr) {
    std::string group_key = "groups[";
    append_json_string(group_key, resume->group);
    if (saved->rows > 0) timeline.resume(saved->position, {options.state_path, 0, 0, group_key + "].last_time.text"});
    filter.resume(saved->pass);
    previous_inputs = saved->position.last_inputs;
    rows_before = saved->rows;
  }
  ResumeSkipper skipper(saved, model);
  bool first = rows_before == 0;
  read_timeline(
      rows, file, timeline, options.sort,
      [&](TimelineRow& row) {
        if (!first)
          filter.predict(transitions.transition(row.gap), previous_inputs.empty() ? nullptr : previous_inputs.data());
        const StepStatus status = filter.update(row.row.values.data(), row.row.line);
        if (status != StepStatus::ok) fail_step(status, row_place(file, row));
        spacing.add(row);
        sink_row(sink, [&](std::string& out) {
          writer.append_row(out, row.row.time_text, filter.used_values(), filter.mean(), filter.covariance(),
                            &filter.record(), filter.rejected(), filter.diffuse_covariance());
        });
        previous_inputs = row.row.inputs;
        first = false;
      },
      [&skipper](const ObservationRow& row) { return skipper.skip(row); });
  if (resume != nullptr) {
    SeriesState& next = resume->next;
    next = saved != nullptr ? *saved : SeriesState{};
    next.has_time = timeline.has_time();
    next.log_rows = skipper.log_rows();
    next.rows = rows_before + timeline.rows();
    if (timeline.rows() > 0) next.position = timeline.position();
    next.pass = filter.state();
    resume->skipped = skipper.skipped();
  }
  RunReport report = start_report("filter", options, model);
  add_timeline_warnings(report, timeline, spacing, options);
  finish_report(report, filter, file);
  return report;
}

RunReport smooth_rows(const StateSpaceModel& model, const EstimateOptions& options, const RowSource& source,
                      const std::string& file, TableSink& sink, std::string* plot_table) {
  Timeline timeline(model, timeline_options(options), file);
  const ForwardPassOptions pass_options = forward_pass_options(options.trust);

  // The whole timeline in memory, with the transition that reaches each row from the one before.
  ObservationSeries series;
  series.channels = model.channel_count();
  series.input_count = model.input_count();
  series.has_time = !model.time_column.empty();
  TransitionCache transitions(model);
  TransitionSchedule schedule;
  SpacingWatch spacing(model, options.regular_step);
  read_timeline(source, file, timeline, options.sort, [&](TimelineRow& row) {
    if (series.rows() > 0) schedule.index_of_step.push_back(transitions.index(row.gap));
    series.push_back(row.row);
    spacing.add(row);
  });
  schedule.transitions = transitions.take_transitions();
  const std::size_t rows = series.rows();
  if (schedule.transitions.size() <= 1) schedule.index_of_step.clear();  // one transition serves every step
  if (schedule.transitions.empty()) schedule.transitions.push_back(model_transition(model));

  // Forward pass: filter every row, keeping the filtered moments for the backward pass.
  ForwardPass filter(model, pass_options);
  StateTrack track(model.state_count());
  track.reserve(rows);
  // With a gate, the values the filter used and the rejection flags; with innovation columns (or a
  // plot), each row's innovations and their standard deviations.
  const auto m = static_cast<std::size_t>(model.channel_count());
  const bool gated = !options.trust.reject.empty();
  const bool keep_innovations = options.trust.innovations || plot_table != nullptr;
  std::vector<double> used_values, innovations;
  std::vector<unsigned char> rejected;
  for (std::size_t t = 0; t < rows; ++t) {
    if (t > 0) filter.predict(schedule.step(t - 1), series.row_inputs(t - 1));
    const StepStatus status = filter.update(series.row_values(t), series.lines[t]);
    if (status != StepStatus::ok) fail_step(status, row_place(file, series.lines[t], series.time_text(t)));
    track.push_back(filter.mean(), filter.covariance());
    if (gated) {
      used_values.insert(used_values.end(), filter.used_values(), filter.used_values() + m);
      rejected.insert(rejected.end(), filter.rejected(), filter.rejected() + m);
    }
    if (keep_innovations)
      for (std::size_t c = 0; c < m; ++c) {
        innovations.push_back(filter.record().innovation(static_cast<Eigen::Index>(c)));
        innovations.push_back(filter.record().innovation_sd(static_cast<Eigen::Index>(c)));
      }
  }

  // Backward pass, in place; the exact diffuse smoother when some states start with no prior.
  SmoothStatus smoothed;
  bool diffuse_unresolved = false;
  if (model.has_diffuse_states()) {
    if (!schedule.index_of_step.empty())
      raise_input_error({options.model_path, 0, 0, "initial.diffuse"},
                        "the exact diffuse smoother needs rows one model step apart, but this log's gaps vary; "
                        "give the states a proper initial covariance instead of \"diffuse\"");
    ExactSmoothing exact = exact_smooth(model, series, false);
    diffuse_unresolved = !exact.likelihood.diffuse_resolved;
    if (exact.likelihood.status == StepStatus::ok) {
      track = std::move(exact.track);
    } else {
      smoothed = SmoothStatus{false, exact.likelihood.row, describe(exact.likelihood.status), 0};
    }
  } else {
    smoothed = rts_smooth(track, schedule, series.inputs.data(), series.input_count);
  }
  if (!smoothed.ok)
    throw NumericalFailure{row_place(file, series.lines[smoothed.row], series.time_text(smoothed.row)) +
                           ": " + smoothed.message};

  const EstimateTableWriter writer(model, EstimateKind::smoothed, table_format(options, options.trust.innovations));
  const EstimateTableWriter plot_writer(model, EstimateKind::smoothed, table_format(options, true));
  if (plot_table != nullptr) plot_writer.append_header(*plot_table);
  InnovationRecord record = make_innovation_record(model.channel_count());
  for (std::size_t t = 0; t < rows; ++t) {
    const double* values = gated ? &used_values[t * m] : series.row_values(t);
    const unsigned char* row_rejected = gated ? &rejected[t * m] : nullptr;
    if (keep_innovations)
      for (std::size_t c = 0; c < m; ++c) {
        record.innovation(static_cast<Eigen::Index>(c)) = innovations[2 * (t * m + c)];
        record.innovation_sd(static_cast<Eigen::Index>(c)) = innovations[2 * (t * m + c) + 1];
      }
    sink_row(sink, [&](std::string& out) {
      writer.append_row(out, series.time_text(t), values, track.mean(t), track.covariance(t), &record, row_rejected);
    });
    if (plot_table != nullptr)
      plot_writer.append_row(*plot_table, series.time_text(t), values, track.mean(t), track.covariance(t), &record,
                             row_rejected);
  }

  RunReport report = start_report("smooth", options, model);
  if (smoothed.pseudo_inverse_rows > 0)
    report.warnings.push_back("the predicted covariance was singular on " + std::to_string(smoothed.pseudo_inverse_rows) +
                              " rows; the smoother used a pseudo-inverse there (Q may be zero in some direction)");
  add_timeline_warnings(report, timeline, spacing, options);
  if (diffuse_unresolved)
    report.warnings.push_back("the data do not determine every diffuse initial state (no channel sees it); "
                              "their estimates are not meaningful");
  finish_report(report, filter, file);
  return report;
}

int run_filter(const EstimateOptions& options) {
  if (!options.by.empty()) return run_grouped(options, GroupedCommand::filter);
  const StateSpaceModel model = load_model(options.model_path);
  check_estimate_options(model, options);
  // With --state: lock, read and check the saved state before anything is written.
  StateSession session(options, model);
  const ForwardPassOptions pass_options = forward_pass_options(options.trust);
  CsvReader reader = CsvReader::open(options.input_path, csv_options(options));
  ObservationStream stream(reader, model);
  OutputFile output(options.output_path, options.input_path, options.append);
  session.prepare_output(output);

  std::string buffer, plot_table;  // with --plot, the table is kept for the plot
  auto write_out = [&](std::string& text) {
    if (!options.trust.plot_path.empty()) plot_table += text;
    output.write_buffer(text);
  };
  // The plot reads the table's header even when the output leaves it out (--no-header, or appending).
  const bool header = options.header && (!options.append || output.length() == 0);
  EstimateTableWriter(model, EstimateKind::filtered, table_format(options, true))
      .append_header(header ? buffer : plot_table);
  ProgressLine progress(options.input_path, options.quiet);
  ForwardPass filter(model, pass_options);
  TableSink sink{buffer, nullptr, [&](std::string& text) {
                   if (output.interactive() && !reader.line_buffered()) {
                     // A live stream: the row goes out before the program waits for the next one. Rows
                     // already in the input buffer (a fast pipe) are written in blocks like a file's.
                     write_out(text);
                     output.flush();
                   } else if (text.size() >= (1u << 16)) {
                     write_out(text);
                   }
                   progress.update(filter.rows(), reader.bytes_read());
                 }};
  FilterResume resume;
  resume.saved = session.resume_point();
  RunReport report = filter_rows(
      model, options, [&stream](ObservationRow& row) { return stream.next(row); }, reader.display_name(), filter, sink,
      session.active() ? &resume : nullptr);
  progress.finish();
  write_out(buffer);
  output.flush();
  test_exit_point("after-output-write");
  output.commit();
  test_exit_point("after-output-fsync");
  if (session.active()) {
    session.save(resume.next, output);
    if (resume.skipped > 0)
      session.warn(std::to_string(resume.skipped) + " rows of " + reader.display_name() +
                   " were skipped: the state file " + options.state_path + " already accounts for them");
  }
  for (const std::string& warning : session.warnings())
    if (!options.quiet) std::cerr << "statewise: warning: " << warning << '\n';
  report.warnings.insert(report.warnings.begin(), session.warnings().begin(), session.warnings().end());
  write_report_file(options, report);
  if (!options.trust.plot_path.empty()) write_plot_file(plot_table, options, report);
  return kExitSuccess;
}

int run_smooth(const EstimateOptions& options) {
  if (!options.by.empty()) return run_grouped(options, GroupedCommand::smooth);
  const StateSpaceModel model = load_model(options.model_path);
  check_estimate_options(model, options);
  CsvReader reader = CsvReader::open(options.input_path, csv_options(options));
  ObservationStream stream(reader, model);
  OutputFile output(options.output_path, options.input_path);

  const bool plot = !options.trust.plot_path.empty();
  std::string buffer, plot_table;
  if (options.header)
    EstimateTableWriter(model, EstimateKind::smoothed, table_format(options, options.trust.innovations))
        .append_header(buffer);
  TableSink sink{buffer, nullptr, [&](std::string& text) {
                   if (text.size() >= (1u << 16)) output.write_buffer(text);
                 }};
  const RunReport report =
      smooth_rows(model, options, [&stream](ObservationRow& row) { return stream.next(row); }, reader.display_name(),
                  sink, plot ? &plot_table : nullptr);
  output.write_buffer(buffer);
  output.commit();
  write_report_file(options, report);
  if (plot) write_plot_file(plot_table, options, report);
  return kExitSuccess;
}

}  // namespace statewise::cli
