#include "statewise/estimation_spec.h"

#include <fstream>
#include <map>
#include <set>
#include <sstream>
#include <stdexcept>

#include "detail/json_util.h"
#include "detail/model_json.h"
#include "statewise/error.h"

namespace statewise {

namespace {

using detail::JsonContext;
using nlohmann::json;

double entry_value(const StateSpaceModel& model, ModelMatrix matrix, Eigen::Index row, Eigen::Index column) {
  if (matrix == ModelMatrix::initial_mean) return model.initial_mean(row);
  return matrix_of(model, matrix)(row, column);
}

double& entry_of(StateSpaceModel& model, ModelMatrix matrix, Eigen::Index row, Eigen::Index column) {
  if (matrix == ModelMatrix::initial_mean) return model.initial_mean(row);
  return matrix_of(model, matrix)(row, column);
}

bool is_covariance(ModelMatrix matrix) { return matrix == ModelMatrix::Q || matrix == ModelMatrix::R; }

std::string index_key(const std::string& key, Eigen::Index i) { return key + "[" + std::to_string(i) + "]"; }

// A marker found at one entry.
struct EntryMarker {
  Eigen::Index row = 0, column = 0;
  std::string key, pointer;
  std::string link;  // "parameter" name, empty when none
  double times = 1.0;
  std::optional<double> start;
};

EntryMarker read_entry_marker(const JsonContext& context, const json& value, const std::string& key,
                              const std::string& pointer, Eigen::Index row, Eigen::Index column) {
  EntryMarker marker;
  marker.row = row;
  marker.column = column;
  marker.key = key;
  marker.pointer = pointer;
  if (value.is_string()) return marker;
  detail::reject_unknown_keys(context, value, key, {"estimate", "start", "parameter", "times"});
  if (!(value["estimate"].is_boolean() && value["estimate"].get<bool>()))
    context.fail(key + ".estimate",
                 "expected true for one entry, got " + detail::describe(value["estimate"]));
  if (value.contains("start")) marker.start = detail::parse_number(context, value["start"], key + ".start");
  if (value.contains("times")) marker.times = detail::parse_number(context, value["times"], key + ".times");
  if (value.contains("parameter")) {
    if (!value["parameter"].is_string() || value["parameter"].get<std::string>().empty())
      context.fail(key + ".parameter",
                   "expected a parameter name, got " + detail::describe(value["parameter"]));
    marker.link = value["parameter"].get<std::string>();
  }
  return marker;
}

class TemplateBuilder {
 public:
  TemplateBuilder(const JsonContext& context, ModelTemplate& result,
                  const std::set<std::string>& component_parameters)
      : context_(context), result_(result), component_parameters_(component_parameters) {}

  // Replaces markers in root[key] (a rows×cols matrix) by placeholders and records the parameters.
  void process(json& value, const std::string& key, const std::string& pointer, ModelMatrix matrix,
               Eigen::Index rows, Eigen::Index cols) {
    const bool covariance = is_covariance(matrix);
    const bool vector = matrix == ModelMatrix::initial_mean;
    if (is_whole_marker(value)) {
      whole(value, key, pointer, matrix, rows, cols);
      return;
    }
    std::vector<EntryMarker> markers;
    auto visit = [&](json& entry, const std::string& entry_key, const std::string& entry_pointer,
                     Eigen::Index i, Eigen::Index j) {
      if (!detail::is_estimate_marker(entry)) return;
      markers.push_back(read_entry_marker(context_, entry, entry_key, entry_pointer, i, j));
      entry = 0.0;  // placeholder, set below
    };
    if (value.is_array() && (vector || (covariance && !value.empty() && !value[0].is_array()))) {
      for (std::size_t i = 0; i < value.size(); ++i) {
        const auto index = static_cast<Eigen::Index>(i);
        visit(value[i], index_key(key, index), pointer + "/" + std::to_string(i), index, vector ? 0 : index);
      }
    } else if (detail::is_estimate_marker(value)) {
      visit(value, key, pointer, 0, 0);  // a 1×1 matrix written as one linked entry
    } else if (value.is_array()) {
      for (std::size_t i = 0; i < value.size(); ++i) {
        if (!value[i].is_array()) continue;  // the matrix reader reports it
        for (std::size_t j = 0; j < value[i].size(); ++j)
          visit(value[i][j],
                index_key(index_key(key, static_cast<Eigen::Index>(i)), static_cast<Eigen::Index>(j)),
                pointer + "/" + std::to_string(i) + "/" + std::to_string(j), static_cast<Eigen::Index>(i),
                static_cast<Eigen::Index>(j));
      }
    }
    if (markers.empty()) return;
    group(markers, value, key, matrix);
  }

