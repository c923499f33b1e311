// Fuzz entry functions (fuzz_targets.h). Each swallows InputError only: bad input must be reported
// that way and nothing else, so any other exception is a finding. The invariants checked here are
// the parsers' documented promises (csv.h, model.h, time_axis.h, filter_state.h).

#include "fuzz/fuzz_targets.h"

#include <algorithm>
#include <cmath>
#include <string>
#include <string_view>

#include "statewise/components.h"
#include "statewise/csv.h"
#include "statewise/error.h"
#include "statewise/estimation_spec.h"
#include "statewise/filter.h"
#include "statewise/filter_state.h"
#include "statewise/forward_pass.h"
#include "statewise/model.h"
#include "statewise/run_state.h"
#include "statewise/series.h"
#include "statewise/time_axis.h"

namespace statewise::fuzz {

namespace {

void check(bool holds, const std::string& what) {
  if (!holds) throw FuzzInvariantError("fuzz invariant broken: " + what);
}

std::string_view as_text(const std::uint8_t* data, std::size_t size) {
  return size == 0 ? std::string_view() : std::string_view(reinterpret_cast<const char*>(data), size);
}

bool same_matrix(const Eigen::MatrixXd& a, const Eigen::MatrixXd& b) {
  return a.rows() == b.rows() && a.cols() == b.cols() && (a.size() == 0 || a == b);
}

bool same_model(const StateSpaceModel& a, const StateSpaceModel& b) {
  return a.state_names == b.state_names && a.observation_names == b.observation_names &&
         a.input_names == b.input_names && same_matrix(a.A, b.A) && same_matrix(a.B, b.B) &&
         same_matrix(a.C, b.C) && same_matrix(a.Q, b.Q) && same_matrix(a.R, b.R) &&
         same_matrix(a.initial_mean, b.initial_mean) && same_matrix(a.initial_covariance, b.initial_covariance) &&
         a.time_column == b.time_column && a.domain == b.domain && a.step == b.step && a.diffuse == b.diffuse;
}

// The small fixed models the CSV target reads logs for: one channel y, one input u, a time column.
const StateSpaceModel& csv_model(int variant) {
  static const StateSpaceModel plain = parse_model(
      R"({"observations": ["y"], "inputs": ["u"], "time": {"column": "time"},
          "A": 1, "B": [[0.5]], "C": 1, "Q": 1, "R": 1})",
      "fuzz-plain.json");
  static const StateSpaceModel stepped = parse_model(
      R"({"observations": ["y"], "inputs": ["u"], "time": {"column": "time"}, "step": 0.5,
          "A": 1, "B": [[0.5]], "C": 1, "Q": 1, "R": 1})",
      "fuzz-step.json");
  static const StateSpaceModel continuous = parse_model(
      R"({"observations": ["y"], "inputs": ["u"], "time": {"column": "time"}, "domain": "continuous",
          "A": -0.1, "B": [[0.5]], "C": 1, "Q": 1, "R": 1})",
      "fuzz-continuous.json");
  return variant == 0 ? plain : variant == 1 ? stepped : continuous;
}

// Every record and field of the reader, checking what csv.h promises.
void read_all_records(CsvReader& reader, std::size_t size, std::size_t line_count) {
  const std::vector<std::string>& header = reader.header();
  check(!header.empty(), "the header has at least one column");
  for (std::size_t i = 0; i < header.size(); ++i) {
    check(!header[i].empty(), "header names are not empty");
    check(header[i].size() <= size, "a header name is no longer than the input");
    check(reader.find_column(header[i]) == i, "header names are unique and found where they stand");
  }
  std::size_t previous_line = 0;
  while (reader.next()) {
    check(reader.field_count() == header.size(), "every record has as many fields as the header");
    check(reader.line() > previous_line, "records start on increasing lines");
    check(reader.line() <= line_count, "a record starts on a line of the input");
    previous_line = reader.line();
    check(reader.bytes_read() <= size, "bytes read never exceed the input");
    for (std::size_t i = 0; i < reader.field_count(); ++i) {
      check(reader.field(i).size() <= size, "a field is no longer than the input");
      check(reader.column(i) >= 1 && reader.column(i) <= size + 1, "a field's column lies in the input");
      try {
        const double value = reader.number(i);
        check(reader.is_missing(i) ? std::isnan(value) : std::isfinite(value),
              "number() is NaN for a missing token and finite otherwise");
      } catch (const InputError&) {
        check(!reader.is_missing(i), "a missing token reads as NaN, not as an error");
      }
    }
  }
}

}  // namespace

