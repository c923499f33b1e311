#pragma once
/// \file fuzz_targets.h
/// Fuzz entry functions, one per parser. Each takes arbitrary bytes, feeds them to the parser,
/// swallows the InputError that bad input is supposed to raise, and checks invariants that must hold
/// for every input the parser accepts. A broken invariant throws FuzzInvariantError; any exception
/// other than InputError leaves the function. libFuzzer (tests/fuzz/fuzz_<name>.cpp) treats an
/// escaping exception as a crash; the replay test (tests/fuzz_replay_test.cpp) fails on it.
///
/// Adding a target: write one function here and in fuzz_targets.cpp, list it in fuzz_targets(),
/// add tests/fuzz/fuzz_<name>.cpp calling it, and a seed folder tests/fuzz/corpus/<name>/.
/// CMake and tools/fuzz pick the target up from the fuzz_<name>.cpp file name.

#include <cstddef>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <vector>

namespace statewise::fuzz {

/// A parser accepted an input but broke a property that must hold for accepted input (for example
/// a model written back with write_model() reads as a different model).
class FuzzInvariantError : public std::logic_error {
 public:
  using std::logic_error::logic_error;
};

/// CsvReader::from_string over the input (its first byte picks the delimiter, an extra missing
/// token and the timeline options), every record and field, then the same text through
/// ObservationStream and Timeline with a small fixed model (columns time, y, u).
void fuzz_csv_reader(const std::uint8_t* data, std::size_t size);

/// parse_model, validate_model and write_model round trip; expand_model_text; parse_model_template
/// and write_fitted_model (components and "estimate" markers).
void fuzz_model_file(const std::uint8_t* data, std::size_t size);

/// try_parse_time and parse_time; an accepted time, written with format_time, reads back as the same
/// instant (to the nanosecond format_time writes) and is written the same way again.
void fuzz_time(const std::uint8_t* data, std::size_t size);

/// parse_filter_state for a fixed two-state model with one input; an accepted state passes
/// validate_filter_state and survives write_filter_state and parse_filter_state bit for bit.
void fuzz_filter_state(const std::uint8_t* data, std::size_t size);

/// parse_run_state; an accepted state survives write_run_state and parse_run_state bit for bit (and
/// is written the same way again). Against a small fixed model (the cold-room example's) and the
/// settings of a plain `statewise filter --state` run, check_run_state either raises InputError or
/// passes a state whose groups fit the model, from which the timeline and the filter resume.
void fuzz_run_state(const std::uint8_t* data, std::size_t size);

/// A fuzz target: its name (the corpus folder tests/fuzz/corpus/<name>/) and entry function.
struct FuzzTarget {
  const char* name;                                    ///< e.g. "csv_reader"
  void (*entry)(const std::uint8_t* data, std::size_t size);  ///< the entry function
};

/// Every target, for the replay test.
const std::vector<FuzzTarget>& fuzz_targets();

}  // namespace statewise::fuzz
