#pragma once
// The statewise subcommands. Each takes its parsed options, does its I/O, and returns an exit code
// (cli/exit_codes.h); bad input surfaces as statewise::InputError, output trouble as OutputError,
// numerical trouble as NumericalFailure, all mapped to exit codes in main.cpp.

#include <cstdint>
#include <cstddef>
#include <string>
#include <vector>

#include "statewise/forward_pass.h"
#include "statewise/report.h"

namespace CLI {
class App;
}

namespace statewise::cli {

/// A numerical breakdown the command cannot get past; the message names the row's file and line.
struct NumericalFailure {
  std::string message;
};

/// The failure of a filter step at `place` (`file:line`): what went wrong and what to check, which
/// differs between a singular innovation covariance (a zero variance) and overflow (values or a
/// transition too large for double precision).
NumericalFailure step_failure(StepStatus status, const std::string& place);

/// Options about trusting the output, shared by filter, smooth and diagnose (cli/trust_options.cpp).
struct TrustOptions {
  std::string reject;              // --reject P; empty = no gate
  std::string numerics = "plain";  // --numerics plain|square-root
  int stuck_run = 20;              // --stuck N; 0 = off
  int lags = 0;                    // --lags H; 0 = automatic
  std::string plot_path;           // --plot FILE (filter, smooth); empty = none
  bool innovations = false;        // --innovations (smooth)
};

/// Options shared by the commands that read a log and write estimates.
struct EstimateOptions {
  std::string model_path;                  // -m/--model
  std::string input_path = "-";            // positional; "-" = standard input
  std::string output_path = "-";           // -o/--output
  std::string report_path;                 // --report; empty = none
  std::string delimiter = ",";             // --delimiter (input)
  std::vector<std::string> missing_tokens;  // --missing, repeatable
  int digits = 0;                          // --digits; 0 = shortest round trip
  bool sort = false;                       // --sort: sort rows by time first
  std::string duplicates = "error";        // --duplicates error|first|last|mean
  double regular_step = 0.0;               // --regular STEP seconds; 0 = off (filter, smooth)
  TrustOptions trust;                      // --reject, --numerics, --stuck, --lags, --plot, --innovations
  std::string format = "csv";              // --format: csv, tsv or jsonl
  long long lag = -1;                      // --lag K (smooth): fixed-lag smoothing; -1 = off
  bool header = true;                      // off with --no-header (filter, smooth)
  std::string by;                          // --by COLUMN: one run per group; empty = one run (filter, smooth)
  int threads = 0;                         // --threads N for --by; 0 = all cores
  bool fail_fast = false;                  // --fail-fast: with --by, stop at the first failed group
  bool quiet = false;                      // --quiet: no progress line, no warnings on stderr
  std::string state_path;                  // --state FILE (filter); empty = none
  bool append = false;                     // --append (filter)
  bool reset = false;                      // --reset (filter, with --state)
  bool no_wait = false;                    // --no-wait (filter, with --state)
};

/// Options of `statewise forecast`: a log's options plus what to forecast.
struct ForecastOptions : EstimateOptions {
  long long horizon = 0;  // --horizon ROWS; 0 = not given
  std::string until;      // --until TIME; empty = not given
  double step = 0.0;      // --step SECONDS; 0 = the default
  double level = 0.95;    // --level, coverage of the prediction interval
};

/// Options of `statewise check`.
struct CheckOptions {
  std::string model_path;                   // -m/--model
  std::string input_path;                   // positional, optional; empty = no log
  std::string report_path;                  // --report; empty = none
  std::string delimiter = ",";              // --delimiter (input)
  std::vector<std::string> missing_tokens;  // --missing, repeatable
  bool sort = false;                        // --sort
  std::string duplicates = "error";         // --duplicates
  double dt = 0.0;                          // --dt: a continuous model's row spacing for the steady state
};

/// Options of `statewise discretize`.
struct DiscretizeOptions {
  std::string model_path;         // -m/--model
  double dt = 0.0;                // --dt, seconds
  std::string output_path = "-";  // -o/--output
};

/// Options of `statewise plot`.
struct PlotCommandOptions {
  std::string input_path = "-";   // positional: an estimates table; "-" = standard input
  std::string output_path = "-";  // -o/--output: the HTML page
  std::string title;              // --title; empty = from the input's name
};

/// `statewise filter`: streams rows through the Kalman filter.
int run_filter(const EstimateOptions& options);
/// `statewise smooth`: filters the whole log, then runs the RTS smoother backwards.
int run_smooth(const EstimateOptions& options);
/// `statewise smooth --lag K`: streams rows through the filter and a fixed-lag smoother, writing each
/// row K rows later (cli/fixed_lag_command.cpp).
int run_fixed_lag_smooth(const EstimateOptions& options);

/// `statewise forecast`: filters a log, then writes predicted rows past its end.
int run_forecast(const ForecastOptions& options);
/// `statewise check`: prints a structural report; kExitModelCannotWork when the model cannot work.
int run_check(const CheckOptions& options);
/// `statewise discretize`: writes the equivalent discrete model file for a step of --dt seconds.
int run_discretize(const DiscretizeOptions& options);
/// Options of `statewise fit`.
struct FitCommandOptions {
  std::vector<std::string> model_paths;    // -m/--model, repeatable
  std::string input_path = "-";            // positional; "-" = standard input
  std::string output_path = "-";           // -o/--output: the fitted model file
  std::string report_path;                 // --report; empty = none
  std::string method = "auto";             // --method em|mle|auto
  int em_steps = -1;                       // --em-steps; -1 = the method's default
  int max_iterations = 0;                  // --max-iterations; 0 = the defaults
  bool compare = false;                    // --compare
  std::string delimiter = ",";             // --delimiter (input)
  std::vector<std::string> missing_tokens;  // --missing, repeatable
};

/// Options of `statewise expand`.
struct ExpandCommandOptions {
  std::string model_path;        // -m/--model
  std::string output_path = "-";  // -o/--output
};

/// `statewise fit`: estimates the values marked "estimate"; with several models, ranks them.
int run_fit(const FitCommandOptions& options);
/// `statewise expand`: prints a model file with its components written out as plain matrices.
int run_expand(const ExpandCommandOptions& options);
/// `statewise diagnose`: runs the filter and prints the consistency tests and verdicts as text.
int run_diagnose(const EstimateOptions& options);
/// `statewise plot`: draws an estimates table as a self-contained HTML page.
int run_plot(const PlotCommandOptions& options);

/// The delimiter option as one character: "," ";" "|" "\t" or "tab".
char parse_delimiter(const std::string& text);

/// The options of `diagnose`: those of filter that make sense without an estimates table.
void add_diagnose_options(CLI::App& command, EstimateOptions& options);
/// Adds --by, --threads, --fail-fast and --no-header to filter or smooth (cli/grouping_options.cpp).
void add_grouping_options(CLI::App& command, EstimateOptions& options);
/// Adds --reject, --numerics, --stuck and --lags to a command, and --plot and --innovations when asked.
void add_trust_options(CLI::App& command, TrustOptions& options, bool plot, bool innovations);
/// The forward pass's options from the flags; raises InputError naming the flag for a bad value.
ForwardPassOptions forward_pass_options(const TrustOptions& options);
/// Puts the pass's diagnostics into the report and appends their warnings (stuck sensors, numerics).
void attach_diagnostics(RunReport& report, const ForwardPass& pass, const std::string& input_name);
/// Draws `table_text` (an estimates table) as HTML into options.trust.plot_path, with the report's
/// verdicts and warnings on the page.
void write_plot_file(const std::string& table_text, const EstimateOptions& options, const RunReport& report);

}  // namespace statewise::cli
