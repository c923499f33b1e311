#include "statewise/model.h"

#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <charconv>
#include <cmath>
#include <set>
#include <sstream>
#include <system_error>

#include <Eigen/Eigenvalues>
#include <nlohmann/json.hpp>

#include "statewise/error.h"
#include "detail/json_util.h"
#include "detail/model_json.h"

namespace statewise {

namespace {

using nlohmann::json;
using detail::JsonContext;

const std::vector<std::string> kTopLevelKeys = {"version", "description", "states", "observations", "inputs",
                                                "A",       "B",           "C",      "Q",            "R",
                                                "initial", "time",        "domain", "step",       "components"};
const std::vector<std::string> kDomainNames = {"discrete", "continuous"};

std::vector<std::string> parse_name_list(const JsonContext& context, const json& value, const std::string& key) {
  if (!value.is_array()) context.fail(key, "expected a list of names, got " + detail::describe(value));
  std::vector<std::string> names;
  std::set<std::string> seen;
  for (std::size_t i = 0; i < value.size(); ++i) {
    const std::string item_key = key + "[" + std::to_string(i) + "]";
    if (!value[i].is_string()) context.fail(item_key, "expected a name (text), got " + detail::describe(value[i]));
    std::string name = value[i].get<std::string>();
    if (name.empty()) context.fail(item_key, "expected a non-empty name");
    if (!seen.insert(name).second) context.fail(item_key, "the name \"" + name + "\" appears twice");
    names.push_back(std::move(name));
  }
  return names;
}

// A covariance may be a matrix, a list of numbers (its diagonal) or, when 1×1, a plain number.
Eigen::MatrixXd parse_covariance(const JsonContext& context, const json& value, const std::string& key,
                                 Eigen::Index size, const std::string& what) {
  if (value.is_array() && !value.empty() && !value[0].is_array()) {
    if (static_cast<Eigen::Index>(value.size()) != size)
      context.fail(key, "expected a " + std::to_string(size) + "×" + std::to_string(size) + " matrix (" +
                            what + ") or a list of its " + std::to_string(size) + " diagonal entries, got " +
                            detail::describe(value));
    const Eigen::VectorXd diagonal = detail::parse_vector(context, value, key, size, what);
    return diagonal.asDiagonal();
  }
  return detail::parse_matrix(context, value, key, size, size, what);
}

// The shortest text that reads back as `value`, for messages that quote the user's numbers.
std::string shortest(double value) {
  char buffer[32];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value);
  return std::string(buffer, result.ptr);
}

std::string entry(Eigen::Index i, Eigen::Index j) {
  return "[" + std::to_string(i) + "][" + std::to_string(j) + "]";
}

void check_covariance(const Eigen::MatrixXd& matrix, const std::string& file_name, const std::string& key) {
  if (matrix.size() == 0) return;
  const double scale = matrix.cwiseAbs().maxCoeff();
  for (Eigen::Index i = 0; i < matrix.rows(); ++i) {
    for (Eigen::Index j = i + 1; j < matrix.cols(); ++j) {
      if (std::abs(matrix(i, j) - matrix(j, i)) > kSymmetryTolerance * scale)
        raise_input_error({file_name, 0, 0, key}, "must be symmetric, but entry " + entry(i, j) + " is " +
                                                      shortest(matrix(i, j)) + " and entry " + entry(j, i) +
                                                      " is " + shortest(matrix(j, i)));
    }
  }
  // A negative variance is the commonest mistake; name it rather than the eigenvalue it causes.
  for (Eigen::Index i = 0; i < matrix.rows(); ++i)
    if (matrix(i, i) < 0)
      raise_input_error({file_name, 0, 0, key}, "must be a covariance, but the variance at " + entry(i, i) +
                                                    " is " + shortest(matrix(i, i)) +
                                                    "; expected a value >= 0");
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> solver(matrix, Eigen::EigenvaluesOnly);
  const Eigen::VectorXd& eigenvalues = solver.eigenvalues();
  const double largest = eigenvalues.cwiseAbs().maxCoeff();
  if (eigenvalues.minCoeff() < -kDefinitenessTolerance * largest) {
    std::ostringstream message;
    message.precision(6);
    message << "must be a covariance (positive semidefinite), but it has the negative eigenvalue "
            << eigenvalues.minCoeff();
    raise_input_error({file_name, 0, 0, key}, message.str());
  }
}

void check_finite(const Eigen::MatrixXd& matrix, const std::string& file_name, const std::string& key) {
  for (Eigen::Index i = 0; i < matrix.rows(); ++i)
    for (Eigen::Index j = 0; j < matrix.cols(); ++j)
      if (!std::isfinite(matrix(i, j)))
        raise_input_error({file_name, 0, 0, key + "[" + std::to_string(i) + "][" + std::to_string(j) + "]"},
                          "expected a finite number, got " + std::to_string(matrix(i, j)));
}

// Shortest text that reads back to the same double.
std::string number_text(double value) {
  char buffer[32];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value);
  return std::string(buffer, result.ptr);
}

