// `statewise filter` and `statewise smooth`.

#include <memory>

#include "cli/commands.h"
#include "cli/exit_codes.h"
#include "cli/output_file.h"
#include "statewise/csv.h"
#include "statewise/diagnostics.h"
#include "statewise/error.h"
#include "statewise/filter.h"
#include "statewise/output_table.h"
#include "statewise/report.h"
#include "statewise/series.h"
#include "statewise/smoother.h"

namespace statewise::cli {

char parse_delimiter(const std::string& text) {
  if (text == "\\t" || text == "tab" || text == "\t") return '\t';
  if (text.size() != 1 || text == "\"" || text == "\n" || text == "\r")
    raise_input_error({"--delimiter", 0, 0, ""},
                      "expected one character such as \",\" \";\" \"|\" or \"tab\", got \"" + text + "\"");
  return text[0];
}

namespace {

TableFormat table_format(const EstimateOptions& options) {
  return TableFormat{',', options.digits, parse_table_syntax(options.format, {"--format", 0, 0, ""})};
}

CsvOptions csv_options(const EstimateOptions& options) {
  CsvOptions csv;
  csv.delimiter = parse_delimiter(options.delimiter);
  csv.missing_tokens = options.missing_tokens;
  return csv;
}

std::string row_place(const CsvReader& reader, std::size_t line) {
  return reader.display_name() + ":" + std::to_string(line);
}

[[noreturn]] void fail_step(StepStatus status, const CsvReader& reader, std::size_t line) {
  throw NumericalFailure{row_place(reader, line) + ": " + describe(status) +
                         "; check that R (or Q and the initial covariance) are not zero where a channel is observed"};
}

void add_channel_warnings(RunReport& report) {
  for (const auto& channel : report.channels)
    if (channel.observed == 0)
      report.warnings.push_back("channel \"" + channel.name +
                                "\" has no observed values; its estimates come from the model alone");
}

RunReport start_report(const char* command, const EstimateOptions& options, const StateSpaceModel& model) {
  RunReport report;
  report.command = command;
  report.model_path = options.model_path;
  report.input_path = options.input_path;
  report.states = model.state_count();
  return report;
}

void finish_report(RunReport& report, const InnovationAccumulator& accumulator, const EstimateOptions& options) {
  report.rows = accumulator.rows();
  report.log_likelihood = accumulator.log_likelihood();
  report.channels = accumulator.channels();
  report.nis = accumulator.nis();
  add_channel_warnings(report);
  if (report.rows == 0) report.warnings.push_back("the log has no data rows");
  if (!options.report_path.empty()) write_whole_file(options.report_path, write_report_json(report), options.input_path);
}

}  // namespace

int run_filter(const EstimateOptions& options) {
  const StateSpaceModel model = load_model(options.model_path);
  CsvReader reader = CsvReader::open(options.input_path, csv_options(options));
  ObservationStream stream(reader, model);
  OutputFile output(options.output_path, options.input_path);

  const EstimateTableWriter writer(model, EstimateKind::filtered, table_format(options));
  const Transition transition = model_transition(model);
  KalmanFilter filter(model);
  InnovationAccumulator accumulator(model.observation_names);
  InnovationRecord record = make_innovation_record(model.channel_count());
  std::string buffer;
  writer.append_header(buffer);
  ObservationRow row, previous;
  bool first = true;
  while (stream.next(row)) {
    if (!first) filter.predict(transition, previous.inputs.empty() ? nullptr : previous.inputs.data());
    const StepStatus status = filter.update(row.values.data(), record);
    if (status != StepStatus::ok) fail_step(status, reader, row.line);
    accumulator.add(record);
    writer.append_row(buffer, row.time_text, row.values.data(), filter.mean(), filter.covariance(), &record);
    if (output.interactive()) {
      output.write_buffer(buffer);
      output.flush();
    } else if (buffer.size() >= (1u << 16)) {
      output.write_buffer(buffer);
    }
    std::swap(previous, row);
    first = false;
  }
  output.write_buffer(buffer);
  output.commit();
  RunReport report = start_report("filter", options, model);
  finish_report(report, accumulator, options);
  return kExitSuccess;
}

int run_smooth(const EstimateOptions& options) {
  const StateSpaceModel model = load_model(options.model_path);
  CsvReader reader = CsvReader::open(options.input_path, csv_options(options));
  ObservationStream stream(reader, model);
  OutputFile output(options.output_path, options.input_path);
  const ObservationSeries series = read_series(stream, model);
  const std::size_t rows = series.rows();

  // Forward pass: filter every row, keeping the filtered moments for the backward pass.
  TransitionSchedule schedule;
  schedule.transitions.push_back(model_transition(model));
  KalmanFilter filter(model);
  InnovationAccumulator accumulator(model.observation_names);
  InnovationRecord record = make_innovation_record(model.channel_count());
  StateTrack track(model.state_count());
  track.reserve(rows);
  for (std::size_t t = 0; t < rows; ++t) {
    if (t > 0) filter.predict(schedule.step(t - 1), series.row_inputs(t - 1));
    const StepStatus status = filter.update(series.row_values(t), record);
    if (status != StepStatus::ok) fail_step(status, reader, series.lines[t]);
    accumulator.add(record);
    track.push_back(filter.mean(), filter.covariance());
  }

  // Backward pass, in place.
  const SmoothStatus smoothed = rts_smooth(track, schedule, series.inputs.data(), series.input_count);
  if (!smoothed.ok) throw NumericalFailure{row_place(reader, series.lines[smoothed.row]) + ": " + smoothed.message};

  const EstimateTableWriter writer(model, EstimateKind::smoothed, table_format(options));
  std::string buffer;
  writer.append_header(buffer);
  for (std::size_t t = 0; t < rows; ++t) {
    writer.append_row(buffer, series.time_text(t), series.row_values(t), track.mean(t), track.covariance(t), nullptr);
    if (buffer.size() >= (1u << 16)) output.write_buffer(buffer);
  }
  output.write_buffer(buffer);
  output.commit();

  RunReport report = start_report("smooth", options, model);
  if (smoothed.pseudo_inverse_rows > 0)
    report.warnings.push_back("the predicted covariance was singular on " + std::to_string(smoothed.pseudo_inverse_rows) +
                              " rows; the smoother used a pseudo-inverse there (Q may be zero in some direction)");
  finish_report(report, accumulator, options);
  return kExitSuccess;
}

}  // namespace statewise::cli
