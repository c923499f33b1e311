#pragma once
/// \file run_state.h
/// The saved state of `statewise filter --state FILE`: everything a later run needs to continue a log
/// where the last run stopped and write exactly the rows one uninterrupted run would have written.
/// One file holds any number of series keyed by a group name (a plain run uses the empty name ""),
/// so that a run over several sensor groups keeps them all in one file, replaced in one go. The format
/// is described in docs/outputs.md ("State file") and docs/state.schema.json:
///
/// ```json
/// {
///   "statewise_run_state": 1,
///   "model_fingerprint": "fnv1a64:5a0c3e1f09b2d7c4",
///   "states": ["level", "slope"],
///   "settings": "numerics=plain reject= regular=0 duplicates=error",
///   "output_length": 18231,
///   "groups": {
///     "": {
///       "log_rows": 240, "rows": 240,
///       "last_time": {"text": "1700000239", "seconds": 1700000239, "fraction": 0},
///       "grid_origin": {"seconds": 1700000000, "fraction": 0}, "next_grid": 0,
///       "last_inputs": [],
///       "numerics": "plain", "mean": [1.5, 0.01], "covariance": [[0.1, 0], [0, 0.01]],
///       "fully_rejected_rows": 0
///     }
///   }
/// }
/// ```
/// Numbers are written so that reading them back gives the very same doubles.

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "statewise/forward_pass.h"
#include "statewise/model.h"
#include "statewise/time_axis.h"

namespace statewise {

/// Format version written in `statewise_run_state`.
inline constexpr int kRunStateFormatVersion = 1;

/// One series' place in its log and its filter.
struct SeriesState {
  std::uint64_t log_rows = 0;  ///< data rows of the log consumed (skipped on resume without a time column)
  std::uint64_t rows = 0;      ///< timeline rows filtered (log rows, merged rows count once, plus inserted ones)
  bool has_time = false;       ///< the model has a time column; then `position` holds times
  TimelinePosition position;   ///< where the timeline stopped (times only when has_time)
  ForwardPassState pass;       ///< the filter after the last row
};

/// The whole state file.
struct RunState {
  std::uint64_t model_fingerprint = 0;  ///< model_fingerprint() of the model the state belongs to
  std::vector<std::string> states;      ///< that model's state names, for messages
  /// The options that change the estimates (run_settings_text in the command), compared on resume.
  std::string settings;
  /// Bytes of the output file that the saved rows account for (only when the output is appended to).
  std::optional<std::uint64_t> output_length;
  std::map<std::string, SeriesState> groups;  ///< by group name; "" for a plain run
};

/// FNV-1a, 64 bits (Fowler, Noll and Vo; offset basis 14695981039346656037, prime 1099511628211).
std::uint64_t fnv1a_64(std::string_view bytes);

/// A stable hash of the model's canonical content: fnv1a_64 of write_model(model). The layout and
/// whitespace of the model file do not change it; any number, name or option of the model does.
std::uint64_t model_fingerprint(const StateSpaceModel& model);

/// The fingerprint as written in the file: `fnv1a64:` and 16 lower-case hex digits.
std::string fingerprint_text(std::uint64_t fingerprint);

/// The state as JSON text (two-space indentation, ending with a newline).
std::string write_run_state(const RunState& state);

/// Reads state text written by write_run_state. `file_name` is used in messages: syntax errors (a
/// truncated file) raise InputError with file:line:column, anything missing, unknown or of the wrong
/// size with `file: key: ...`. Checks the sizes against the file's own `states`; check_run_state
/// compares them with a model.
RunState parse_run_state(std::string_view json_text, const std::string& file_name);

/// Raises InputError (`file: model_fingerprint: ...`, naming both models) when `state` was saved for
/// another model than `model`, and (`file: settings: ...`, naming both) when it was saved with other
/// settings; then checks each group's sizes against the model.
/// `model_name` names the model file in messages.
void check_run_state(const RunState& state, const StateSpaceModel& model, const std::string& model_name,
                     const std::string& settings, const std::string& file_name);

}  // namespace statewise
