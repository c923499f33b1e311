#pragma once
// The statewise subcommands. Each takes its parsed options, does its I/O, and returns an exit code
// (cli/exit_codes.h); bad input surfaces as statewise::InputError, output trouble as OutputError,
// numerical trouble as NumericalFailure, all mapped to exit codes in main.cpp.

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
  std::string format = "csv";              // --format: csv, tsv or jsonl
};

/// `statewise filter`: streams rows through the Kalman filter.
int run_filter(const EstimateOptions& options);
/// `statewise smooth`: filters the whole log, then runs the RTS smoother backwards.
int run_smooth(const EstimateOptions& options);

/// The delimiter option as one character: "," ";" "|" "\t" or "tab".
char parse_delimiter(const std::string& text);

}  // namespace statewise::cli
