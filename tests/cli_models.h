#pragma once
// Model files, as text, shared by the tests that run the statewise binary.

namespace statewise::testing {

// Falling body: continuous white-noise acceleration with gravity as a known input (invented numbers).
inline constexpr const char* kFallingBodyModel = R"({
  "states": ["position", "velocity"], "observations": ["height"], "inputs": ["g"],
  "time": {"column": "time"}, "domain": "continuous",
  "A": [[0, 1], [0, 0]], "B": [[0], [-1]], "C": [[1, 0]], "Q": [[0, 0], [0, 0.3]], "R": 0.25,
  "initial": {"mean": [100, 0], "covariance": [4, 1]}
})";

}  // namespace statewise::testing