std::string shape(Eigen::Index rows, Eigen::Index cols) { return std::to_string(rows) + "×" + std::to_string(cols); }

void check_shape(const Eigen::MatrixXd& matrix, Eigen::Index rows, Eigen::Index cols, const std::string& file_name,
                 const std::string& key, const std::string& why) {
  if (matrix.rows() != rows || matrix.cols() != cols)
    raise_input_error({file_name, 0, 0, key},
                      "expected a " + shape(rows, cols) + " matrix (" + why + "), got " +
                          shape(matrix.rows(), matrix.cols()));
}

}  // namespace

void validate_covariance(const Eigen::MatrixXd& matrix, const std::string& file_name, const std::string& key) {
  if (matrix.rows() != matrix.cols())
    raise_input_error({file_name, 0, 0, key}, "expected a square matrix, got " + shape(matrix.rows(), matrix.cols()));
  check_finite(matrix, file_name, key);
  check_covariance(matrix, file_name, key);
}

void validate_model(const StateSpaceModel& model, const std::string& file_name) {
  const Eigen::Index n = model.A.rows();
  const Eigen::Index m = static_cast<Eigen::Index>(model.observation_names.size());
  const Eigen::Index p = static_cast<Eigen::Index>(model.input_names.size());
  if (n == 0) raise_input_error({file_name, 0, 0, "A"}, "the model has no states; expected at least one");
  if (m == 0) raise_input_error({file_name, 0, 0, "observations"}, "expected at least one observed channel");
  if (static_cast<Eigen::Index>(model.state_names.size()) != n)
    raise_input_error({file_name, 0, 0, "states"}, "lists " + std::to_string(model.state_names.size()) +
                                                        " names but A is " + shape(model.A.rows(), model.A.cols()));
  check_shape(model.A, n, n, file_name, "A", "states × states");
  check_shape(model.B, n, p, file_name, "B", "states × inputs");
  check_shape(model.C, m, n, file_name, "C", "channels × states");
  check_shape(model.Q, n, n, file_name, "Q", "states × states");
  check_shape(model.R, m, m, file_name, "R", "channels × channels");
  check_shape(model.initial_mean, n, 1, file_name, "initial.mean", "one value per state");
  check_shape(model.initial_covariance, n, n, file_name, "initial.covariance", "states × states");
  check_finite(model.A, file_name, "A");
  check_finite(model.B, file_name, "B");
  check_finite(model.C, file_name, "C");
  check_finite(model.Q, file_name, "Q");
  check_finite(model.R, file_name, "R");
  check_finite(model.initial_mean, file_name, "initial.mean");
  check_finite(model.initial_covariance, file_name, "initial.covariance");
  check_covariance(model.Q, file_name, "Q");
  check_covariance(model.R, file_name, "R");
  check_covariance(model.initial_covariance, file_name, "initial.covariance");
  if (!model.diffuse.empty() && static_cast<Eigen::Index>(model.diffuse.size()) != n)
    raise_input_error({file_name, 0, 0, "initial.diffuse"},
                      "expected one flag per state (" + std::to_string(n) + "), got " + std::to_string(model.diffuse.size()));
  for (Eigen::Index i = 0; i < static_cast<Eigen::Index>(model.diffuse.size()); ++i)
    if (model.diffuse[static_cast<std::size_t>(i)] &&
        (model.initial_mean(i) != 0.0 || model.initial_covariance.row(i).any() || model.initial_covariance.col(i).any()))
      raise_input_error({file_name, 0, 0, "initial"},
                        "the diffuse state \"" + model.state_names[static_cast<std::size_t>(i)] +
                            "\" has a prior mean or covariance; a diffuse state has none, so its entries must be zero");
  std::set<std::string> columns;
  for (const auto& name : model.observation_names) columns.insert(name);
  for (std::size_t i = 0; i < model.input_names.size(); ++i)
    if (!columns.insert(model.input_names[i]).second)
      raise_input_error({file_name, 0, 0, "inputs[" + std::to_string(i) + "]"},
                        "the column \"" + model.input_names[i] + "\" is both observed and an input");
  if (!model.time_column.empty() && columns.count(model.time_column))
    raise_input_error({file_name, 0, 0, "time.column"},
                      "the column \"" + model.time_column + "\" is also a channel or an input");
  if (!(model.step >= 0.0) || !std::isfinite(model.step))
    raise_input_error({file_name, 0, 0, "step"},
                      "expected a positive number of seconds, got " + number_text(model.step));
  if (model.domain == TimeDomain::continuous) {
    if (model.step > 0.0)
      raise_input_error({file_name, 0, 0, "step"},
                        "applies to discrete models only; a continuous model is discretized for each row's own "
                        "time gap, so remove \"step\"");
    if (model.time_column.empty())
      raise_input_error({file_name, 0, 0, "time"},
                        "missing; a continuous-time model needs a time column for the gaps between rows, "
                        "e.g. \"time\": {\"column\": \"time\"}");
  } else if (model.step > 0.0 && model.time_column.empty()) {
    raise_input_error({file_name, 0, 0, "step"},
                      "given, but the model has no time column to measure gaps with; add "
                      "\"time\": {\"column\": ...} or remove \"step\"");
  }
}

