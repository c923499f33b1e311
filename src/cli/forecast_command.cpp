// `statewise forecast`: filter a log, then predict rows past its end with prediction intervals.

#include <algorithm>
#include <charconv>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "cli/commands.h"
#include "cli/exit_codes.h"
#include "cli/log_input.h"
#include "cli/output_file.h"
#include "statewise/diagnostics.h"
#include "statewise/discretize.h"
#include "statewise/error.h"
#include "statewise/filter.h"
#include "statewise/forecast.h"
#include "statewise/output_table.h"
#include "statewise/report.h"
#include "statewise/series.h"
#include "statewise/time_axis.h"

namespace statewise::cli {

namespace {

constexpr std::size_t kTransitionCapacity = 256;

std::string shortest_text(double value) {
  char buffer[64];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value);
  return std::string(buffer, result.ptr);
}

double median(std::vector<double> values) {
  if (values.empty()) return 0.0;
  const auto middle = values.begin() + static_cast<std::ptrdiff_t>(values.size() / 2);
  std::nth_element(values.begin(), middle, values.end());
  if (values.size() % 2 == 1) return *middle;
  const double upper = *middle;
  const double lower = *std::max_element(values.begin(), middle);
  return 0.5 * (lower + upper);
}

// --until as seconds after the log's last row; the text must be a time in the log's own form.
double until_seconds(const std::string& text, const Timeline& timeline) {
  const SourceLocation where{"--until", 0, 0, ""};
  ParsedTime until;
  std::string problem;
  if (!try_parse_time(text, until, problem))
    raise_input_error(where,
                      "cannot read \"" + text + "\" as a time" + (problem.empty() ? "" : ": " + problem) +
                          (problem.empty() ? "; expected seconds (a number) or an ISO 8601 date-time such as "
                                             "2026-11-02T08:30:00Z"
                                           : ""));
  if (timeline.has_time() && until.style.iso8601 != timeline.last_style().iso8601)
    raise_input_error(where,
                      std::string("expected ") +
                          (timeline.last_style().iso8601 ? "an ISO 8601 date-time" : "a number of seconds") +
                          " like the log's times, got \"" + text + "\"");
  return seconds_between(timeline.last_time(), until.time);
}

}  // namespace

int run_forecast(const ForecastOptions& options) {
  const StateSpaceModel model = load_model(options.model_path);
  check_sort_flag(model, options.sort);
  if (!(options.level > 0.0 && options.level < 1.0))
    raise_input_error({"--level", 0, 0, ""}, "expected a coverage between 0 and 1 such as 0.95, got " +
                                                 shortest_text(options.level));
  if (options.horizon == 0 && options.until.empty())
    raise_input_error({"--horizon", 0, 0, ""}, "missing; give --horizon ROWS or --until TIME");
  TimelineOptions timeline_options;
  timeline_options.duplicates = parse_duplicate_policy(options.duplicates);
  Timeline timeline(model, timeline_options, options.input_path == "-" ? "<stdin>" : options.input_path);
  CsvReader reader =
      CsvReader::open(options.input_path, make_csv_options(options.delimiter, options.missing_tokens));
  ObservationStream stream(reader, model);
  OutputFile output(options.output_path, options.input_path);

  // Filter the whole log, keeping what the forecast starts from.
  TransitionCache transitions(model, kTransitionCapacity);
  KalmanFilter filter(model);
  InnovationAccumulator accumulator(model.observation_names);
  InnovationRecord record = make_innovation_record(model.channel_count());
  std::vector<double> previous_inputs, gaps;
  bool first = true;
  read_timeline(stream, timeline, options.sort, [&](TimelineRow& row) {
    if (!first) {
      filter.predict(transitions.transition(row.gap),
                     previous_inputs.empty() ? nullptr : previous_inputs.data());
      if (row.gap.seconds > 0.0) gaps.push_back(row.gap.seconds);
    }
    const StepStatus status = filter.update(row.row.values.data(), record);
    if (status != StepStatus::ok)
      throw step_failure(status, row_place(reader.display_name(), row));
    accumulator.add(record);
    previous_inputs = row.row.inputs;
    first = false;
  });
  if (timeline.rows() == 0)
    raise_input_error({reader.display_name(), 0, 0, ""},
                      "the log has no data rows; a forecast starts from the estimate at its last row");

  ForecastRequest request;
  request.horizon = options.horizon;
  request.step = options.step;
  if (!options.until.empty()) {
    request.has_until = true;
    request.until_seconds = model.time_column.empty() ? 0.0 : until_seconds(options.until, timeline);
  }
  const ForecastPlan plan = plan_forecast(model, request, median(gaps));
  const StateTrack future =
      forecast_states(filter.mean(), filter.covariance(),
                      previous_inputs.empty() ? nullptr : previous_inputs.data(), transitions, plan.gaps);

  const EstimateTableWriter writer(model, EstimateKind::forecast, TableFormat{',', options.digits},
                                   options.level);
  const std::vector<double> no_values(static_cast<std::size_t>(model.channel_count()),
                                      std::numeric_limits<double>::quiet_NaN());
  std::string buffer, time_text;
  writer.append_header(buffer);
  for (std::size_t k = 0; k < future.size(); ++k) {
    time_text.clear();
    if (timeline.has_time() && !plan.seconds_after_last.empty())
      time_text =
          format_time(add_seconds(timeline.last_time(), plan.seconds_after_last[k]), timeline.last_style());
    writer.append_row(buffer, time_text, no_values.data(), future.mean(k), future.covariance(k), nullptr);
    if (buffer.size() >= (1u << 16)) output.write_buffer(buffer);
  }
  output.write_buffer(buffer);
  output.commit();

  if (!options.report_path.empty()) {
    RunReport report;
    report.command = "forecast";
    report.model_path = options.model_path;
    report.input_path = options.input_path;
    report.states = model.state_count();
    report.rows = accumulator.rows();
    report.log_likelihood = accumulator.log_likelihood();
    report.channels = accumulator.channels();
    report.nis = accumulator.nis();
    write_whole_file(options.report_path, write_report_json(report), options.input_path);
  }
  return kExitSuccess;
}

}  // namespace statewise::cli
