#include "statewise/filter_state.h"

#include <cmath>

#include <nlohmann/json.hpp>

#include "detail/json_util.h"
#include "statewise/error.h"

namespace statewise {

namespace {

using nlohmann::json;

std::string quoted_list(const std::vector<std::string>& names) {
  std::string text = "[";
  for (std::size_t i = 0; i < names.size(); ++i) text += (i > 0 ? ", " : "") + json(names[i]).dump();
  return text + "]";
}

std::string joined(const std::vector<std::string>& names) {
  std::string text;
  for (std::size_t i = 0; i < names.size(); ++i) text += (i > 0 ? ", " : "") + names[i];
  return text;
}

void check_vector(const Eigen::VectorXd& vector, std::size_t size, const std::string& what, const std::string& name,
                  const std::string& key) {
  if (static_cast<std::size_t>(vector.size()) != size)
    raise_input_error({name, 0, 0, key}, "expected " + std::to_string(size) + " values (" + what + "), got " +
                                             std::to_string(vector.size()));
  for (Eigen::Index i = 0; i < vector.size(); ++i)
    if (!std::isfinite(vector(i)))
      raise_input_error({name, 0, 0, key + "[" + std::to_string(i) + "]"},
                        "expected a finite number, got " + std::to_string(vector(i)));
}

std::vector<std::string> parse_names(const detail::JsonContext& context, const json& value, const std::string& key) {
  if (!value.is_array()) context.fail(key, "expected a list of names, got " + detail::describe(value));
  std::vector<std::string> names;
  for (std::size_t i = 0; i < value.size(); ++i) {
    if (!value[i].is_string())
      context.fail(key + "[" + std::to_string(i) + "]", "expected a name (text), got " + detail::describe(value[i]));
    names.push_back(value[i].get<std::string>());
  }
  return names;
}

// The names saved in the state must be the model's, in the same order: a state saved for another
// model would otherwise be applied silently to the wrong quantities.
void check_names(const detail::JsonContext& context, const std::vector<std::string>& saved,
                 const std::vector<std::string>& expected, const std::string& key, const std::string& what) {
  if (saved != expected)
    context.fail(key, "the state was saved for the " + what + " " + quoted_list(saved) + ", but the model has " +
                          quoted_list(expected));
}

}  // namespace

void validate_filter_state(const FilterState& state, const StateSpaceModel& model, const std::string& name) {
  const auto n = static_cast<std::size_t>(model.state_count());
  check_vector(state.mean, n, "one per state: " + joined(model.state_names), name, "mean");
  if (static_cast<std::size_t>(state.covariance.rows()) != n || static_cast<std::size_t>(state.covariance.cols()) != n)
    raise_input_error({name, 0, 0, "covariance"}, "expected a " + std::to_string(n) + "×" + std::to_string(n) +
                                                      " matrix (states × states), got " +
                                                      std::to_string(state.covariance.rows()) + "×" +
                                                      std::to_string(state.covariance.cols()));
  validate_covariance(state.covariance, name, "covariance");
  check_vector(state.last_inputs, model.input_names.size(),
               model.input_names.empty() ? std::string("the model has no inputs")
                                         : "one per input: " + joined(model.input_names),
               name, "last_inputs");
}

std::string write_filter_state(const FilterState& state, const StateSpaceModel& model) {
  detail::OrderedJson root = detail::OrderedJson::object();
  root["statewise_filter_state"] = kFilterStateFormatVersion;
  root["states"] = model.state_names;
  root["rows_processed"] = state.rows_processed;
  root["mean"] = detail::vector_to_json(state.mean);
  root["covariance"] = detail::matrix_to_json(state.covariance);
  if (!model.input_names.empty()) {
    root["inputs"] = model.input_names;
    root["last_inputs"] = detail::vector_to_json(state.last_inputs);
  }
  return detail::dump_json_pretty(root);
}

FilterState parse_filter_state(std::string_view json_text, const StateSpaceModel& model, const std::string& file_name) {
  const json root = detail::parse_json_document(json_text, file_name);
  const detail::JsonContext context{file_name};
  if (!root.is_object()) context.fail("", "expected a JSON object (a saved filter state), got " + detail::describe(root));
  if (!root.contains("statewise_filter_state"))
    context.fail("statewise_filter_state", "missing; this is not a filter state written by statewise");
  const json& version = root["statewise_filter_state"];
  if (!version.is_number_integer() || version.get<long long>() != kFilterStateFormatVersion)
    context.fail("statewise_filter_state", "this statewise reads filter state format version " +
                                               std::to_string(kFilterStateFormatVersion) + ", got " + version.dump());
  detail::reject_unknown_keys(context, root, "",
                              {"statewise_filter_state", "states", "rows_processed", "mean", "covariance", "inputs",
                               "last_inputs"});
  for (const char* key : {"states", "rows_processed", "mean", "covariance"})
    if (!root.contains(key)) context.fail(key, "missing");
  check_names(context, parse_names(context, root["states"], "states"), model.state_names, "states", "states");
  const std::vector<std::string> inputs =
      root.contains("inputs") ? parse_names(context, root["inputs"], "inputs") : std::vector<std::string>{};
  check_names(context, inputs, model.input_names, "inputs", "inputs");
  if (!model.input_names.empty() && !root.contains("last_inputs")) context.fail("last_inputs", "missing");
  if (model.input_names.empty() && root.contains("last_inputs"))
    context.fail("last_inputs", "given, but the model has no inputs");

  const json& rows = root["rows_processed"];
  if (!rows.is_number_unsigned())
    context.fail("rows_processed", "expected a whole number of rows (0 or more), got " + detail::describe(rows));

  const Eigen::Index n = model.state_count();
  FilterState state;
  state.rows_processed = rows.get<std::uint64_t>();
  state.mean = detail::parse_vector(context, root["mean"], "mean", n, "one per state");
  state.covariance = detail::parse_matrix(context, root["covariance"], "covariance", n, n, "states × states");
  state.last_inputs = model.input_names.empty()
                          ? Eigen::VectorXd(0)
                          : detail::parse_vector(context, root["last_inputs"], "last_inputs", model.input_count(),
                                                 "one per input");
  validate_filter_state(state, model, file_name);
  return state;
}

}  // namespace statewise