const char* domain_name(TimeDomain domain) {
  return domain == TimeDomain::continuous ? "continuous" : "discrete";
}

StateSpaceModel parse_model(std::string_view json_text, const std::string& file_name) {
  return detail::parse_model_json(detail::parse_json_document(json_text, file_name), file_name);
}

StateSpaceModel detail::parse_model_json(nlohmann::json root, const std::string& file_name) {
  const JsonContext context{file_name};
  if (!root.is_object())
    context.fail("", "expected a JSON object with the model's keys, got " + detail::describe(root));
  detail::reject_unknown_keys(context, root, "", kTopLevelKeys);
  // Building blocks (docs/model-format.md, "Components") become plain matrices first.
  if (root.contains("components")) root = detail::expand_components(context, root).root;

  if (root.contains("version")) {
    const json& version = root["version"];
    if (!version.is_number_integer() || version.get<long long>() != 1)
      context.fail("version", "this statewise reads model format version 1, got " + version.dump());
  }

  StateSpaceModel model;
  if (!root.contains("observations")) context.fail("observations", "missing; expected the list of measured CSV columns");
  model.observation_names = parse_name_list(context, root["observations"], "observations");
  if (root.contains("inputs")) model.input_names = parse_name_list(context, root["inputs"], "inputs");
  if (root.contains("states")) model.state_names = parse_name_list(context, root["states"], "states");

  if (!root.contains("A")) context.fail("A", "missing; expected the states × states transition matrix");
  const Eigen::Index n = root.contains("states") ? static_cast<Eigen::Index>(model.state_names.size())
                                                 : detail::matrix_rows(context, root["A"], "A");
  if (n == 0) context.fail(root.contains("states") ? "states" : "A", "the model has no states; expected at least one");
  if (model.state_names.empty())
    for (Eigen::Index i = 0; i < n; ++i) model.state_names.push_back("x" + std::to_string(i + 1));
  const auto m = static_cast<Eigen::Index>(model.observation_names.size());
  const auto p = static_cast<Eigen::Index>(model.input_names.size());
  if (m == 0) context.fail("observations", "expected at least one observed channel");

  model.A = detail::parse_matrix(context, root["A"], "A", n, n, "states × states");
  if (!root.contains("C")) context.fail("C", "missing; expected the channels × states observation matrix");
  model.C = detail::parse_matrix(context, root["C"], "C", m, n, "channels × states");
  if (!root.contains("Q")) context.fail("Q", "missing; expected the states × states process noise covariance");
  model.Q = parse_covariance(context, root["Q"], "Q", n, "states × states");
  if (!root.contains("R")) context.fail("R", "missing; expected the channels × channels measurement noise covariance");
  model.R = parse_covariance(context, root["R"], "R", m, "channels × channels");
  if (p > 0) {
    if (!root.contains("B")) context.fail("B", "missing; expected the states × inputs matrix because inputs are given");
    model.B = detail::parse_matrix(context, root["B"], "B", n, p, "states × inputs");
  } else {
    if (root.contains("B")) context.fail("B", "given, but the model lists no inputs; add \"inputs\" or remove B");
    model.B = Eigen::MatrixXd::Zero(n, 0);
  }

  model.initial_mean = Eigen::VectorXd::Zero(n);
  model.initial_covariance = kDefaultInitialVariance * Eigen::MatrixXd::Identity(n, n);
  if (root.contains("initial")) {
    const json& initial = root["initial"];
    if (!initial.is_object())
      context.fail("initial", "expected an object with \"mean\" and \"covariance\", got " + detail::describe(initial));
    detail::reject_unknown_keys(context, initial, "initial", {"mean", "covariance", "diffuse"});
    if (initial.contains("mean"))
      model.initial_mean = detail::parse_vector(context, initial["mean"], "initial.mean", n, "one value per state");
    if (initial.contains("covariance"))
      model.initial_covariance =
          parse_covariance(context, initial["covariance"], "initial.covariance", n, "states × states");
    if (initial.contains("diffuse")) {
      model.diffuse = detail::parse_diffuse_states(context, initial["diffuse"], model.state_names);
      // A diffuse state has no prior: its mean and covariance entries are unused and set to zero.
      for (Eigen::Index i = 0; i < n; ++i)
        if (model.diffuse[static_cast<std::size_t>(i)]) {
          model.initial_mean(i) = 0.0;
          model.initial_covariance.row(i).setZero();
          model.initial_covariance.col(i).setZero();
        }
      if (!model.has_diffuse_states()) model.diffuse.clear();
    }
  }

  if (root.contains("time")) {
    const json& time = root["time"];
    if (!time.is_object()) context.fail("time", "expected an object such as {\"column\": \"time\"}, got " + detail::describe(time));
    detail::reject_unknown_keys(context, time, "time", {"column"});
    if (!time.contains("column") || !time["column"].is_string() || time["column"].get<std::string>().empty())
      context.fail("time.column", "expected the name of the time column");
    model.time_column = time["column"].get<std::string>();
  }

  if (root.contains("domain")) {
    const json& domain = root["domain"];
    if (!domain.is_string())
      context.fail("domain", "expected \"discrete\" or \"continuous\", got " + detail::describe(domain));
    const std::string name = domain.get<std::string>();
    if (name == "continuous") {
      model.domain = TimeDomain::continuous;
    } else if (name != "discrete") {
      context.fail("domain", "expected \"discrete\" or \"continuous\", got " + detail::describe(domain) +
                                 did_you_mean(name, kDomainNames));
    }
  }
  if (root.contains("step")) {
    const json& step = root["step"];
    if (!step.is_number() || !(step.get<double>() > 0.0) || !std::isfinite(step.get<double>()))
      context.fail("step", "expected a positive number of seconds, got " + detail::describe(step));
    model.step = step.get<double>();
  }

  validate_model(model, file_name);
  return model;
}

