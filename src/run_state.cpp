#include "statewise/run_state.h"

#include <cstdio>

#include <nlohmann/json.hpp>

#include "detail/json_util.h"
#include "statewise/error.h"

namespace statewise {

namespace {

using nlohmann::json;
using detail::JsonContext;
using detail::OrderedJson;

constexpr const char* kFingerprintPrefix = "fnv1a64:";

OrderedJson time_to_json(const TimePoint& time) {
  OrderedJson value = OrderedJson::object();
  value["seconds"] = time.seconds;
  value["fraction"] = time.fraction;
  return value;
}

OrderedJson series_to_json(const SeriesState& series) {
  OrderedJson value = OrderedJson::object();
  value["log_rows"] = series.log_rows;
  value["rows"] = series.rows;
  if (series.has_time && series.rows > 0) {
    OrderedJson last = time_to_json(series.position.last_time);
    last["text"] = series.position.last_text;
    value["last_time"] = last;
    value["grid_origin"] = time_to_json(series.position.origin);
    value["next_grid"] = series.position.next_grid;
  }
  value["last_inputs"] = series.position.last_inputs;
  const ForwardPassState& pass = series.pass;
  value["numerics"] = numerics_name(pass.numerics);
  value["mean"] = detail::vector_to_json(pass.mean);
  value["covariance"] = detail::matrix_to_json(pass.covariance);
  if (pass.numerics == Numerics::square_root) value["factor"] = detail::matrix_to_json(pass.factor);
  if (pass.diffuse.size() > 0) value["diffuse"] = detail::matrix_to_json(pass.diffuse);
  value["fully_rejected_rows"] = pass.fully_rejected_rows;
  return value;
}

const json& required(const JsonContext& context, const json& object, const std::string& path, const char* key) {
  if (!object.contains(key)) context.fail(path + key, "missing");
  return object[key];
}

std::uint64_t parse_count(const JsonContext& context, const json& value, const std::string& key) {
  if (!value.is_number_unsigned())
    context.fail(key, "expected a whole number (0 or more), got " + detail::describe(value));
  return value.get<std::uint64_t>();
}

TimePoint parse_time_point(const JsonContext& context, const json& value, const std::string& key) {
  if (!value.is_object()) context.fail(key, "expected an object with seconds and fraction, got " + detail::describe(value));
  const json& seconds = required(context, value, key + ".", "seconds");
  if (!seconds.is_number_integer())
    context.fail(key + ".seconds", "expected a whole number of seconds, got " + detail::describe(seconds));
  TimePoint time;
  time.seconds = seconds.get<std::int64_t>();
  time.fraction = detail::parse_number(context, required(context, value, key + ".", "fraction"), key + ".fraction");
  if (!(time.fraction >= 0.0 && time.fraction < 1.0))
    context.fail(key + ".fraction", "expected a fraction of a second in [0, 1), got " + json(time.fraction).dump());
  return time;
}

std::string group_key(const std::string& name) { return "groups[" + json(name).dump() + "]"; }

SeriesState parse_series(const JsonContext& context, const json& value, const std::string& path, Eigen::Index n) {
  if (!value.is_object()) context.fail(path, "expected an object (one series), got " + detail::describe(value));
  detail::reject_unknown_keys(context, value, path,
                              {"log_rows", "rows", "last_time", "grid_origin", "next_grid", "last_inputs", "numerics",
                               "mean", "covariance", "factor", "diffuse", "fully_rejected_rows"});
  const std::string prefix = path + ".";
  SeriesState series;
  series.log_rows = parse_count(context, required(context, value, prefix, "log_rows"), prefix + "log_rows");
  series.rows = parse_count(context, required(context, value, prefix, "rows"), prefix + "rows");
  series.has_time = value.contains("last_time");
  // write_run_state writes no last time for a series with no rows; one given there would not survive
  // writing and reading, and there is no last row to resume after.
  if (series.has_time && series.rows == 0)
    context.fail(prefix + "last_time", "given, but rows is 0 (a series with no rows has no last time)");
  if (series.has_time) {
    const json& last = value["last_time"];
    series.position.last_time = parse_time_point(context, last, prefix + "last_time");
    const json& text = required(context, last, prefix + "last_time.", "text");
    if (!text.is_string()) context.fail(prefix + "last_time.text", "expected the time as text, got " + detail::describe(text));
    series.position.last_text = text.get<std::string>();
    series.position.origin = parse_time_point(context, required(context, value, prefix, "grid_origin"), prefix + "grid_origin");
    const json& grid = required(context, value, prefix, "next_grid");
    if (!grid.is_number_integer()) context.fail(prefix + "next_grid", "expected a whole number, got " + detail::describe(grid));
    series.position.next_grid = grid.get<std::int64_t>();
  }
  const json& inputs = required(context, value, prefix, "last_inputs");
  if (!inputs.is_array()) context.fail(prefix + "last_inputs", "expected a list of numbers, got " + detail::describe(inputs));
  for (std::size_t i = 0; i < inputs.size(); ++i)
    series.position.last_inputs.push_back(
        detail::parse_number(context, inputs[i], prefix + "last_inputs[" + std::to_string(i) + "]"));

  ForwardPassState& pass = series.pass;
  const json& numerics = required(context, value, prefix, "numerics");
  if (numerics == "plain")
    pass.numerics = Numerics::plain;
  else if (numerics == "square-root")
    pass.numerics = Numerics::square_root;
  else
    context.fail(prefix + "numerics", "expected \"plain\" or \"square-root\", got " + detail::describe(numerics));
  pass.mean = detail::parse_vector(context, required(context, value, prefix, "mean"), prefix + "mean", n, "one per state");
  pass.covariance = detail::parse_matrix(context, required(context, value, prefix, "covariance"), prefix + "covariance", n,
                                         n, "states × states");
  validate_covariance(pass.covariance, context.file_name, prefix + "covariance");
  if (pass.numerics == Numerics::square_root)
    pass.factor = detail::parse_matrix(context, required(context, value, prefix, "factor"), prefix + "factor", n, n,
                                       "states × states");
  else if (value.contains("factor"))
    context.fail(prefix + "factor", "given, but the numerics are plain");
  if (value.contains("diffuse")) {
    if (pass.numerics != Numerics::plain) context.fail(prefix + "diffuse", "given, but the numerics are square-root");
    pass.diffuse = detail::parse_matrix(context, value["diffuse"], prefix + "diffuse", n, n, "states × states");
    validate_covariance(pass.diffuse, context.file_name, prefix + "diffuse");
  }
  pass.fully_rejected_rows = static_cast<std::size_t>(parse_count(
      context, required(context, value, prefix, "fully_rejected_rows"), prefix + "fully_rejected_rows"));
  return series;
}

std::string quoted_names(const std::vector<std::string>& names) { return json(names).dump(); }

}  // namespace

std::uint64_t fnv1a_64(std::string_view bytes) {
  std::uint64_t hash = 14695981039346656037ull;
  for (const char byte : bytes) {
    hash ^= static_cast<unsigned char>(byte);
    hash *= 1099511628211ull;
  }
  return hash;
}

std::uint64_t model_fingerprint(const StateSpaceModel& model) { return fnv1a_64(write_model(model)); }

std::string fingerprint_text(std::uint64_t fingerprint) {
  char digits[17];
  std::snprintf(digits, sizeof digits, "%016llx", static_cast<unsigned long long>(fingerprint));
  return kFingerprintPrefix + std::string(digits);
}

std::string write_run_state(const RunState& state) {
  OrderedJson root = OrderedJson::object();
  root["statewise_run_state"] = kRunStateFormatVersion;
  root["model_fingerprint"] = fingerprint_text(state.model_fingerprint);
  root["states"] = state.states;
  root["settings"] = state.settings;
  if (state.output_length) root["output_length"] = *state.output_length;
  OrderedJson groups = OrderedJson::object();
  for (const auto& [name, series] : state.groups) groups[name] = series_to_json(series);
  root["groups"] = groups;
  return detail::dump_json_pretty(root);
}

RunState parse_run_state(std::string_view json_text, const std::string& file_name) {
  const json root = detail::parse_json_document(json_text, file_name);
  const JsonContext context{file_name};
  if (!root.is_object()) context.fail("", "expected a JSON object (a state file), got " + detail::describe(root));
  if (!root.contains("statewise_run_state"))
    context.fail("statewise_run_state", "missing; this is not a state file written by statewise filter --state");
  const json& version = root["statewise_run_state"];
  if (!version.is_number_integer() || version.get<long long>() != kRunStateFormatVersion)
    context.fail("statewise_run_state", "this statewise reads state file format version " +
                                            std::to_string(kRunStateFormatVersion) + ", got " + version.dump());
  detail::reject_unknown_keys(context, root, "",
                              {"statewise_run_state", "model_fingerprint", "states", "settings", "output_length",
                               "groups"});
  RunState state;
  const json& fingerprint = required(context, root, "", "model_fingerprint");
  const std::string prefix = kFingerprintPrefix;
  const std::string text = fingerprint.is_string() ? fingerprint.get<std::string>() : std::string();
  if (text.size() != prefix.size() + 16 || text.compare(0, prefix.size(), prefix) != 0 ||
      text.find_first_not_of("0123456789abcdef", prefix.size()) != std::string::npos)
    context.fail("model_fingerprint", "expected \"fnv1a64:\" and 16 hex digits, got " + detail::describe(fingerprint));
  state.model_fingerprint = std::stoull(text.substr(prefix.size()), nullptr, 16);
  const json& states = required(context, root, "", "states");
  if (!states.is_array()) context.fail("states", "expected a list of names, got " + detail::describe(states));
  for (std::size_t i = 0; i < states.size(); ++i) {
    if (!states[i].is_string())
      context.fail("states[" + std::to_string(i) + "]", "expected a name (text), got " + detail::describe(states[i]));
    state.states.push_back(states[i].get<std::string>());
  }
  const json& settings = required(context, root, "", "settings");
  if (!settings.is_string()) context.fail("settings", "expected text, got " + detail::describe(settings));
  state.settings = settings.get<std::string>();
  if (root.contains("output_length")) state.output_length = parse_count(context, root["output_length"], "output_length");
  const json& groups = required(context, root, "", "groups");
  if (!groups.is_object()) context.fail("groups", "expected an object of series by group name, got " + detail::describe(groups));
  const auto n = static_cast<Eigen::Index>(state.states.size());
  for (const auto& [name, series] : groups.items())
    state.groups.emplace(name, parse_series(context, series, group_key(name), n));
  return state;
}

void check_run_state(const RunState& state, const StateSpaceModel& model, const std::string& model_name,
                     const std::string& settings, const std::string& file_name) {
  const JsonContext context{file_name};
  const std::uint64_t fingerprint = model_fingerprint(model);
  if (state.model_fingerprint != fingerprint || state.states != model.state_names)
    context.fail("model_fingerprint", "the state was saved for another model (" + fingerprint_text(state.model_fingerprint) +
                                          ", states " + quoted_names(state.states) + ") than " + model_name + " (" +
                                          fingerprint_text(fingerprint) + ", states " + quoted_names(model.state_names) +
                                          "); --reset starts again from the model's prior");
  if (state.settings != settings)
    context.fail("settings", "the state was saved with \"" + state.settings + "\", but this run has \"" + settings +
                                 "\"; the estimates would differ from one uninterrupted run (--reset starts again)");
  for (const auto& [name, series] : state.groups) {
    const std::string prefix = group_key(name) + ".";
    if (series.rows > 0 && series.position.last_inputs.size() != static_cast<std::size_t>(model.input_count()))
      context.fail(prefix + "last_inputs", "expected " + std::to_string(model.input_count()) +
                                               " values (one per input of the model), got " +
                                               std::to_string(series.position.last_inputs.size()));
    if (series.has_time == model.time_column.empty() && series.rows > 0)
      context.fail(prefix + "last_time", series.has_time ? "given, but the model has no time column"
                                                          : "missing; the model has a time column");
  }
}

}  // namespace statewise
