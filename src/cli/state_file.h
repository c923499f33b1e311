#pragma once
// `filter --state FILE`: locking the state file, reading and checking it, skipping the rows it already
// accounts for, and replacing it atomically (docs/outputs.md "State file", docs/unattended.md).

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "cli/commands.h"
#include "cli/output_file.h"
#include "statewise/model.h"
#include "statewise/run_state.h"
#include "statewise/series.h"

namespace CLI {
class App;
}

namespace statewise::cli {

/// Raised when another run holds the state file's lock and --no-wait was given (exit status kExitBusy).
struct BusyError {
  std::string message;
};

/// Adds --state, --append, --reset, --no-wait to `filter`.
void add_state_options(CLI::App& command, EstimateOptions& options);

/// Test-only (docs/unattended.md): when the environment variable STATEWISE_TEST_EXIT_AT names
/// `point`, the process ends at once with _exit(137), as if killed there.
void test_exit_point(const char* point);

/// The text of the options that change the estimates, saved in the state and compared on resume.
std::string run_settings_text(const EstimateOptions& options);

/// One run's hold on a state file: takes the lock (a sidecar FILE.lock), reads and checks the saved
/// state, and saves the new one. Inactive (does nothing) without --state.
class StateSession {
 public:
  /// Locks and reads; raises InputError for a corrupted state or one saved for another model or
  /// other settings (unless --reset), BusyError when locked and --no-wait. Nothing is written here.
  StateSession(const EstimateOptions& options, const StateSpaceModel& model);
  StateSession(const StateSession&) = delete;
  StateSession& operator=(const StateSession&) = delete;
  ~StateSession();

  /// True with --state.
  bool active() const { return !path_.empty(); }
  /// The saved series of `group` ("" for a run without --by), or null when it starts from the
  /// model's prior. Safe to call from several threads.
  const SeriesState* resume_point(const std::string& group = "") const;
  /// Brings an appended output back to the length the state accounts for (cutting off rows of a run
  /// killed before it saved its state); raises InputError when the output is shorter than that. With
  /// --append and no state yet, saves a first state at the output's current length, so that a first
  /// run killed midway is also undone by the next.
  void prepare_output(OutputFile& output);
  /// Saves `series` as group "" (and the output's length when appending), atomically.
  void save(const SeriesState& series, const OutputFile& output);
  /// Records `series` as the new state of `group` (--by), to be written by save(output).
  void record(const std::string& group, const SeriesState& series) { next_.groups[group] = series; }
  /// Saves every group recorded (groups not recorded keep their saved state) and the output's length
  /// when appending, atomically.
  void save(const OutputFile& output);
  /// Warnings about the state (a --reset, rows skipped), for stderr and the report.
  const std::vector<std::string>& warnings() const { return warnings_; }
  /// Adds a warning.
  void warn(std::string text) { warnings_.push_back(std::move(text)); }

 private:
  void write(const RunState& state);
  std::string path_;
  bool append_ = false;
  int lock_descriptor_ = -1;
  std::optional<RunState> saved_;
  RunState next_;
  std::vector<std::string> warnings_;
};

/// Decides which log rows a resumed run has already seen: rows at or before the saved time (or,
/// without a time column, the first `log_rows` data rows). Once a row is past them no more are skipped.
class ResumeSkipper {
 public:
  /// `resume` may be null (nothing skipped).
  ResumeSkipper(const SeriesState* resume, const StateSpaceModel& model);
  /// True when `row` is to be skipped; counts the rows it lets through too.
  bool skip(const ObservationRow& row);
  /// Rows skipped.
  std::uint64_t skipped() const { return skipped_; }
  /// Data rows of the log consumed, including those of the saved runs.
  std::uint64_t log_rows() const { return log_rows_; }

 private:
  const SeriesState* resume_;
  bool has_time_;
  bool done_;
  std::uint64_t skipped_ = 0, log_rows_ = 0;
};

}  // namespace statewise::cli