StateSpaceModel load_model(const std::string& path) {
  // POSIX reads, as in the CSV reader, so that the system's reason ("Is a directory") is reported.
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0)
    raise_input_error({path, 0, 0, ""},
                      "cannot open the model file (" + std::system_category().message(errno) + ")");
  std::string text;
  char chunk[1 << 16];
  for (;;) {
    const ssize_t count = ::read(fd, chunk, sizeof chunk);
    if (count < 0 && errno == EINTR) continue;
    if (count < 0) {
      const int error = errno;
      ::close(fd);
      raise_input_error({path, 0, 0, ""},
                        "cannot read the model file (" + std::system_category().message(error) + ")");
    }
    if (count == 0) break;
    text.append(chunk, static_cast<std::size_t>(count));
  }
  ::close(fd);
  return parse_model(text, path);
}

std::string write_model(const StateSpaceModel& model) {
  detail::OrderedJson root = detail::OrderedJson::object();
  root["version"] = 1;
  root["states"] = model.state_names;
  root["observations"] = model.observation_names;
  if (!model.input_names.empty()) root["inputs"] = model.input_names;
  if (!model.time_column.empty()) root["time"] = detail::OrderedJson{{"column", model.time_column}};
  if (model.domain == TimeDomain::continuous) root["domain"] = domain_name(model.domain);
  if (model.step > 0.0) root["step"] = model.step;
  root["A"] = detail::matrix_to_json(model.A);
  if (model.B.cols() > 0) root["B"] = detail::matrix_to_json(model.B);
  root["C"] = detail::matrix_to_json(model.C);
  root["Q"] = detail::matrix_to_json(model.Q);
  root["R"] = detail::matrix_to_json(model.R);
  root["initial"] = detail::OrderedJson{{"mean", detail::vector_to_json(model.initial_mean)},
                     {"covariance", detail::matrix_to_json(model.initial_covariance)}};
  if (model.has_diffuse_states()) {
    std::vector<std::string> names;
    for (std::size_t i = 0; i < model.diffuse.size(); ++i)
      if (model.diffuse[i]) names.push_back(model.state_names[i]);
    root["initial"]["diffuse"] = names;
  }
  return detail::dump_json_pretty(root);
}

}  // namespace statewise
