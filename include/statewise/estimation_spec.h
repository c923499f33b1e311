#pragma once
/// \file estimation_spec.h
/// Which parameters of a model file are to be estimated (`statewise fit`), read from "estimate"
/// markers in the same JSON (docs/model-format.md, "Estimating parameters"):
///   - a whole Q or R written "estimate": a full symmetric positive semidefinite matrix (a plain
///     variance when 1×1); {"estimate": "diagonal"} or {"estimate": "scalar"} (a multiple of the
///     identity) restrict it; a "start" key gives starting values;
///   - a single entry of A, B, C, Q, R or initial.mean written "estimate", or
///     {"estimate": true, "start": x, "parameter": "name", "times": f}: entries sharing a
///     "parameter" name are one parameter, each entry equal to f times it;
///   - a component's field written "estimate" (statewise/components.h).
/// The model is read with starting values in place of the markers, so the usual checks apply.

#include <Eigen/Core>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "statewise/model.h"

namespace statewise {

/// The model matrices a parameter can sit in.
enum class ModelMatrix { A, B, C, Q, R, initial_mean };

/// The model-file key of a matrix: "A", ..., "initial.mean".
const char* matrix_key(ModelMatrix matrix);

/// The matrix of `model` that `matrix` names (A, B, C, Q or R). ModelMatrix::initial_mean is a vector and
/// raises std::logic_error (a programming error, never a user's).
Eigen::MatrixXd& matrix_of(StateSpaceModel& model, ModelMatrix matrix);
/// Read-only matrix_of().
const Eigen::MatrixXd& matrix_of(const StateSpaceModel& model, ModelMatrix matrix);

/// How a parameter is constrained, which decides how it is optimized.
enum class ParameterKind {
  coefficient,      ///< any real number: entries of A, B, C, the initial mean, a covariance off the diagonal
  variance,         ///< a positive scale of Q or R entries (searched on the log scale; may end at zero)
  full_covariance,  ///< an entry of a whole covariance matrix marked "estimate" (searched through its
                    ///< Cholesky factor)
};

/// One estimated number.
struct FreeParameter {
  std::string name;  ///< where it was marked, as a key path: "R[1][1]", "Q", "components[0].variance"
  ParameterKind kind = ParameterKind::coefficient;
  ModelMatrix matrix = ModelMatrix::Q;
  std::optional<double> start;  ///< the file's "start", else chosen from the data by fit_model
};

/// A matrix entry that follows a parameter: entry = times × value (both (i, j) and (j, i) are
/// listed for an entry off the diagonal of a covariance).
struct ParameterEntry {
  int parameter = 0;
  ModelMatrix matrix = ModelMatrix::Q;
  Eigen::Index row = 0;
  Eigen::Index column = 0;
  double times = 1.0;
};

/// A whole covariance matrix estimated as a full symmetric PSD matrix. Its parameters are the
/// entries (i, j), i >= j, row by row.
struct FullCovarianceBlock {
  ModelMatrix matrix = ModelMatrix::Q;
  Eigen::Index size = 0;
  std::vector<int> parameters;
  std::optional<Eigen::MatrixXd> start;  ///< from "start", else chosen from the data
};

/// The free parameters of a model and how they fill its matrices.
struct EstimationSpec {
  std::vector<FreeParameter> parameters;
  std::vector<ParameterEntry> entries;
  std::vector<FullCovarianceBlock> full_blocks;

  /// Number of free parameters.
  std::size_t size() const { return parameters.size(); }
  /// Writes `values` (one per parameter, natural scale) into the model's matrices.
  void apply(const Eigen::VectorXd& values, StateSpaceModel& model) const;
  /// Reads the parameters' current values from the model.
  Eigen::VectorXd values(const StateSpaceModel& model) const;
};

/// Where a fitted value goes back into the user's file (private to write_fitted_model).
struct FittedValuePlace {
  std::string pointer;  ///< JSON pointer into the file
  enum class Form { entry, whole_matrix, component_value, component_list } form = Form::entry;
  std::vector<int> parameters;  ///< the parameter (entry, component value) or parameters (list)
  double times = 1.0;           ///< entry = times × value
  ModelMatrix matrix = ModelMatrix::Q;
  std::string layout;  ///< whole_matrix: "rows", "diagonal" or "vector"
};

/// A model file with "estimate" markers, ready to fit.
struct ModelTemplate {
  StateSpaceModel model;  ///< starting values (or placeholders, see FreeParameter::start) in place of markers
  EstimationSpec spec;    ///< what is free
  std::string file_name;  ///< as given, for messages
  std::string source_text;  ///< the file's text, to write the fitted model in the user's own layout
  std::vector<FittedValuePlace> places;
};

/// Parses a model file that may hold "estimate" markers (and components). Raises InputError naming
/// the file and key for malformed markers, as parse_model does for everything else.
ModelTemplate parse_model_template(std::string_view json_text, const std::string& file_name);

/// Reads and parses a model file for fitting.
ModelTemplate load_model_template(const std::string& path);

/// The user's model file with every marker replaced by its fitted value from `fitted` (plain
/// numbers, shortest round-trip form), key order and everything else kept, so that `filter` and
/// `smooth` read it as it is.
std::string write_fitted_model(const ModelTemplate& model_template, const StateSpaceModel& fitted);

}  // namespace statewise
