#pragma once
/// \file model.h
/// The linear-Gaussian state-space model and its JSON model file (format version 1, documented in
/// docs/model-format.md with the JSON Schema docs/model.schema.json).
///
/// Convention: `initial` is the prior for the state at the first row;
///   x_t = A x_{t-1} + B u_{t-1} + w_t,   y_t = C x_t + v_t,   w ~ N(0, Q), v ~ N(0, R),
/// all independent, where u_{t-1} is the inputs row before row t. For a continuous-time model
/// (domain continuous) A, B and Q describe dx = (A x + B u) dt + dW with E[dW dW'] = Q dt instead, and
/// each step is discretized for the time between its two rows (discretize.h).

#include <string>
#include <string_view>
#include <vector>

#include <Eigen/Core>

namespace statewise {

/// How a model's A, B and Q relate to time (model key "domain").
enum class TimeDomain {
  discrete,    ///< A, B, Q describe one model step: one row, or `step` seconds when the model gives a step
  continuous,  ///< A is the drift F, B the input matrix G, Q the spectral density of dx = (F x + G u) dt + dW
};

/// Variance put on the diagonal of the initial covariance when the model file gives none.
inline constexpr double kDefaultInitialVariance = 1e6;

/// A validated linear-Gaussian state-space model. Dimensions: n states, m observed channels,
/// p inputs. Construct it by parsing a model file (parse_model, load_model) or fill the fields and
/// call validate_model().
struct StateSpaceModel {
  std::vector<std::string> state_names;        ///< n names (default x1..xn)
  std::vector<std::string> observation_names;  ///< m CSV column names of the measured channels
  std::vector<std::string> input_names;        ///< p CSV column names of the known inputs (may be empty)
  Eigen::MatrixXd A;                           ///< n×n state transition (continuous: the drift F, 1/s)
  Eigen::MatrixXd B;                           ///< n×p input matrix, n×0 without inputs (continuous: G, per s)
  Eigen::MatrixXd C;                           ///< m×n observation matrix
  /// n×n process noise covariance, symmetric PSD (continuous: the spectral density of W, per second)
  Eigen::MatrixXd Q;
  Eigen::MatrixXd R;                           ///< m×m measurement noise covariance, symmetric PSD
  Eigen::VectorXd initial_mean;                ///< n, prior mean of the state at the first row
  Eigen::MatrixXd initial_covariance;          ///< n×n, prior covariance, symmetric PSD
  std::string time_column;                     ///< CSV column with each row's time; empty when none
  TimeDomain domain = TimeDomain::discrete;    ///< "domain"; continuous models need a time column
  /// "step": seconds per model step of a discrete model, > 0; 0 = none (each row is one step). A
  /// gap of k steps between rows is propagated as k steps. Only for discrete models with a time column.
  double step = 0.0;
  /// n flags, or empty for none: true where the state's initial value is unknown (exact diffuse
  /// initialization, Durbin and Koopman 2012, chapter 5). A diffuse state's entries of initial_mean
  /// and initial_covariance (rows and columns) are zero and unused.
  std::vector<bool> diffuse;

  /// True when at least one state is diffuse.
  bool has_diffuse_states() const {
    for (const bool flag : diffuse)
      if (flag) return true;
    return false;
  }

  /// Number of states n.
  int state_count() const { return static_cast<int>(A.rows()); }
  /// Number of measured channels m.
  int channel_count() const { return static_cast<int>(C.rows()); }
  /// Number of inputs p.
  int input_count() const { return static_cast<int>(B.cols()); }
};

/// Parses model-file text. `file_name` is used in messages. Raises InputError naming the file and
/// the JSON key (or line:column for JSON syntax errors) for anything malformed or inconsistent.
StateSpaceModel parse_model(std::string_view json_text, const std::string& file_name);

/// Reads and parses a model file; raises InputError when it cannot be read.
StateSpaceModel load_model(const std::string& path);

/// Checks dimensions, finiteness, symmetry and positive semidefiniteness of Q, R and the initial
/// covariance, and name uniqueness; raises InputError naming `file_name` and the key.
void validate_model(const StateSpaceModel& model, const std::string& file_name);

/// The model-file spelling of a domain: "discrete" or "continuous".
const char* domain_name(TimeDomain domain);

/// Writes the model as model-file JSON text (format version 1, plain matrices; "domain" when
/// continuous, "step" when set), numbers in
/// shortest round-trip form, so that parse_model(write_model(m)) reproduces m exactly.
std::string write_model(const StateSpaceModel& model);

/// Checks that `matrix` is a covariance: square, finite, symmetric within kSymmetryTolerance and
/// positive semidefinite within kDefinitenessTolerance; raises InputError naming `file_name` and `key`.
void validate_covariance(const Eigen::MatrixXd& matrix, const std::string& file_name, const std::string& key);

/// Relative tolerance for the symmetry check: |M_ij - M_ji| <= kSymmetryTolerance * max|M|.
inline constexpr double kSymmetryTolerance = 1e-9;
/// Relative tolerance for semidefiniteness: smallest eigenvalue >= -kDefinitenessTolerance * max|eigenvalue|.
inline constexpr double kDefinitenessTolerance = 1e-10;

}  // namespace statewise