void fuzz_csv_reader(const std::uint8_t* data, std::size_t size) {
  // The first byte picks the options, the rest is the log.
  const std::uint8_t options_byte = size > 0 ? data[0] : 0;
  const std::string_view text = size > 0 ? as_text(data + 1, size - 1) : std::string_view();
  CsvOptions options;
  static constexpr char kDelimiters[] = {',', '\t', ';', ' '};
  options.delimiter = kDelimiters[options_byte & 3u];
  if (options_byte & 4u) options.missing_tokens = {"-999", "--"};
  const std::size_t line_count = static_cast<std::size_t>(std::count(text.begin(), text.end(), '\n')) + 1;

  try {
    CsvReader reader = CsvReader::from_string(std::string(text), "fuzz.csv", options);
    read_all_records(reader, text.size(), line_count);
  } catch (const InputError&) {
  }

  // The same log as the model sees it: numbers, missing inputs, the time column and the timeline.
  try {
    const StateSpaceModel& model = csv_model((options_byte >> 3) % 3);
    TimelineOptions timeline_options;
    static constexpr DuplicatePolicy kPolicies[] = {DuplicatePolicy::error, DuplicatePolicy::first,
                                                    DuplicatePolicy::last, DuplicatePolicy::mean};
    timeline_options.duplicates = kPolicies[(options_byte >> 5) & 3u];
    if (options_byte & 0x80u) timeline_options.regular_step = 1.0;
    CsvReader reader = CsvReader::from_string(std::string(text), "fuzz.csv", options);
    ObservationStream stream(reader, model);
    Timeline timeline(model, timeline_options, "fuzz.csv");
    ObservationRow row;
    TimelineRow out;
    // A --regular grid may legitimately insert millions of rows into one gap; a few thousand
    // timeline rows cover the code, so stop there.
    std::size_t budget = 4096;
    bool more = true;
    while (more && budget > 0) {
      more = stream.next(row);
      if (more) {
        check(row.values.size() == 1 && row.inputs.size() == 1, "a row has one value and one input");
        check(std::isfinite(row.inputs[0]), "inputs are never missing");
        timeline.push(row);
      } else {
        timeline.finish();
      }
      while (budget > 0 && timeline.pop(out)) {
        --budget;
        check(out.time >= 0.0, "timeline times do not go back before the first row");
        check(out.gap.seconds >= 0.0, "gaps are not negative");
      }
    }
  } catch (const InputError&) {
  }
}

void fuzz_model_file(const std::uint8_t* data, std::size_t size) {
  const std::string_view text = as_text(data, size);
  bool parsed = false;
  StateSpaceModel model;
  try {
    model = parse_model(text, "fuzz.json");
    parsed = true;
  } catch (const InputError&) {
  }
  if (parsed) {
    // parse_model returns a valid model, and write_model reproduces it exactly (model.h).
    try {
      validate_model(model, "fuzz.json");
    } catch (const InputError& e) {
      check(false, std::string("a parsed model passes validate_model: ") + e.what());
    }
    const std::string written = write_model(model);
    try {
      check(same_model(parse_model(written, "written.json"), model), "parse_model(write_model(m)) is m");
    } catch (const InputError& e) {
      check(false, std::string("write_model's text parses: ") + e.what());
    }
  }
  try {
    // Components expanded into plain matrices describe the same model.
    const std::string expanded = expand_model_text(text, "fuzz.json");
    if (parsed) {
      try {
        check(same_model(parse_model(expanded, "expanded.json"), model), "the expanded model is the same model");
      } catch (const InputError& e) {
        check(false, std::string("the expanded text of a valid model parses: ") + e.what());
      }
    }
  } catch (const InputError&) {
  }
  try {
    // Markers: the template's own starting values written back into the user's text.
    const ModelTemplate model_template = parse_model_template(text, "fuzz.json");
    check(model_template.spec.size() == model_template.spec.parameters.size(), "spec size counts parameters");
    const std::string fitted = write_fitted_model(model_template, model_template.model);
    (void)fitted;
  } catch (const InputError&) {
  }
}

