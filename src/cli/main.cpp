// The statewise command line: parses flags, calls a command, and maps errors to exit codes.
// All reading and writing of files happens in the commands; the library never prints or exits.

#include <csignal>
#include <cstdio>
#include <initializer_list>
#include <iostream>
#include <string>

#include <CLI/CLI.hpp>

#include "cli/cli_definition.h"
#include "cli/commands.h"
#include "cli/exit_codes.h"
#include "cli/output_file.h"
#include "cli/state_file.h"
#include "statewise/error.h"
#include "statewise/version.h"

namespace {

using statewise::cli::EstimateOptions;

void add_estimate_options(CLI::App& command, EstimateOptions& options) {
  command.add_option("-m,--model", options.model_path, "Model file (JSON, docs/model-format.md)")
      ->required()
      ->type_name("FILE");
  command.add_option("input", options.input_path, "Log to read (CSV with a header row); - for standard input")
      ->capture_default_str()
      ->type_name("FILE");
  command.add_option("-o,--output", options.output_path, "Where to write the estimates; - for standard output")
      ->capture_default_str()
      ->type_name("FILE");
  command.add_option("--report", options.report_path, "Write a JSON report of the run to this file")->type_name("FILE");
  command.add_option("--delimiter", options.delimiter, "Field separator of the input: one character, or tab")
      ->capture_default_str()
      ->type_name("CHAR");
  command.add_option("--missing", options.missing_tokens,
                     "Extra cell text meaning 'no value' (repeatable), e.g. --missing -999; "
                     "empty, NA, NaN, nan and null always are")
      ->allow_extra_args(false)
      ->type_name("TOKEN");
  command.add_option("--digits", options.digits, "Significant digits of output numbers; 0 = shortest exact")
      ->capture_default_str()
      ->check(CLI::Range(0, 17));
  command.add_flag("--sort", options.sort,
                   "Sort the rows by time before estimating (reads the whole log first)");
  command
      .add_option("--duplicates", options.duplicates,
                  "Rows with the same time: error, or merge them per channel: first, last or mean")
      ->capture_default_str();
  statewise::cli::add_format_option(command, options.format);
  command.add_flag("-q,--quiet", options.quiet,
                   "No progress line on a terminal and no warnings on standard error (the --report keeps them)");
}

void add_regular_option(CLI::App& command, EstimateOptions& options) {
  command.add_option(
      "--regular", options.regular_step,
      "Output a complete timeline on a grid of STEP seconds from the first row, inserting rows "
      "(every channel imputed) where the log has none");
}

void add_fit_options(CLI::App& command, statewise::cli::FitCommandOptions& options) {
  command.add_option("-m,--model", options.model_paths,
                     "Model file with values marked \"estimate\" (repeat it to compare models)")
      ->required()
      ->allow_extra_args(false);
  command.add_option("input", options.input_path, "Log to fit (CSV with a header row); - for standard input")
      ->capture_default_str();
  command.add_option("-o,--output", options.output_path, "Where to write the fitted model file; - for standard output")
      ->capture_default_str();
  command.add_option("--report", options.report_path, "Write a JSON report of the fit to this file");
  command.add_option("--method", options.method, "em, mle (L-BFGS) or auto (EM steps, then L-BFGS)")
      ->capture_default_str();
  command.add_option("--em-steps", options.em_steps, "EM steps before L-BFGS (auto: 10, mle: 0)")
      ->check(CLI::Range(0, 100000));
  command.add_option("--max-iterations", options.max_iterations,
                     "Iteration limit (EM for --method em, L-BFGS otherwise; defaults 2000 and 500)")
      ->check(CLI::Range(1, 1000000));
  command.add_flag("--compare", options.compare, "Rank the models by AIC and BIC in a table on standard output");
  command.add_option("--delimiter", options.delimiter, "Field separator of the input: one character, or tab")
      ->capture_default_str();
  command.add_option("--missing", options.missing_tokens,
                     "Extra cell text meaning 'no value' (repeatable), e.g. --missing -999")
      ->allow_extra_args(false);
}

// Refuses, before anything is written, every output target that is the input log: otherwise a
// refused --report would come after -o had already been replaced.
void refuse_input_targets(const std::string& input_path, std::initializer_list<const std::string*> targets) {
  for (const std::string* target : targets) statewise::cli::refuse_input_as_target(*target, input_path);
}

void refuse_estimate_targets(const EstimateOptions& options) {
  refuse_input_targets(options.input_path, {&options.output_path, &options.report_path, &options.trust.plot_path});
}

int report_error(const std::string& message, int code) {
  std::fflush(stdout);
  std::cerr << "statewise: error: " << message << '\n';
  return code;
}

}  // namespace

