#pragma once
/// \file filter_state.h
/// A filter's state as JSON text, to save it between runs and resume with exactly the estimates an
/// uninterrupted run would give (KalmanFilter::state() and restore()). The text names the model's
/// states and inputs, so a state saved for one model is refused by another:
///
/// ```json
/// {
///   "statewise_filter_state": 1,
///   "states": ["air_temp", "warming_rate"],
///   "rows_processed": 2880,
///   "mean": [-18.02, 0.0011],
///   "covariance": [[0.0041, 0.00012], [0.00012, 0.0000093]],
///   "inputs": ["compressor"],
///   "last_inputs": [0.4]
/// }
/// ```
/// Numbers are written in shortest round-trip form, so reading the text back gives the very same
/// doubles. `inputs` and `last_inputs` are absent for a model without inputs.

#include <string>
#include <string_view>

#include "statewise/error.h"
#include "statewise/filter.h"
#include "statewise/model.h"

namespace statewise {

/// Format version written in `statewise_filter_state`.
inline constexpr int kFilterStateFormatVersion = 1;

/// Checks that `state` fits `model`: n means, an n×n finite symmetric positive semidefinite
/// covariance, p finite last inputs. Raises InputError naming `name` and the field, e.g.
/// `state.json: mean: expected 2 values (one per state: air_temp, warming_rate), got 3`.
void validate_filter_state(const FilterState& state, const StateSpaceModel& model, const std::string& name);

/// The state as JSON text (two-space indentation, ending with a newline).
std::string write_filter_state(const FilterState& state, const StateSpaceModel& model);

/// Reads state text written by write_filter_state for `model`. `file_name` is used in messages.
/// Raises InputError with file:line:column for JSON syntax errors and `file: key: ...` for anything
/// missing, unknown (with a did-you-mean hint), of the wrong size, or saved for other states or inputs.
FilterState parse_filter_state(std::string_view json_text, const StateSpaceModel& model, const std::string& file_name);

}  // namespace statewise