void fuzz_time(const std::uint8_t* data, std::size_t size) {
  const std::string_view text = as_text(data, size);
  ParsedTime parsed;
  std::string problem;
  const bool accepted = try_parse_time(text, parsed, problem);
  // parse_time raises exactly when try_parse_time refuses.
  try {
    const ParsedTime again = parse_time(text, {"fuzz.csv", 2, 1, ""}, "time");
    check(accepted, "parse_time accepts only what try_parse_time accepts");
    check(again.time == parsed.time, "parse_time and try_parse_time agree");
  } catch (const InputError&) {
    check(!accepted, "parse_time raises only for what try_parse_time refuses");
  }
  if (!accepted) return;
  check(problem.empty(), "no problem is reported for an accepted time");
  check(parsed.time.fraction >= 0.0 && parsed.time.fraction < 1.0, "the fraction lies in [0, 1)");
  check(parsed.style.fraction_digits >= 0 && parsed.style.fraction_digits <= 9, "fraction digits are 0 to 9");
  const std::string written = format_time(parsed.time, parsed.style);
  ParsedTime reread;
  std::string reread_problem;
  check(try_parse_time(written, reread, reread_problem),
        "format_time's text \"" + written + "\" reads back (" + reread_problem + ")");
  // format_time writes at most nanoseconds, so the instant may move by half a nanosecond plus the
  // rounding of the double fraction.
  check(reread.time.seconds == parsed.time.seconds || reread.time.seconds == parsed.time.seconds + 1 ||
            reread.time.seconds == parsed.time.seconds - 1,
        "format_time's text \"" + written + "\" is the same second");
  check(std::abs(seconds_between(parsed.time, reread.time)) <= 1e-9,
        "format_time's text \"" + written + "\" reads back as the same instant");
  check(format_time(reread.time, reread.style) == written,
        "format_time's text \"" + written + "\" is written the same way again");
}

namespace {

// Two states, one channel, one input: the model the filter-state target reads states for.
const StateSpaceModel& filter_state_model() {
  static const StateSpaceModel model = parse_model(
      R"({"states": ["level", "rate"], "observations": ["y"], "inputs": ["u"],
          "A": [[1, 1], [0, 1]], "B": [[0], [1]], "C": [[1, 0]], "Q": [0.1, 0.01], "R": 1})",
      "fuzz-model.json");
  return model;
}

bool same_state(const FilterState& a, const FilterState& b) {
  return same_matrix(a.mean, b.mean) && same_matrix(a.covariance, b.covariance) &&
         a.rows_processed == b.rows_processed && same_matrix(a.last_inputs, b.last_inputs);
}

}  // namespace

void fuzz_filter_state(const std::uint8_t* data, std::size_t size) {
  const StateSpaceModel& model = filter_state_model();
  FilterState state;
  try {
    state = parse_filter_state(as_text(data, size), model, "fuzz-state.json");
  } catch (const InputError&) {
    return;
  }
  try {
    validate_filter_state(state, model, "fuzz-state.json");
  } catch (const InputError& e) {
    check(false, std::string("a parsed state passes validate_filter_state: ") + e.what());
  }
  const std::string written = write_filter_state(state, model);
  try {
    check(same_state(parse_filter_state(written, model, "written.json"), state),
          "parse_filter_state(write_filter_state(s)) is s");
  } catch (const InputError& e) {
    check(false, std::string("write_filter_state's text parses: ") + e.what());
  }
  // The filter resumes from it.
  KalmanFilter filter(model);
  try {
    filter.restore(state);
  } catch (const InputError& e) {
    check(false, std::string("the filter resumes from a parsed state: ") + e.what());
  }
  check(same_state(filter.state(), state), "the resumed filter's state is the parsed state");
}

