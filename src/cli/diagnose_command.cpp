// `statewise diagnose`: runs the filter over a log and prints its consistency tests and verdicts as
// readable text (and, with --report, the JSON report of `filter`).

#include "cli/commands.h"
#include "cli/exit_codes.h"
#include "cli/output_file.h"
#include "statewise/csv.h"
#include "statewise/error.h"
#include "statewise/forward_pass.h"
#include "statewise/report.h"
#include "statewise/series.h"

namespace statewise::cli {

int run_diagnose(const EstimateOptions& options) {
  const StateSpaceModel model = load_model(options.model_path);
  const ForwardPassOptions pass_options = forward_pass_options(options.trust);
  CsvOptions csv;
  csv.delimiter = parse_delimiter(options.delimiter);
  csv.missing_tokens = options.missing_tokens;
  CsvReader reader = CsvReader::open(options.input_path, csv);
  ObservationStream stream(reader, model);
  OutputFile output(options.output_path, options.input_path);

  const Transition transition = model_transition(model);
  ForwardPass pass(model, pass_options);
  ObservationRow row, previous;
  bool first = true;
  while (stream.next(row)) {
    if (!first) pass.predict(transition, previous.inputs.empty() ? nullptr : previous.inputs.data());
    const StepStatus status = pass.update(row.values.data(), row.line);
    if (status != StepStatus::ok)
      throw step_failure(status, reader.display_name() + ":" + std::to_string(row.line));
    std::swap(previous, row);
    first = false;
  }

  RunReport report;
  report.command = "diagnose";
  report.model_path = options.model_path;
  report.input_path = options.input_path;
  report.states = model.state_count();
  report.rows = pass.accumulator().rows();
  report.log_likelihood = pass.accumulator().log_likelihood();
  report.channels = pass.accumulator().channels();
  report.nis = pass.accumulator().nis();
  for (const auto& channel : report.channels)
    if (channel.observed == 0)
      report.warnings.push_back("channel \"" + channel.name +
                                "\" has no observed values; its estimates come from the model alone");
  if (report.rows == 0) report.warnings.push_back("the log has no data rows");
  attach_diagnostics(report, pass, reader.display_name());

  output.write(write_diagnostics_text(report));
  output.commit();
  if (!options.report_path.empty())
    write_whole_file(options.report_path, write_report_json(report), options.input_path);
  return kExitSuccess;
}

}  // namespace statewise::cli
