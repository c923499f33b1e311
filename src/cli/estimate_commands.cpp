// `statewise filter` and `statewise smooth`.

#include <memory>

#include "cli/commands.h"
#include "cli/exit_codes.h"
#include "cli/log_input.h"
#include "cli/output_file.h"
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

namespace {

// Transitions kept by the streaming filter: enough for every gap of a regular or step-based log,
// bounded for an endless stream of ever-new gaps.
constexpr std::size_t kStreamingCacheCapacity = 256;

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

void add_channel_warnings(RunReport& report) {
  for (const auto& channel : report.channels)
    if (channel.observed == 0)
      report.warnings.push_back("channel \"" + channel.name +
                                "\" has no observed values; its estimates come from the model alone");
}

// The estimates table's format: the optional columns follow --reject and --innovations.
TableFormat table_format(const EstimateOptions& options, bool innovations) {
  TableFormat format;
  format.digits = options.digits;
  format.syntax = parse_table_syntax(options.format, {"--format", 0, 0, ""});
  format.rejected_column = !options.trust.reject.empty();
  format.innovations = innovations;
  return format;
}

RunReport start_report(const char* command, const EstimateOptions& options, const StateSpaceModel& model) {
  RunReport report;
  report.command = command;
  report.model_path = options.model_path;
  report.input_path = options.input_path;
  report.states = model.state_count();
  return report;
}

void finish_report(RunReport& report, const ForwardPass& pass, const EstimateOptions& options,
                   const CsvReader& reader) {
  const InnovationAccumulator& accumulator = pass.accumulator();
  report.rows = accumulator.rows();
  report.log_likelihood = accumulator.log_likelihood();
  report.channels = accumulator.channels();
  report.nis = accumulator.nis();
  add_channel_warnings(report);
  if (report.rows == 0) report.warnings.push_back("the log has no data rows");
  attach_diagnostics(report, pass, reader.display_name());
  if (!options.report_path.empty()) write_whole_file(options.report_path, write_report_json(report), options.input_path);
}

}  // namespace

int run_filter(const EstimateOptions& options) {
  const StateSpaceModel model = load_model(options.model_path);
  check_sort_flag(model, options.sort);
  Timeline timeline(model, timeline_options(options),
                    options.input_path == "-" ? "<stdin>" : options.input_path);
  const ForwardPassOptions pass_options = forward_pass_options(options.trust);
  CsvReader reader = CsvReader::open(options.input_path, csv_options(options));
  ObservationStream stream(reader, model);
  OutputFile output(options.output_path, options.input_path);

  const EstimateTableWriter writer(model, EstimateKind::filtered, table_format(options, true));
  TransitionCache transitions(model, kStreamingCacheCapacity);
  SpacingWatch spacing(model, options.regular_step);
  ForwardPass filter(model, pass_options);
  std::string buffer, plot_table;  // with --plot, the table is kept for the plot
  auto write_out = [&]() {
    if (!options.trust.plot_path.empty()) plot_table += buffer;
    output.write_buffer(buffer);
  };
  writer.append_header(buffer);
  std::vector<double> previous_inputs;
  bool first = true;
  read_timeline(stream, timeline, options.sort, [&](TimelineRow& row) {
    if (!first)
      filter.predict(transitions.transition(row.gap),
                     previous_inputs.empty() ? nullptr : previous_inputs.data());
    const StepStatus status = filter.update(row.row.values.data(), row.row.line);
    if (status != StepStatus::ok) fail_step(status, row_place(reader.display_name(), row));
    spacing.add(row);
    writer.append_row(buffer, row.row.time_text, filter.used_values(), filter.mean(), filter.covariance(),
                      &filter.record(), filter.rejected(), filter.diffuse_covariance());
    if (output.interactive()) {
      write_out();
      output.flush();
    } else if (buffer.size() >= (1u << 16)) {
      write_out();
    }
    previous_inputs = row.row.inputs;
    first = false;
  });
  write_out();
  output.commit();
  RunReport report = start_report("filter", options, model);
  add_timeline_warnings(report, timeline, spacing, options);
  finish_report(report, filter, options, reader);
  if (!options.trust.plot_path.empty()) write_plot_file(plot_table, options, report);
  return kExitSuccess;
}