namespace {

// The cold-room example's model (examples/cold-room/model.json, same content, so the same
// fingerprint): two states, two channels, one input, a time column. The seeds in
// tests/fuzz/corpus/run_state/ were written by `statewise filter --state` with it.
const StateSpaceModel& run_state_model() {
  static const StateSpaceModel model = parse_model(
      R"({"version": 1,
          "description": "Cold-storage room: air temperature and its warming rate, seen by two probes; compressor duty is a known input. Invented demo.",
          "states": ["air_temp", "warming_rate"], "observations": ["probe_a", "probe_b"],
          "inputs": ["compressor"], "time": {"column": "time"},
          "A": [[1, 1], [0, 0.98]], "B": [[-0.06], [0]], "C": [[1, 0], [1, 0]],
          "Q": [0.0004, 0.00002], "R": [0.01, 0.04],
          "initial": {"mean": [-18, 0], "covariance": [4, 0.01]}})",
      "fuzz-model.json");
  return model;
}

// What run_settings_text (src/cli/state_file.cpp) writes for `statewise filter --state` with no
// other option.
constexpr const char* kRunStateSettings = "numerics=plain reject= regular=0 duplicates=error digits=0 format=csv";

bool same_time(const TimePoint& a, const TimePoint& b) { return a.seconds == b.seconds && a.fraction == b.fraction; }

bool same_series(const SeriesState& a, const SeriesState& b) {
  const ForwardPassState& p = a.pass;
  const ForwardPassState& q = b.pass;
  return a.log_rows == b.log_rows && a.rows == b.rows && a.has_time == b.has_time &&
         same_time(a.position.origin, b.position.origin) && same_time(a.position.last_time, b.position.last_time) &&
         a.position.last_text == b.position.last_text && a.position.next_grid == b.position.next_grid &&
         a.position.last_inputs == b.position.last_inputs && p.numerics == q.numerics && same_matrix(p.mean, q.mean) &&
         same_matrix(p.covariance, q.covariance) && same_matrix(p.factor, q.factor) &&
         same_matrix(p.diffuse, q.diffuse) && p.fully_rejected_rows == q.fully_rejected_rows;
}

bool same_run_state(const RunState& a, const RunState& b) {
  if (a.model_fingerprint != b.model_fingerprint || a.states != b.states || a.settings != b.settings ||
      a.output_length != b.output_length || a.groups.size() != b.groups.size())
    return false;
  for (auto i = a.groups.begin(), j = b.groups.begin(); i != a.groups.end(); ++i, ++j)
    if (i->first != j->first || !same_series(i->second, j->second)) return false;
  return true;
}

}  // namespace

void fuzz_run_state(const std::uint8_t* data, std::size_t size) {
  RunState state;
  try {
    state = parse_run_state(as_text(data, size), "fuzz-state.json");
  } catch (const InputError&) {
    return;
  }
  const std::string written = write_run_state(state);
  try {
    check(same_run_state(parse_run_state(written, "written.json"), state), "parse_run_state(write_run_state(s)) is s");
  } catch (const InputError& e) {
    check(false, std::string("write_run_state's text parses: ") + e.what());
  }
  check(write_run_state(state) == written, "write_run_state writes the same state the same way");

  const StateSpaceModel& model = run_state_model();
  try {
    check_run_state(state, model, "fuzz-model.json", kRunStateSettings, "fuzz-state.json");
  } catch (const InputError&) {
    return;
  }
  // Accepted for the model: what the command does next with each group (src/cli/state_file.cpp).
  check(state.states == model.state_names, "an accepted state has the model's states");
  for (const auto& [name, series] : state.groups) {
    check(series.pass.mean.size() == static_cast<Eigen::Index>(model.state_count()), "an accepted mean has one value per state");
    if (series.rows == 0) continue;
    check(series.position.last_inputs.size() == static_cast<std::size_t>(model.input_count()),
          "an accepted group has one last input per input");
    check(series.has_time, "an accepted group of a model with a time column has a last time");
    try {
      Timeline timeline(model, TimelineOptions{}, "fuzz.csv");
      timeline.resume(series.position, {"fuzz-state.json", 0, 0, ""});
    } catch (const InputError&) {
    }
    ForwardPass pass(model, ForwardPassOptions{});
    pass.resume(series.pass);
  }
}

const std::vector<FuzzTarget>& fuzz_targets() {
  static const std::vector<FuzzTarget> targets = {
      {"csv_reader", fuzz_csv_reader},
      {"model_file", fuzz_model_file},
      {"time", fuzz_time},
      {"filter_state", fuzz_filter_state},
      {"run_state", fuzz_run_state},
  };
  return targets;
}

}  // namespace statewise::fuzz
