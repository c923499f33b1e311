// Options about trusting the output (--reject, --numerics, --stuck, --lags, --plot, --innovations),
// shared by filter, smooth and diagnose, and what they add to a run: diagnostics and a plot page.

#include <CLI/CLI.hpp>
#include <charconv>
#include <cmath>

#include "cli/commands.h"
#include "cli/output_file.h"
#include "statewise/csv.h"
#include "statewise/error.h"
#include "statewise/plot.h"

namespace statewise::cli {

void add_trust_options(CLI::App& command, TrustOptions& options, bool plot, bool innovations) {
  command.add_option(
      "--reject", options.reject,
      "Reject outliers: gate each value with a chi-square test at probability P (e.g. 0.999); a "
      "rejected value is treated as missing");
  command
      .add_option("--numerics", options.numerics,
                  "Covariance arithmetic: plain (switches to square-root by itself if it breaks down) or "
                  "square-root")
      ->capture_default_str();
  command
      .add_option("--stuck", options.stuck_run,
                  "Warn about a channel repeating exactly the same value on N observations in a row; 0 = off")
      ->capture_default_str();
  command.add_option("--lags", options.lags, "Ljung-Box lags of the diagnostics, 1 to 100; 0 = min(10, n/5)")
      ->capture_default_str();
  if (plot)
    command.add_option("--plot", options.plot_path,
                       "Also write a plot report (HTML with inline SVG) to FILE");
  if (innovations)
    command.add_flag("--innovations", options.innovations,
                     "Also write the innovation columns c_innov and c_z");
}

void add_diagnose_options(CLI::App& command, EstimateOptions& options) {
  command.add_option("-m,--model", options.model_path, "Model file (JSON, docs/model-format.md)")->required();
  command
      .add_option("input", options.input_path, "Log to read (CSV with a header row); - for standard input")
      ->capture_default_str();
  command.add_option("-o,--output", options.output_path, "Where to write the text; - for standard output")
      ->capture_default_str();
  command.add_option("--report", options.report_path, "Also write the JSON report of the run to this file");
  command.add_option("--delimiter", options.delimiter, "Field separator of the input: one character, or tab")
      ->capture_default_str();
  command
      .add_option("--missing", options.missing_tokens,
                  "Extra cell text meaning 'no value' (repeatable), e.g. --missing -999; "
                  "empty, NA, NaN, nan and null always are")
      ->allow_extra_args(false);
  add_trust_options(command, options.trust, false, false);
}

ForwardPassOptions forward_pass_options(const TrustOptions& options) {
  ForwardPassOptions result;
  if (options.numerics == "plain") {
    result.numerics = Numerics::plain;
  } else if (options.numerics == "square-root") {
    result.numerics = Numerics::square_root;
  } else {
    raise_input_error({"--numerics", 0, 0, ""}, "expected \"plain\" or \"square-root\", got \"" +
                                                    options.numerics + "\"" +
                                                    did_you_mean(options.numerics, {"plain", "square-root"}));
  }
  if (!options.reject.empty()) {
    double p = 0.0;
    const char* end = options.reject.data() + options.reject.size();
    const auto parsed = std::from_chars(options.reject.data(), end, p);
    if (parsed.ec != std::errc() || parsed.ptr != end || !(p > 0.0 && p < 1.0))
      raise_input_error(
          {"--reject", 0, 0, ""},
          "expected a probability between 0 and 1 (exclusive) such as 0.999, got \"" + options.reject + "\"");
    result.reject_probability = p;
  }
  if (options.stuck_run < 0 || options.stuck_run == 1)
    raise_input_error({"--stuck", 0, 0, ""}, "expected 0 (off) or a run length of at least 2, got " +
                                                 std::to_string(options.stuck_run));
  result.stuck_run_length = static_cast<std::size_t>(options.stuck_run);
  if (options.lags < 0 || options.lags > 100)
    raise_input_error({"--lags", 0, 0, ""}, "expected 0 (automatic) or a number of lags from 1 to 100, got " +
                                                std::to_string(options.lags));
  result.ljung_box_lags = options.lags;
  return result;
}

void attach_diagnostics(RunReport& report, const ForwardPass& pass, const std::string& input_name) {
  report.diagnostics = make_diagnostics_report(pass);
  for (std::string& warning : diagnostics_warnings(*report.diagnostics, input_name))
    report.warnings.push_back(std::move(warning));
}

void write_plot_file(const std::string& table_text, const EstimateOptions& options, const RunReport& report) {
  CsvReader table = CsvReader::from_string(table_text, options.trust.plot_path, CsvOptions{});
  PlotOptions plot;
  plot.title = report.command + " of " +
               (options.input_path == "-" ? std::string("standard input") : options.input_path);
  plot.source = "statewise " + report.command + " -m " + options.model_path + ": " +
                std::to_string(report.rows) + " rows, log-likelihood " +
                format_significant(report.log_likelihood, 8);
  if (report.diagnostics)
    for (const Verdict& v : report.diagnostics->verdicts) plot.verdicts.push_back(v.text);
  plot.warnings = report.warnings;
  write_whole_file(options.trust.plot_path, write_plot_html(table, plot), options.input_path);
}

}  // namespace statewise::cli
