// The statewise command line: parses flags, calls a command, and maps errors to exit codes.
// All reading and writing of files happens in the commands; the library never prints or exits.

#include <cstdio>
#include <iostream>
#include <string>

#include <CLI/CLI.hpp>

#include "cli/cli_definition.h"
#include "cli/commands.h"
#include "cli/exit_codes.h"
#include "cli/output_file.h"
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
  statewise::cli::add_format_option(command, options.format);
}

int report_error(const std::string& message, int code) {
  std::fflush(stdout);
  std::cerr << "statewise: error: " << message << '\n';
  return code;
}

}  // namespace

int main(int argc, char** argv) {
  using namespace statewise::cli;
  CLI::App app{"statewise: state-space estimation (Kalman filter, RTS smoother) for sensor logs", "statewise"};
  app.set_version_flag("--version", std::string("statewise ") + STATEWISE_VERSION);
  app.require_subcommand(1);

  EstimateOptions filter_options, smooth_options;
  CLI::App* filter = app.add_subcommand("filter", "Run the Kalman filter over a log, row by row");
  add_estimate_options(*filter, filter_options);
  CLI::App* smooth = app.add_subcommand("smooth", "Estimate every row from the whole log (RTS smoother)");
  add_estimate_options(*smooth, smooth_options);
  complete_cli(app);  // after the last command: help, defaults in help, --print-cli-definition

  try {
    app.parse(argc, argv);
  } catch (const CLI::Success& e) {  // --help, --version, help COMMAND, --print-cli-definition
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    return report_error(std::string(e.what()) + "; see 'statewise --help'", kExitBadInput);
  }

  try {
    if (filter->parsed()) return run_filter(filter_options);
    if (smooth->parsed()) return run_smooth(smooth_options);
  } catch (const statewise::InputError& e) {
    return report_error(e.what(), kExitBadInput);
  } catch (const NumericalFailure& e) {
    return report_error(e.message, kExitNumericalFailure);
  } catch (const OutputError& e) {
    return report_error(e.message, kExitOutputFailure);
  } catch (const std::bad_alloc&) {
    return report_error("out of memory", kExitNumericalFailure);
  }
  return kExitBadInput;
}