 private:
  bool is_whole_marker(const json& value) const {
    if (value.is_string()) return value.get_ref<const std::string&>() == "estimate";
    return value.is_object() && value.contains("estimate") && !value.contains("parameter") &&
           !value.contains("times");
  }

  int add_parameter(const std::string& name, ParameterKind kind, ModelMatrix matrix,
                    std::optional<double> start) {
    result_.spec.parameters.push_back(FreeParameter{name, kind, matrix, start});
    return static_cast<int>(result_.spec.parameters.size()) - 1;
  }

  static double placeholder(ParameterKind kind, ModelMatrix matrix, const std::optional<double>& start) {
    if (start) return *start;
    if (kind == ParameterKind::variance) return 1.0;
    return matrix == ModelMatrix::C ? 1.0 : 0.0;
  }

  void whole(json& value, const std::string& key, const std::string& pointer, ModelMatrix matrix,
             Eigen::Index rows, Eigen::Index cols) {
    std::string structure = "full";
    json start = nullptr;
    if (value.is_object()) {
      detail::reject_unknown_keys(context_, value, key, {"estimate", "start"});
      const json& kind = value["estimate"];
      if (kind.is_boolean() && kind.get<bool>()) {
        structure = "full";
      } else if (kind.is_string() && (kind == "full" || kind == "diagonal" || kind == "scalar")) {
        structure = kind.get<std::string>();
      } else {
        context_.fail(key + ".estimate",
                      "expected \"full\", \"diagonal\", \"scalar\" or true, got " + detail::describe(kind));
      }
      if (value.contains("start")) start = value["start"];
    }
    const bool covariance = is_covariance(matrix);
    if (!covariance && structure != "full")
      context_.fail(key + ".estimate", "\"" + structure +
                                           "\" applies to the covariances Q and R only; write "
                                           "\"estimate\" to estimate every entry of " +
                                           key);
    FittedValuePlace place;
    place.pointer = pointer;
    place.form = FittedValuePlace::Form::whole_matrix;
    place.matrix = matrix;
    const std::size_t first = result_.spec.parameters.size();
    Eigen::MatrixXd numbers = Eigen::MatrixXd::Zero(rows, cols);
    if (covariance && rows == 1) structure = "diagonal";  // a plain variance
    if (covariance && structure == "full") {
      FullCovarianceBlock block;
      block.matrix = matrix;
      block.size = rows;
      if (!start.is_null())
        block.start =
            detail::parse_matrix(context_, start, key + ".start", rows, rows, "a starting covariance");
      numbers = block.start ? *block.start : Eigen::MatrixXd::Identity(rows, rows);
      for (Eigen::Index i = 0; i < rows; ++i)
        for (Eigen::Index j = 0; j <= i; ++j)
          block.parameters.push_back(add_parameter(index_key(index_key(key, i), j),
                                                   ParameterKind::full_covariance, matrix, std::nullopt));
      result_.spec.full_blocks.push_back(block);
      place.layout = "rows";
    } else if (covariance) {
      Eigen::VectorXd starts = Eigen::VectorXd::Constant(rows, std::nan(""));
      if (!start.is_null()) {
        if (start.is_number())
          starts.setConstant(detail::parse_number(context_, start, key + ".start"));
        else
          starts =
              detail::parse_vector(context_, start, key + ".start", rows, "one starting variance per row");
        for (Eigen::Index i = 0; i < rows; ++i)
          if (!(starts(i) > 0.0)) context_.fail(key + ".start", "expected positive starting variances");
      }
      auto start_of = [&](Eigen::Index i) {
        return std::isnan(starts(i)) ? std::optional<double>() : std::optional<double>(starts(i));
      };
      if (structure == "scalar") {
        const int parameter = add_parameter(key, ParameterKind::variance, matrix, start_of(0));
        for (Eigen::Index i = 0; i < rows; ++i)
          result_.spec.entries.push_back({parameter, matrix, i, i, 1.0});
        numbers.diagonal().setConstant(placeholder(ParameterKind::variance, matrix, start_of(0)));
      } else {
        for (Eigen::Index i = 0; i < rows; ++i) {
          const int parameter = add_parameter(rows == 1 ? key : index_key(key, i), ParameterKind::variance,
                                              matrix, start_of(i));
          result_.spec.entries.push_back({parameter, matrix, i, i, 1.0});
          numbers(i, i) = placeholder(ParameterKind::variance, matrix, start_of(i));
        }
      }
      place.layout = rows == 1 ? "number" : "diagonal";
    } else {
      const bool vector = matrix == ModelMatrix::initial_mean;
      Eigen::MatrixXd starts;
      if (!start.is_null())
        starts = vector
                     ? Eigen::MatrixXd(
                           detail::parse_vector(context_, start, key + ".start", rows, "one value per state"))
                     : detail::parse_matrix(context_, start, key + ".start", rows, cols, "starting values");
      for (Eigen::Index i = 0; i < rows; ++i)
        for (Eigen::Index j = 0; j < cols; ++j) {
          const std::optional<double> s =
              starts.size() > 0 ? std::optional<double>(starts(i, j)) : std::nullopt;
          const int parameter = add_parameter(vector ? index_key(key, i) : index_key(index_key(key, i), j),
                                              ParameterKind::coefficient, matrix, s);
          result_.spec.entries.push_back({parameter, matrix, i, j, 1.0});
          numbers(i, j) = placeholder(ParameterKind::coefficient, matrix, s);
        }
      place.layout = vector ? "vector" : "rows";
    }
    for (std::size_t p = first; p < result_.spec.parameters.size(); ++p)
      place.parameters.push_back(static_cast<int>(p));
    result_.places.push_back(place);
    if (matrix == ModelMatrix::initial_mean) {
      value = detail::vector_to_json(numbers.col(0));
    } else {
      value = json::parse(detail::matrix_to_json(numbers).dump());
    }
  }

