#include "statewise/components.h"

#include <cmath>
#include <numbers>
#include <set>

#include "detail/json_util.h"
#include "detail/model_json.h"
#include "statewise/error.h"

namespace statewise {

namespace {

using detail::JsonContext;
using nlohmann::json;

const std::vector<std::string> kComponentTypes = {
    "level", "trend", "seasonal", "ar", "constant_velocity", "constant_acceleration", "bias", "regression"};

// A number, or a parameter to estimate (its key path names it).
struct Value {
  double number = 0.0;
  bool estimate = false;
  json start;        // the marker's "start", or null
  std::string name;  // key path of the field, for estimated values
};

// One component's contribution, in its own small coordinates.
struct Block {
  std::vector<std::string> states;
  std::vector<std::vector<Value>> A;  // k×k
  std::vector<std::vector<Value>> Q;  // k×k
  std::vector<double> loading;        // k: C entry of each state for every channel the block feeds
  std::vector<bool> channels;         // m: channels fed
  std::vector<std::vector<Value>> B;  // k×p
};

std::string key_of(std::size_t index, const std::string& field) {
  return "components[" + std::to_string(index) + "]" + (field.empty() ? "" : "." + field);
}

Value number_value(double number) { return Value{number, false, nullptr, ""}; }

// A numeric field or an "estimate" marker: "estimate" or {"estimate": true, "start": x}.
Value read_value(const JsonContext& context, const json& value, const std::string& key, bool variance) {
  if (detail::is_estimate_marker(value)) {
    Value result;
    result.estimate = true;
    result.number = 1.0;  // for a marker, the "times" factor of the entry it becomes
    result.name = key;
    if (value.is_object()) {
      detail::reject_unknown_keys(context, value, key, {"estimate", "start"});
      if (!(value["estimate"].is_boolean() && value["estimate"].get<bool>()))
        context.fail(key + ".estimate", "expected true, got " + detail::describe(value["estimate"]));
      if (value.contains("start")) {
        const double start = detail::parse_number(context, value["start"], key + ".start");
        if (variance && !(start > 0.0)) context.fail(key + ".start", "expected a positive starting variance");
        result.start = start;
      }
    }
    return result;
  }
  if (!value.is_number())
    context.fail(key, "expected a number or \"estimate\", got " + detail::describe(value));
  const double number = detail::parse_number(context, value, key);
  if (variance && number < 0.0) context.fail(key, "expected a variance (zero or more), got " + value.dump());
  return number_value(number);
}

Value required_value(const JsonContext& context, const json& component, std::size_t index,
                     const std::string& field, bool variance) {
  if (!component.contains(field))
    context.fail(key_of(index, field), std::string("missing; expected a ") +
                                           (variance ? "variance" : "number") + " or \"estimate\"");
  return read_value(context, component[field], key_of(index, field), variance);
}

double optional_number(const JsonContext& context, const json& component, std::size_t index,
                       const std::string& field, double fallback) {
  if (!component.contains(field)) return fallback;
  return detail::parse_number(context, component[field], key_of(index, field));
}

std::string optional_text(const JsonContext& context, const json& component, std::size_t index,
                          const std::string& field, const std::string& fallback,
                          const std::vector<std::string>& allowed) {
  if (!component.contains(field)) return fallback;
  const json& value = component[field];
  if (!value.is_string()) context.fail(key_of(index, field), "expected text, got " + detail::describe(value));
  const std::string text = value.get<std::string>();
  for (const auto& option : allowed)
    if (text == option) return text;
  std::string expected;
  for (const auto& option : allowed) expected += (expected.empty() ? "\"" : " or \"") + option + "\"";
  context.fail(key_of(index, field),
               "expected " + expected + ", got \"" + text + "\"" + did_you_mean(text, allowed));
}

int positive_integer(const JsonContext& context, const json& value, const std::string& key, int minimum) {
  if (!value.is_number_integer() || value.get<long long>() < minimum || value.get<long long>() > 1000)
    context.fail(key, "expected a whole number from " + std::to_string(minimum) + " to 1000, got " +
                          detail::describe(value));
  return static_cast<int>(value.get<long long>());
}

std::vector<std::vector<Value>> zeros(std::size_t rows, std::size_t cols) {
  return std::vector<std::vector<Value>>(rows, std::vector<Value>(cols, number_value(0.0)));
}

// Q = variance × shape (shape fixed, variance a number or a parameter).
void scale_into(std::vector<std::vector<Value>>& Q, const std::vector<std::vector<double>>& shape,
                const Value& variance, std::size_t offset) {
  for (std::size_t i = 0; i < shape.size(); ++i)
    for (std::size_t j = 0; j < shape.size(); ++j) {
      if (shape[i][j] == 0.0) continue;
      Value entry = variance;
      if (variance.estimate) {
        entry.number = shape[i][j];  // the "times" factor
      } else {
        entry.number = variance.number * shape[i][j];
      }
      Q[offset + i][offset + j] = entry;
    }
}

std::vector<std::string> part_names(const std::string& prefix, const std::vector<std::string>& parts) {
  std::vector<std::string> names;
  for (const auto& part : parts) names.push_back(prefix.empty() ? part : prefix + "_" + part);
  return names;
}

// The channels a component feeds: "channels" (a list of observation names), default all.
std::vector<bool> fed_channels(const JsonContext& context, const json& component, std::size_t index,
                               const std::vector<std::string>& observations) {
  std::vector<bool> fed(observations.size(), component.contains("channels") ? false : true);
  if (!component.contains("channels")) return fed;
  const json& list = component["channels"];
  const std::string key = key_of(index, "channels");
  if (!list.is_array() || list.empty())
    context.fail(key, "expected a list of observed channel names, got " + detail::describe(list));
  for (std::size_t i = 0; i < list.size(); ++i) {
    const std::string item_key = key + "[" + std::to_string(i) + "]";
    if (!list[i].is_string())
      context.fail(item_key, "expected a channel name, got " + detail::describe(list[i]));
    const std::string name = list[i].get<std::string>();
    bool found = false;
    for (std::size_t c = 0; c < observations.size(); ++c)
      if (observations[c] == name) {
        fed[c] = true;
        found = true;
      }
    if (!found)
      context.fail(item_key,
                   "\"" + name + "\" is not one of the observations" + did_you_mean(name, observations));
  }
  return fed;
}

std::vector<std::string> read_names(const JsonContext& context, const json& root, const std::string& key) {
  std::vector<std::string> names;
  if (!root.contains(key)) return names;
  if (!root[key].is_array())
    context.fail(key, "expected a list of names, got " + detail::describe(root[key]));
  for (const auto& item : root[key])
    if (item.is_string()) names.push_back(item.get<std::string>());
  return names;
}

// Reads "coefficients": a list of numbers or markers, or "estimate" for all of them (then "order"
// gives their number). Records where estimated ones stand in the user's file.
std::vector<Value> read_coefficients(const JsonContext& context, const json& component, std::size_t index,
                                     std::size_t expected_count, bool count_known,
                                     std::vector<detail::ComponentParameterOrigin>& origins) {
  const std::string key = key_of(index, "coefficients");
  if (!component.contains("coefficients"))
    context.fail(key, "missing; expected a list of numbers or \"estimate\"");
  const json& value = component["coefficients"];
  std::vector<Value> coefficients;
  detail::ComponentParameterOrigin origin;
  origin.pointer = "/components/" + std::to_string(index) + "/coefficients";
  origin.is_list = true;
  if (detail::is_estimate_marker(value)) {
    if (!count_known)
      context.fail(key, "is \"estimate\", so \"order\" must say how many coefficients there are");
    for (std::size_t i = 0; i < expected_count; ++i) {
      Value v = read_value(context, value, key + "[" + std::to_string(i) + "]", false);
      origin.parameters.push_back(v.name);
      coefficients.push_back(v);
    }
    origins.push_back(origin);
    return coefficients;
  }
  if (!value.is_array() || value.empty())
    context.fail(key, "expected a list of numbers or \"estimate\", got " + detail::describe(value));
  if (count_known && value.size() != expected_count)
    context.fail(key, "expected " + std::to_string(expected_count) + " coefficients, got " +
                          std::to_string(value.size()));
  for (std::size_t i = 0; i < value.size(); ++i) {
    const std::string item_key = key + "[" + std::to_string(i) + "]";
    Value v = read_value(context, value[i], item_key, false);
    if (v.estimate) origins.push_back({origin.pointer + "/" + std::to_string(i), {v.name}, false});
    coefficients.push_back(v);
  }
  return coefficients;
}

void note_origin(const Value& value, const std::string& pointer,
                 std::vector<detail::ComponentParameterOrigin>& origins) {
  if (value.estimate) origins.push_back({pointer, {value.name}, false});
}

Block expand_one(const JsonContext& context, const json& component, std::size_t index,
                 const std::vector<std::string>& observations, const std::vector<std::string>& inputs,
                 std::vector<detail::ComponentParameterOrigin>& origins) {
  const std::string key = key_of(index, "");
  if (!component.is_object())
    context.fail(key, "expected an object such as {\"type\": \"level\", \"variance\": \"estimate\"}, got " +
                          detail::describe(component));
  if (!component.contains("type") || !component["type"].is_string())
    context.fail(key_of(index, "type"),
                 "missing; expected one of level, trend, seasonal, ar, constant_velocity, "
                 "constant_acceleration, bias, regression");
  const std::string type = component["type"].get<std::string>();
  const std::string pointer = "/components/" + std::to_string(index) + "/";
  std::string name;
  if (component.contains("name")) {
    if (!component["name"].is_string() || component["name"].get<std::string>().empty())
      context.fail(key_of(index, "name"),
                   "expected a non-empty name, got " + detail::describe(component["name"]));
    name = component["name"].get<std::string>();
  }
  auto field = [&](const std::string& f, bool variance) {
    Value v = required_value(context, component, index, f, variance);
    note_origin(v, pointer + f, origins);
    return v;
  };

  Block block;
  const std::size_t p = inputs.size();
  if (type == "level") {
    detail::reject_unknown_keys(context, component, key, {"type", "name", "channels", "variance"});
    block.states = {name.empty() ? "level" : name};
    block.A = {{number_value(1.0)}};
    block.Q = zeros(1, 1);
    scale_into(block.Q, {{1.0}}, field("variance", true), 0);
    block.loading = {1.0};
  } else if (type == "trend") {
    detail::reject_unknown_keys(context, component, key,
                                {"type", "name", "channels", "level_variance", "slope_variance"});
    // Local linear trend (Durbin and Koopman 2012, section 3.2.1): level += slope, both random walks.
    block.states = part_names(name, {"level", "slope"});
    block.A = {{number_value(1.0), number_value(1.0)}, {number_value(0.0), number_value(1.0)}};
    block.Q = zeros(2, 2);
    scale_into(block.Q, {{1.0, 0.0}, {0.0, 0.0}}, field("level_variance", true), 0);
    scale_into(block.Q, {{0.0, 0.0}, {0.0, 1.0}}, field("slope_variance", true), 0);
    block.loading = {1.0, 0.0};
  } else if (type == "seasonal") {
    detail::reject_unknown_keys(context, component, key,
                                {"type", "name", "channels", "period", "form", "harmonics", "variance"});
    if (!component.contains("period"))
      context.fail(key_of(index, "period"), "missing; expected the number of rows in one season cycle");
    const int period = positive_integer(context, component["period"], key_of(index, "period"), 2);
    const std::string form =
        optional_text(context, component, index, "form", "dummy", {"dummy", "trigonometric"});
    const Value variance = field("variance", true);
    const std::string prefix = name.empty() ? "season" : name;
    if (form == "dummy") {
      if (component.contains("harmonics"))
        context.fail(key_of(index, "harmonics"),
                     "applies to the trigonometric form only; remove it or set \"form\": \"trigonometric\"");
      // Dummy-variable seasonal (Durbin and Koopman 2012, section 3.2.2):
      // gamma_t = -(gamma_{t-1} + ... + gamma_{t-s+1}) + omega_t.
      const std::size_t k = static_cast<std::size_t>(period - 1);
      std::vector<std::string> parts;
      for (std::size_t i = 1; i <= k; ++i) parts.push_back(std::to_string(i));
      block.states = part_names(prefix, parts);
      block.A = zeros(k, k);
      for (std::size_t j = 0; j < k; ++j) block.A[0][j] = number_value(-1.0);
      for (std::size_t i = 1; i < k; ++i) block.A[i][i - 1] = number_value(1.0);
      block.Q = zeros(k, k);
      std::vector<std::vector<double>> shape(k, std::vector<double>(k, 0.0));
      shape[0][0] = 1.0;
      scale_into(block.Q, shape, variance, 0);
      block.loading.assign(k, 0.0);
      block.loading[0] = 1.0;
    } else {
      // Trigonometric seasonal (Durbin and Koopman 2012, section 3.2.2; Harvey 1989, section 2.3.4):
      // harmonic j rotates a (cos, sin) pair by lambda_j = 2 pi j / s; j = s/2 is a single state.
      const int most = period / 2;
      const int harmonics =
          component.contains("harmonics")
              ? positive_integer(context, component["harmonics"], key_of(index, "harmonics"), 1)
              : most;
      if (harmonics > most)
        context.fail(key_of(index, "harmonics"), "a period of " + std::to_string(period) + " has at most " +
                                                     std::to_string(most) + " harmonics, got " +
                                                     std::to_string(harmonics));
      std::vector<std::string> parts;
      std::vector<std::pair<int, bool>> layout;  // (harmonic, is_sine)
      for (int j = 1; j <= harmonics; ++j) {
        parts.push_back("cos" + std::to_string(j));
        layout.emplace_back(j, false);
        if (2 * j != period) {
          parts.push_back("sin" + std::to_string(j));
          layout.emplace_back(j, true);
        }
      }
      const std::size_t k = parts.size();
      block.states = part_names(prefix, parts);
      block.A = zeros(k, k);
      block.loading.assign(k, 0.0);
      for (std::size_t i = 0; i < k; ++i) {
        const double lambda = 2.0 * std::numbers::pi * layout[i].first / period;
        if (!layout[i].second) {
          block.loading[i] = 1.0;
          if (2 * layout[i].first == period) {
            block.A[i][i] = number_value(-1.0);
          } else {
            block.A[i][i] = number_value(std::cos(lambda));
            block.A[i][i + 1] = number_value(std::sin(lambda));
            block.A[i + 1][i] = number_value(-std::sin(lambda));
            block.A[i + 1][i + 1] = number_value(std::cos(lambda));
          }
        }
      }
      block.Q = zeros(k, k);
      std::vector<std::vector<double>> identity(k, std::vector<double>(k, 0.0));
      for (std::size_t i = 0; i < k; ++i) identity[i][i] = 1.0;
      scale_into(block.Q, identity, variance, 0);
    }
  } else if (type == "ar") {
    detail::reject_unknown_keys(context, component, key,
                                {"type", "name", "channels", "order", "coefficients", "variance"});
    // Autoregression of order p in companion form (Durbin and Koopman 2012, section 3.4):
    // state (a_t, a_{t-1}, ..., a_{t-p+1}), a_t = phi_1 a_{t-1} + ... + phi_p a_{t-p} + e_t.
    const bool order_given = component.contains("order");
    const std::size_t order = order_given ? static_cast<std::size_t>(positive_integer(
                                                context, component["order"], key_of(index, "order"), 1))
                                          : 0;
    const std::vector<Value> phi = read_coefficients(context, component, index, order, order_given, origins);
    const std::size_t k = phi.size();
    std::vector<std::string> parts;
    for (std::size_t i = 1; i <= k; ++i) parts.push_back(std::to_string(i));
    block.states = part_names(name.empty() ? "ar" : name, parts);
    block.A = zeros(k, k);
    for (std::size_t j = 0; j < k; ++j) block.A[0][j] = phi[j];
    for (std::size_t i = 1; i < k; ++i) block.A[i][i - 1] = number_value(1.0);
    block.Q = zeros(k, k);
    std::vector<std::vector<double>> shape(k, std::vector<double>(k, 0.0));
    shape[0][0] = 1.0;
    scale_into(block.Q, shape, field("variance", true), 0);
    block.loading.assign(k, 0.0);
    block.loading[0] = 1.0;
  } else if (type == "constant_velocity" || type == "constant_acceleration") {
    detail::reject_unknown_keys(context, component, key,
                                {"type", "name", "channels", "form", "dt", "variance"});
    const double T = optional_number(context, component, index, "dt", 1.0);
    if (!(T > 0.0)) context.fail(key_of(index, "dt"), "expected a positive time between rows");
    const std::string form =
        optional_text(context, component, index, "form", "continuous", {"continuous", "discrete"});
    const Value variance = field("variance", true);
    // Bar-Shalom, Li and Kirubarajan, Estimation with Applications to Tracking and Navigation (2001):
    // continuous white-noise acceleration (6.2.2) / jerk (6.2.3) integrated over T, or a discrete
    // piecewise-constant acceleration (6.3.2) / acceleration increment (6.3.3) per step.
    std::vector<std::vector<double>> a, shape;
    if (type == "constant_velocity") {
      block.states = part_names(name, {"position", "velocity"});
      a = {{1, T}, {0, 1}};
      if (form == "continuous")
        shape = {{T * T * T / 3, T * T / 2}, {T * T / 2, T}};
      else
        shape = {{T * T * T * T / 4, T * T * T / 2}, {T * T * T / 2, T * T}};
    } else {
      block.states = part_names(name, {"position", "velocity", "acceleration"});
      a = {{1, T, T * T / 2}, {0, 1, T}, {0, 0, 1}};
      if (form == "continuous") {
        const double T2 = T * T, T3 = T2 * T, T4 = T3 * T, T5 = T4 * T;
        shape = {{T5 / 20, T4 / 8, T3 / 6}, {T4 / 8, T3 / 3, T2 / 2}, {T3 / 6, T2 / 2, T}};
      } else {
        const double g[3] = {T * T / 2, T, 1.0};
        shape.assign(3, std::vector<double>(3));
        for (int i = 0; i < 3; ++i)
          for (int j = 0; j < 3; ++j)
            shape[static_cast<std::size_t>(i)][static_cast<std::size_t>(j)] = g[i] * g[j];
      }
    }
    const std::size_t k = a.size();
    block.A = zeros(k, k);
    for (std::size_t i = 0; i < k; ++i)
      for (std::size_t j = 0; j < k; ++j) block.A[i][j] = number_value(a[i][j]);
    block.Q = zeros(k, k);
    scale_into(block.Q, shape, variance, 0);
    block.loading.assign(k, 0.0);
    block.loading[0] = 1.0;
  } else if (type == "bias") {
    detail::reject_unknown_keys(context, component, key,
                                {"type", "name", "channel", "variance", "persistence"});
    if (!component.contains("channel") || !component["channel"].is_string())
      context.fail(key_of(index, "channel"),
                   "missing; expected the name of the observed channel the offset is added to");
    const std::string channel = component["channel"].get<std::string>();
    block.channels.assign(observations.size(), false);
    bool found = false;
    for (std::size_t c = 0; c < observations.size(); ++c)
      if (observations[c] == channel) block.channels[c] = found = true;
    if (!found)
      context.fail(key_of(index, "channel"), "\"" + channel + "\" is not one of the observations" +
                                                 did_you_mean(channel, observations));
    block.states = {name.empty() ? "bias_" + channel : name};
    // A drifting offset: b_t = rho b_{t-1} + w_t (a random walk when rho = 1).
    Value persistence = number_value(1.0);
    if (component.contains("persistence")) {
      persistence = read_value(context, component["persistence"], key_of(index, "persistence"), false);
      note_origin(persistence, pointer + "persistence", origins);
    }
    block.A = {{persistence}};
    block.Q = zeros(1, 1);
    scale_into(block.Q, {{1.0}}, field("variance", true), 0);
    block.loading = {1.0};
  } else if (type == "regression") {
    detail::reject_unknown_keys(context, component, key,
                                {"type", "name", "channels", "inputs", "coefficients"});
    // An input effect r_t = beta' u_{t-1}: like every input in statewise it enters through B, so a
    // row sees the inputs logged on the row before (docs/model-format.md).
    std::vector<std::size_t> used;
    if (component.contains("inputs")) {
      const json& list = component["inputs"];
      if (!list.is_array() || list.empty())
        context.fail(key_of(index, "inputs"),
                     "expected a list of input column names, got " + detail::describe(list));
      for (std::size_t i = 0; i < list.size(); ++i) {
        const std::string item_key = key_of(index, "inputs[" + std::to_string(i) + "]");
        if (!list[i].is_string())
          context.fail(item_key, "expected an input name, got " + detail::describe(list[i]));
        const std::string input = list[i].get<std::string>();
        std::size_t found = p;
        for (std::size_t j = 0; j < p; ++j)
          if (inputs[j] == input) found = j;
        if (found == p)
          context.fail(item_key, "\"" + input + "\" is not one of the model's \"inputs\"" +
                                     did_you_mean(input, inputs));
        used.push_back(found);
      }
    } else {
      if (p == 0) context.fail(key_of(index, "inputs"), "the model lists no \"inputs\" to regress on");
      for (std::size_t j = 0; j < p; ++j) used.push_back(j);
    }
    const std::vector<Value> beta = read_coefficients(context, component, index, used.size(), true, origins);
    block.states = {name.empty() ? "regression" : name};
    block.A = zeros(1, 1);
    block.Q = zeros(1, 1);
    block.B = zeros(1, p);
    for (std::size_t j = 0; j < used.size(); ++j) block.B[0][used[j]] = beta[j];
    block.loading = {1.0};
  } else {
    context.fail(key_of(index, "type"),
                 "unknown component \"" + type +
                     "\"; expected one of level, trend, seasonal, ar, constant_velocity, "
                     "constant_acceleration, bias, regression" +
                     did_you_mean(type, kComponentTypes));
  }
  if (block.channels.empty()) block.channels = fed_channels(context, component, index, observations);
  if (block.B.empty()) block.B = zeros(block.states.size(), p);
  return block;
}

json value_to_json(const Value& value) {
  if (!value.estimate) return value.number;
  json marker = {{"estimate", true}, {"parameter", value.name}};
  if (value.number != 1.0) marker["times"] = value.number;
  if (!value.start.is_null()) marker["start"] = value.start;
  return marker;
}

}  // namespace

namespace detail {

ExpandedComponents expand_components(const JsonContext& context, const json& root) {
  const json& list = root["components"];
  if (!list.is_array() || list.empty())
    context.fail("components",
                 "expected a list of building blocks such as [{\"type\": \"level\", \"variance\": "
                 "\"estimate\"}], got " +
                     describe(list));
  for (const char* key : {"states", "A", "B", "C", "Q"})
    if (root.contains(key))
      context.fail(key, std::string("given together with \"components\", which build ") +
                            (std::string(key) == "B" ? "B (use a \"regression\" component for input effects)"
                                                     : "the states, A, C and Q") +
                            "; give one or the other");
  if (!root.contains("observations"))
    context.fail("observations", "missing; expected the list of measured CSV columns");
  const std::vector<std::string> observations = read_names(context, root, "observations");
  const std::vector<std::string> inputs = read_names(context, root, "inputs");

  ExpandedComponents result;
  std::vector<Block> blocks;
  std::vector<std::string> states;
  std::set<std::string> seen;
  for (std::size_t index = 0; index < list.size(); ++index) {
    blocks.push_back(expand_one(context, list[index], index, observations, inputs, result.origins));
    for (const auto& state : blocks.back().states) {
      if (!seen.insert(state).second)
        context.fail(key_of(index, ""), "its state \"" + state +
                                            "\" has the name of a state of an earlier component; give this "
                                            "component a different \"name\"");
      states.push_back(state);
    }
  }
  const std::size_t n = states.size(), m = observations.size(), p = inputs.size();
  std::vector<std::vector<Value>> A = zeros(n, n), Q = zeros(n, n), B = zeros(n, p);
  std::vector<std::vector<double>> C(m, std::vector<double>(n, 0.0));
  std::size_t offset = 0;
  for (const Block& block : blocks) {
    const std::size_t k = block.states.size();
    for (std::size_t i = 0; i < k; ++i) {
      for (std::size_t j = 0; j < k; ++j) {
        A[offset + i][offset + j] = block.A[i][j];
        Q[offset + i][offset + j] = block.Q[i][j];
      }
      for (std::size_t j = 0; j < p; ++j) B[offset + i][j] = block.B[i][j];
      for (std::size_t c = 0; c < m; ++c)
        if (block.channels[c]) C[c][offset + i] = block.loading[i];
    }
    offset += k;
  }
  auto to_json = [](const std::vector<std::vector<Value>>& matrix) {
    json rows = json::array();
    for (const auto& row : matrix) {
      json out = json::array();
      for (const auto& value : row) out.push_back(value_to_json(value));
      rows.push_back(out);
    }
    return rows;
  };
  result.root = root;
  result.root.erase("components");
  result.root["states"] = states;
  result.root["A"] = to_json(A);
  result.root["C"] = C;
  result.root["Q"] = to_json(Q);
  if (p > 0) result.root["B"] = to_json(B);
  // States built from components have no prior unless the file gives one: start them diffuse
  // (Durbin and Koopman 2012, section 5.1).
  if (!root.contains("initial")) result.root["initial"] = json{{"diffuse", true}};
  return result;
}

}  // namespace detail

std::string expand_model_text(std::string_view json_text, const std::string& file_name) {
  json root = detail::parse_json_document(json_text, file_name);
  const JsonContext context{file_name};
  if (!root.is_object())
    context.fail("", "expected a JSON object with the model's keys, got " + detail::describe(root));
  if (root.contains("components")) root = detail::expand_components(context, root).root;
  // The usual key order; keys this version does not know (added by newer formats) follow.
  detail::OrderedJson out = detail::OrderedJson::object();
  for (const char* key : {"version", "description", "states", "observations", "inputs", "time", "A", "B", "C",
                          "Q", "R", "initial"})
    if (root.contains(key)) out[key] = detail::OrderedJson::parse(root[key].dump());
  for (auto it = root.begin(); it != root.end(); ++it)
    if (!out.contains(it.key())) out[it.key()] = detail::OrderedJson::parse(it.value().dump());
  return detail::dump_json_pretty(out);
}

}  // namespace statewise