int run_smooth(const EstimateOptions& options) {
  const StateSpaceModel model = load_model(options.model_path);
  check_sort_flag(model, options.sort);
  Timeline timeline(model, timeline_options(options),
                    options.input_path == "-" ? "<stdin>" : options.input_path);
  const ForwardPassOptions pass_options = forward_pass_options(options.trust);
  CsvReader reader = CsvReader::open(options.input_path, csv_options(options));
  ObservationStream stream(reader, model);
  OutputFile output(options.output_path, options.input_path);

  // The whole timeline in memory, with the transition that reaches each row from the one before.
  ObservationSeries series;
  series.channels = model.channel_count();
  series.input_count = model.input_count();
  series.has_time = !model.time_column.empty();
  TransitionCache transitions(model);
  TransitionSchedule schedule;
  SpacingWatch spacing(model, options.regular_step);
  read_timeline(stream, timeline, options.sort, [&](TimelineRow& row) {
    if (series.rows() > 0) schedule.index_of_step.push_back(transitions.index(row.gap));
    series.push_back(row.row);
    spacing.add(row);
  });
  schedule.transitions = transitions.take_transitions();
  const std::size_t rows = series.rows();
  if (schedule.transitions.size() <= 1) schedule.index_of_step.clear();  // one transition serves every step
  if (schedule.transitions.empty()) schedule.transitions.push_back(model_transition(model));
  const std::string& file = reader.display_name();

  // Forward pass: filter every row, keeping the filtered moments for the backward pass.
  ForwardPass filter(model, pass_options);
  StateTrack track(model.state_count());
  track.reserve(rows);
  // With a gate, the values the filter used and the rejection flags; with innovation columns (or a
  // plot), each row's innovations and their standard deviations.
  const auto m = static_cast<std::size_t>(model.channel_count());
  const bool gated = !options.trust.reject.empty();
  const bool keep_innovations = options.trust.innovations || !options.trust.plot_path.empty();
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
  const bool plot = !options.trust.plot_path.empty();
  std::string buffer, plot_table;
  writer.append_header(buffer);
  if (plot) plot_writer.append_header(plot_table);
  InnovationRecord record = make_innovation_record(model.channel_count());
  for (std::size_t t = 0; t < rows; ++t) {
    const double* values = gated ? &used_values[t * m] : series.row_values(t);
    const unsigned char* row_rejected = gated ? &rejected[t * m] : nullptr;
    if (keep_innovations)
      for (std::size_t c = 0; c < m; ++c) {
        record.innovation(static_cast<Eigen::Index>(c)) = innovations[2 * (t * m + c)];
        record.innovation_sd(static_cast<Eigen::Index>(c)) = innovations[2 * (t * m + c) + 1];
      }
    writer.append_row(buffer, series.time_text(t), values, track.mean(t), track.covariance(t), &record, row_rejected);
    if (plot)
      plot_writer.append_row(plot_table, series.time_text(t), values, track.mean(t), track.covariance(t), &record,
                             row_rejected);
    if (buffer.size() >= (1u << 16)) output.write_buffer(buffer);
  }
  output.write_buffer(buffer);
  output.commit();

  RunReport report = start_report("smooth", options, model);
  if (smoothed.pseudo_inverse_rows > 0)
    report.warnings.push_back("the predicted covariance was singular on " + std::to_string(smoothed.pseudo_inverse_rows) +
                              " rows; the smoother used a pseudo-inverse there (Q may be zero in some direction)");
  add_timeline_warnings(report, timeline, spacing, options);
  if (diffuse_unresolved)
    report.warnings.push_back("the data do not determine every diffuse initial state (no channel sees it); "
                              "their estimates are not meaningful");
  finish_report(report, filter, options, reader);
  if (plot) write_plot_file(plot_table, options, report);
  return kExitSuccess;
}

}  // namespace statewise::cli