  void group(const std::vector<EntryMarker>& markers, json& value, const std::string& key,
             ModelMatrix matrix) {
    const bool covariance = is_covariance(matrix);
    std::map<std::string, int> local;  // parameter name → index
    for (const EntryMarker& marker : markers) {
      std::string name = marker.link;
      if (name.empty()) {
        name = marker.key;
        if (covariance && marker.row != marker.column) {
          // An unnamed covariance off the diagonal: its mirror entry must be marked too; the pair is one
          // parameter.
          bool mirrored = false;
          for (const auto& other : markers)
            mirrored =
                mirrored || (other.link.empty() && other.row == marker.column && other.column == marker.row);
          if (!mirrored)
            context_.fail(marker.key, "is marked \"estimate\" but " +
                                          index_key(index_key(key, marker.column), marker.row) +
                                          " is not; a covariance matrix is symmetric, so mark both");
          name = index_key(index_key(key, std::max(marker.row, marker.column)),
                           std::min(marker.row, marker.column));
        }
      }
      auto found = local.find(name);
      int parameter;
      if (found == local.end()) {
        auto global = linked_.find(name);
        if (global != linked_.end() && !marker.link.empty())
          context_.fail(marker.key + ".parameter", "the parameter \"" + name + "\" is also used in " +
                                                       global->second +
                                                       "; a parameter may appear in one matrix only");
        if (!marker.link.empty()) linked_[name] = key;
        parameter = add_parameter(name, ParameterKind::coefficient, matrix, marker.start);
        local[name] = parameter;
      } else {
        parameter = found->second;
        if (marker.start && !result_.spec.parameters[static_cast<std::size_t>(parameter)].start)
          result_.spec.parameters[static_cast<std::size_t>(parameter)].start = marker.start;
      }
      result_.spec.entries.push_back({parameter, matrix, marker.row, marker.column, marker.times});
      // Entries a component made are written back at the component's field instead.
      if (!component_parameters_.count(name)) {
        FittedValuePlace place;
        place.pointer = marker.pointer;
        place.form = FittedValuePlace::Form::entry;
        place.parameters = {parameter};
        place.times = marker.times;
        place.matrix = matrix;
        result_.places.push_back(place);
      }
    }
    // A covariance parameter with an entry on the diagonal is a variance (kept positive); one only
    // off the diagonal is a covariance (any sign).
    for (const auto& [name, parameter] : local) {
      FreeParameter& free = result_.spec.parameters[static_cast<std::size_t>(parameter)];
      if (!covariance) continue;
      for (const auto& entry : result_.spec.entries)
        if (entry.parameter == parameter && entry.row == entry.column) {
          if (!(entry.times > 0.0))
            context_.fail(name, "a variance parameter needs a positive \"times\" on the diagonal");
          free.kind = ParameterKind::variance;
        }
      if (free.kind == ParameterKind::variance && free.start && !(*free.start > 0.0))
        context_.fail(name, "expected a positive starting variance, got " + std::to_string(*free.start));
    }
    // Placeholders: times × start (or the default).
    for (const auto& entry : result_.spec.entries) {
      if (entry.matrix != matrix) continue;
      const FreeParameter& free = result_.spec.parameters[static_cast<std::size_t>(entry.parameter)];
      const double number = entry.times * placeholder(free.kind, matrix, free.start);
      json* target = &value;
      if (value.is_array()) {
        const bool flat = !value.empty() && !value[0].is_array();
        target = flat ? &value[static_cast<std::size_t>(entry.row)]
                      : &value[static_cast<std::size_t>(entry.row)][static_cast<std::size_t>(entry.column)];
      }
      *target = number;
    }
  }

