#pragma once
// The statewise subcommands. Each takes its parsed options, does its I/O, and returns an exit code
// (cli/exit_codes.h); bad input surfaces as statewise::InputError, output trouble as OutputError,
// numerical trouble as NumericalFailure, all mapped to exit codes in main.cpp.

#include <cstdint>
#include <string>
#include <vector>

namespace statewise::cli {

/// A numerical breakdown the command cannot get past; the message names the row's file and line.
struct NumericalFailure {
  std::string message;
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

/// `statewise filter`: streams rows through the Kalman filter.
int run_filter(const EstimateOptions& options);
/// `statewise smooth`: filters the whole log, then runs the RTS smoother backwards.
int run_smooth(const EstimateOptions& options);

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

/// The delimiter option as one character: "," ";" "|" "\t" or "tab".
char parse_delimiter(const std::string& text);

}  // namespace statewise::cli