int main(int argc, char** argv) {
  using namespace statewise::cli;
  // A file-size limit (ulimit -f) would kill the run with SIGXFSZ and no word; ignored, the write
  // fails with EFBIG instead, and the output's error names the file (exit status 4).
  std::signal(SIGXFSZ, SIG_IGN);
  CLI::App app{"statewise: state-space estimation (Kalman filter, RTS smoother) for sensor logs", "statewise"};
  app.set_version_flag("--version", std::string("statewise ") + STATEWISE_VERSION);
  app.require_subcommand(1);

  EstimateOptions filter_options, smooth_options;
  CLI::App* filter = app.add_subcommand("filter", "Run the Kalman filter over a log, row by row");
  add_estimate_options(*filter, filter_options);
  add_regular_option(*filter, filter_options);
  add_trust_options(*filter, filter_options.trust, true, false);
  add_grouping_options(*filter, filter_options);
  add_state_options(*filter, filter_options);
  CLI::App* smooth = app.add_subcommand("smooth", "Estimate every row from the whole log (RTS smoother)");
  add_estimate_options(*smooth, smooth_options);
  add_regular_option(*smooth, smooth_options);
  add_trust_options(*smooth, smooth_options.trust, true, true);
  smooth
      ->add_option("--lag", smooth_options.lag,
                   "Fixed-lag smoothing: stream the log and write each row as soon as K more rows have "
                   "arrived, estimated from the rows up to then; 0 = the filter's estimates")
      ->type_name("K")
      ->check(whole_number(0))
      ->default_str("off");  // not -1, the value that stands for "not given"
  add_grouping_options(*smooth, smooth_options);

  ForecastOptions forecast_options;
  CLI::App* forecast = app.add_subcommand(
      "forecast", "Filter a log, then predict rows past its end with intervals for new measurements");
  add_estimate_options(*forecast, forecast_options);
  CLI::Option* horizon =
      forecast->add_option("--horizon", forecast_options.horizon, "Number of future rows to predict")
          ->check(whole_number(1));
  forecast->add_option("--until", forecast_options.until, "Predict up to this time (in the log's time form)")
      ->excludes(horizon);
  forecast->add_option("--step", forecast_options.step,
                       "Seconds between future rows (default: the model's step, or the log's median gap)");
  forecast->add_option("--level", forecast_options.level, "Coverage of the prediction intervals c_lo..c_hi")
      ->capture_default_str();

  CheckOptions check_options;
  CLI::App* check = app.add_subcommand(
      "check",
      "Report whether a model can work: observability, noise reach, stability, steady state; with a log, "
      "missing values and gaps (exit status 3 when it cannot work)");
  check->add_option("-m,--model", check_options.model_path, "Model file (JSON, docs/model-format.md)")
      ->required();
  check->add_option("input", check_options.input_path,
                    "Optional log to report missing values and gaps of; - for "
                    "standard input");
  check->add_option("--report", check_options.report_path, "Also write the report as JSON to this file");
  check
      ->add_option("--delimiter", check_options.delimiter,
                   "Field separator of the log: one character, or tab")
      ->capture_default_str();
  check
      ->add_option("--missing", check_options.missing_tokens,
                   "Extra cell text meaning 'no value' (repeatable)")
      ->allow_extra_args(false);
  check->add_flag("--sort", check_options.sort, "Sort the log's rows by time first");
  check
      ->add_option("--duplicates", check_options.duplicates,
                   "Rows with the same time: error, or merge them per channel: first, last or mean")
      ->capture_default_str();
  check->add_option(
      "--dt", check_options.dt,
      "Continuous models: seconds between rows for the steady state (default: the log's median gap)");

  DiscretizeOptions discretize_options;
  CLI::App* discretize = app.add_subcommand(
      "discretize", "Print the discrete model equivalent to a model over a step of --dt seconds");
  discretize
      ->add_option("-m,--model", discretize_options.model_path,
                   "Model file: continuous, or discrete with a step")
      ->required();
  discretize->add_option("--dt", discretize_options.dt, "The step in seconds")->required();
  discretize
      ->add_option("-o,--output", discretize_options.output_path,
                   "Where to write the model; - for standard output")
      ->capture_default_str();

  FitCommandOptions fit_options;
  CLI::App* fit = app.add_subcommand("fit", "Estimate the values a model file marks \"estimate\" from a log");
  add_fit_options(*fit, fit_options);
  ExpandCommandOptions expand_options;
  CLI::App* expand = app.add_subcommand("expand", "Print a model file with its components as plain matrices");
  expand->add_option("-m,--model", expand_options.model_path, "Model file (JSON, docs/model-format.md)")->required();
  expand->add_option("-o,--output", expand_options.output_path, "Where to write it; - for standard output")
      ->capture_default_str();

  EstimateOptions diagnose_options;
  CLI::App* diagnose =
      app.add_subcommand("diagnose", "Check the model on a log: innovation tests and verdicts in plain words");
  add_diagnose_options(*diagnose, diagnose_options);
  PlotCommandOptions plot_options;
  CLI::App* plot = app.add_subcommand("plot", "Draw an estimates table as a self-contained HTML page");
  plot->add_option("input", plot_options.input_path, "Estimates table (CSV of filter or smooth); - for standard input")
      ->capture_default_str();
  plot->add_option("-o,--output", plot_options.output_path, "Where to write the HTML page; - for standard output")
      ->capture_default_str();
  plot->add_option("--title", plot_options.title, "Title of the page");
  complete_cli(app);  // after the last command: help, defaults in help, --print-cli-definition

  try {
    app.parse(argc, argv);
  } catch (const CLI::Success& e) {  // --help, --version, help COMMAND, --print-cli-definition
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    return report_error(std::string(e.what()) + "; see 'statewise --help'", kExitBadInput);
  }

  try {
    refuse_estimate_targets(filter_options);
    refuse_estimate_targets(smooth_options);
    refuse_estimate_targets(forecast_options);
    refuse_estimate_targets(diagnose_options);
    refuse_input_targets(check_options.input_path, {&check_options.report_path});
    refuse_input_targets(fit_options.input_path, {&fit_options.output_path, &fit_options.report_path});
    refuse_input_targets(plot_options.input_path, {&plot_options.output_path});
    if (filter->parsed()) return run_filter(filter_options);
    if (smooth->parsed())
      return smooth_options.lag >= 0 ? run_fixed_lag_smooth(smooth_options) : run_smooth(smooth_options);
    if (forecast->parsed()) return run_forecast(forecast_options);
    if (check->parsed()) return run_check(check_options);
    if (discretize->parsed()) return run_discretize(discretize_options);
    if (fit->parsed()) return run_fit(fit_options);
    if (expand->parsed()) return run_expand(expand_options);
    if (diagnose->parsed()) return run_diagnose(diagnose_options);
    if (plot->parsed()) return run_plot(plot_options);
  } catch (const statewise::InputError& e) {
    return report_error(e.what(), kExitBadInput);
  } catch (const NumericalFailure& e) {
    return report_error(e.message, kExitNumericalFailure);
  } catch (const OutputError& e) {
    return report_error(e.message, kExitOutputFailure);
  } catch (const BusyError& e) {
    return report_error(e.message, kExitBusy);
  } catch (const std::bad_alloc&) {
    return report_error("out of memory", kExitNumericalFailure);
  }
  return kExitBadInput;
}