  const JsonContext& context_;
  ModelTemplate& result_;
  const std::set<std::string>& component_parameters_;
  std::map<std::string, std::string> linked_;  // "parameter" name → the matrix key that uses it
};

}  // namespace

Eigen::MatrixXd& matrix_of(StateSpaceModel& model, ModelMatrix matrix) {
  switch (matrix) {
    case ModelMatrix::A:
      return model.A;
    case ModelMatrix::B:
      return model.B;
    case ModelMatrix::C:
      return model.C;
    case ModelMatrix::Q:
      return model.Q;
    case ModelMatrix::R:
      return model.R;
    case ModelMatrix::initial_mean:
      break;
  }
  throw std::logic_error("matrix_of: the initial mean is a vector, not one of the model's matrices");
}

const Eigen::MatrixXd& matrix_of(const StateSpaceModel& model, ModelMatrix matrix) {
  return matrix_of(const_cast<StateSpaceModel&>(model), matrix);  // the same selection, read-only
}

const char* matrix_key(ModelMatrix matrix) {
  switch (matrix) {
    case ModelMatrix::A:
      return "A";
    case ModelMatrix::B:
      return "B";
    case ModelMatrix::C:
      return "C";
    case ModelMatrix::Q:
      return "Q";
    case ModelMatrix::R:
      return "R";
    case ModelMatrix::initial_mean:
      return "initial.mean";
  }
  return "";
}

void EstimationSpec::apply(const Eigen::VectorXd& values, StateSpaceModel& model) const {
  for (const auto& entry : entries) {
    const double value = entry.times * values(entry.parameter);
    entry_of(model, entry.matrix, entry.row, entry.column) = value;
  }
  for (const auto& block : full_blocks) {
    Eigen::MatrixXd& target = matrix_of(model, block.matrix);
    std::size_t k = 0;
    for (Eigen::Index i = 0; i < block.size; ++i)
      for (Eigen::Index j = 0; j <= i; ++j) {
        const double value = values(block.parameters[k++]);
        target(i, j) = value;
        target(j, i) = value;
      }
  }
}

Eigen::VectorXd EstimationSpec::values(const StateSpaceModel& model) const {
  Eigen::VectorXd result = Eigen::VectorXd::Zero(static_cast<Eigen::Index>(parameters.size()));
  for (const auto& entry : entries)
    result(entry.parameter) = entry_value(model, entry.matrix, entry.row, entry.column) / entry.times;
  for (const auto& block : full_blocks) {
    const Eigen::MatrixXd& source = matrix_of(model, block.matrix);
    std::size_t k = 0;
    for (Eigen::Index i = 0; i < block.size; ++i)
      for (Eigen::Index j = 0; j <= i; ++j) result(block.parameters[k++]) = source(i, j);
  }
  return result;
}

ModelTemplate parse_model_template(std::string_view json_text, const std::string& file_name) {
  ModelTemplate result;
  result.file_name = file_name;
  result.source_text = std::string(json_text);
  json root = detail::parse_json_document(json_text, file_name);
  const JsonContext context{file_name};
  if (!root.is_object())
    context.fail("", "expected a JSON object with the model's keys, got " + detail::describe(root));
  std::set<std::string> component_parameters;
  std::vector<detail::ComponentParameterOrigin> origins;
  if (root.contains("components")) {
    detail::ExpandedComponents expanded = detail::expand_components(context, root);
    root = std::move(expanded.root);
    origins = std::move(expanded.origins);
    for (const auto& origin : origins)
      for (const auto& name : origin.parameters) component_parameters.insert(name);
  }
  // Dimensions, as parse_model will check them.
  auto count = [&](const char* key) -> Eigen::Index {
    return root.contains(key) && root[key].is_array() ? static_cast<Eigen::Index>(root[key].size()) : 0;
  };
  const Eigen::Index m = count("observations"), p = count("inputs");
  auto sized = [&](const char* key) {
    return root.contains(key) && (root[key].is_array() || root[key].is_number());
  };
  Eigen::Index n = 0;
  if (root.contains("states"))
    n = count("states");
  else if (sized("A"))
    n = detail::matrix_rows(context, root["A"], "A");
  else if (sized("Q"))
    n = detail::matrix_rows(context, root["Q"], "Q");
  else if (root.contains("A"))
    context.fail("states",
                 "missing; with A and Q marked \"estimate\" as a whole, list the states so that the "
                 "model's size is known");
  // Markers are sized by n and m, so a model without states or channels is refused here, with the
  // messages parse_model would give afterwards.
  if (!root.contains("observations"))
    context.fail("observations", "missing; expected the list of measured CSV columns");
  if (m == 0) context.fail("observations", "expected a list of at least one observed channel");
  if (!root.contains("A")) context.fail("A", "missing; expected the states × states transition matrix");
  if (n == 0) context.fail(root.contains("states") ? "states" : "A", "the model has no states; expected at least one");
  TemplateBuilder builder(context, result, component_parameters);
  const std::pair<const char*, ModelMatrix> matrices[] = {{"A", ModelMatrix::A},
                                                          {"B", ModelMatrix::B},
                                                          {"C", ModelMatrix::C},
                                                          {"Q", ModelMatrix::Q},
                                                          {"R", ModelMatrix::R}};
  for (const auto& [key, matrix] : matrices) {
    if (!root.contains(key)) continue;
    const Eigen::Index rows = matrix == ModelMatrix::C || matrix == ModelMatrix::R ? m : n;
    const Eigen::Index cols = matrix == ModelMatrix::B ? p : matrix == ModelMatrix::C ? n : rows;
    builder.process(root[key], key, std::string("/") + key, matrix, rows, cols);
  }
  if (root.contains("initial") && root["initial"].is_object()) {
    json& initial = root["initial"];
    if (initial.contains("mean"))
      builder.process(initial["mean"], "initial.mean", "/initial/mean", ModelMatrix::initial_mean, n, 1);
    if (initial.contains("covariance")) {
      const json& covariance = initial["covariance"];
      bool marked = detail::is_estimate_marker(covariance);
      if (covariance.is_array())
        for (const auto& row : covariance) {
          marked = marked || detail::is_estimate_marker(row);
          if (row.is_array())
            for (const auto& entry : row) marked = marked || detail::is_estimate_marker(entry);
        }
      if (marked)
        context.fail("initial.covariance",
                     "cannot be estimated from one series; give it, or mark the states "
                     "\"diffuse\" when nothing is known about them");
    }
  }
  for (const auto& origin : origins) {
    FittedValuePlace place;
    place.pointer = origin.pointer;
    place.form =
        origin.is_list ? FittedValuePlace::Form::component_list : FittedValuePlace::Form::component_value;
    for (const auto& name : origin.parameters)
      for (std::size_t i = 0; i < result.spec.parameters.size(); ++i)
        if (result.spec.parameters[i].name == name) place.parameters.push_back(static_cast<int>(i));
    result.places.push_back(place);
  }
  result.model = detail::parse_model_json(std::move(root), file_name);
  for (const auto& entry : result.spec.entries)
    if (entry.matrix == ModelMatrix::initial_mean && result.model.has_diffuse_states() &&
        result.model.diffuse[static_cast<std::size_t>(entry.row)])
      context.fail(index_key("initial.mean", entry.row),
                   "is marked \"estimate\", but the state \"" +
                       result.model.state_names[static_cast<std::size_t>(entry.row)] +
                       "\" is diffuse and has no mean; remove one or the other");
  return result;
}

ModelTemplate load_model_template(const std::string& path) {
  std::ifstream file(path, std::ios::binary);
  if (!file) raise_input_error({path, 0, 0, ""}, "cannot open the model file");
  std::ostringstream text;
  text << file.rdbuf();
  if (file.bad()) raise_input_error({path, 0, 0, ""}, "cannot read the model file");
  return parse_model_template(text.str(), path);
}

std::string write_fitted_model(const ModelTemplate& model_template, const StateSpaceModel& fitted) {
  using detail::OrderedJson;
  OrderedJson root = OrderedJson::parse(model_template.source_text);
  const Eigen::VectorXd values = model_template.spec.values(fitted);
  const StateSpaceModel& readable = fitted;
  for (const auto& place : model_template.places) {
    OrderedJson& target = root[OrderedJson::json_pointer(place.pointer)];
    switch (place.form) {
      case FittedValuePlace::Form::entry:
        target = place.times * values(place.parameters[0]);
        break;
      case FittedValuePlace::Form::component_value:
        target = values(place.parameters[0]);
        break;
      case FittedValuePlace::Form::component_list: {
        OrderedJson list = OrderedJson::array();
        for (const int parameter : place.parameters) list.push_back(values(parameter));
        target = list;
        break;
      }
      case FittedValuePlace::Form::whole_matrix: {
        if (place.matrix == ModelMatrix::initial_mean) {
          target = detail::vector_to_json(readable.initial_mean);
        } else {
          const Eigen::MatrixXd& matrix = matrix_of(readable, place.matrix);
          if (place.layout == "number")
            target = matrix(0, 0);
          else if (place.layout == "diagonal")
            target = detail::vector_to_json(matrix.diagonal());
          else
            target = detail::matrix_to_json(matrix);
        }
        break;
      }
    }
  }
  return detail::dump_json_pretty(root);
}

}  // namespace statewise
