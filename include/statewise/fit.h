#pragma once
/// \file fit.h
/// Estimating the free parameters of a model (statewise/estimation_spec.h) from a log by maximum
/// likelihood, with two methods:
///   - expectation-maximization (R. H. Shumway and D. S. Stoffer, An approach to time series
///     smoothing and forecasting using the EM algorithm, J. Time Series Analysis 3(4), 1982), with
///     missing values and constrained matrices handled as in E. E. Holmes, Derivation of an EM
///     algorithm for constrained and unconstrained multivariate autoregressive state-space (MARSS)
///     models (2012);
///   - direct maximization of the exact (diffuse) log-likelihood with L-BFGS (LBFGSpp), variances
///     on the log scale and whole covariance matrices through their Cholesky factor.
/// Standard errors come from the observed information, a numerical Hessian of the log-likelihood.
/// The equations are in docs/algorithms.md. Numerical trouble is returned in FitResult::status,
/// never thrown; results are deterministic for the same input.

#include <cstddef>
#include <string>
#include <vector>

#include "statewise/estimation_spec.h"
#include "statewise/model.h"
#include "statewise/series.h"

namespace statewise {

/// Which estimator to run.
enum class FitMethod {
  em,         ///< EM only (refused when some parameter has no closed-form EM update)
  mle,        ///< L-BFGS on the log-likelihood, after FitOptions::em_steps EM steps when EM applies
  automatic,  ///< EM steps, then L-BFGS to finish; L-BFGS alone when EM does not apply
};

/// Settings of fit_model. The defaults suit logs of a few hundred to a few hundred thousand rows.
struct FitOptions {
  FitMethod method = FitMethod::automatic;
  int em_steps = 10;             ///< EM steps before L-BFGS for mle and automatic, when EM applies (0 = none)
  int max_em_iterations = 2000;  ///< limit for method em
  int max_mle_iterations = 500;  ///< L-BFGS iterations
  /// EM stops when one step raises the log-likelihood by less than em_tolerance × (1 + |log L|).
  double em_tolerance = 1e-10;
  /// L-BFGS stops when the norm of the gradient of -log L / (number of values), on the search
  /// scale, is below this (or when 3 iterations gain less than 1e-13 relative).
  double gradient_tolerance = 1e-7;
  bool standard_errors = true;  ///< compute the numerical Hessian
  bool keep_em_trace = false;   ///< record the log-likelihood before every EM step (FitResult::em_trace)
};

/// How a fit ended.
enum class FitStatus {
  converged,        ///< the stopping rule was met
  iteration_limit,  ///< the iteration limit was reached first; the best model so far is returned
  stalled,  ///< the optimizer could not improve further before the stopping rule (e.g. a flat likelihood)
  failed,   ///< no usable starting point: the log-likelihood could not be computed
};

/// A plain-words name of a status: "converged", "iteration_limit", "stalled", "failed".
const char* status_name(FitStatus status);

/// One estimated parameter.
struct ParameterEstimate {
  std::string name;             ///< as in FreeParameter::name
  std::string kind;             ///< "variance", "covariance" or "coefficient"
  double value = 0.0;           ///< the estimate (natural scale)
  double standard_error = 0.0;  ///< from the observed information; NaN when not available
  double start = 0.0;           ///< the starting value used
  bool at_zero = false;         ///< a variance that went to zero (written as exactly 0; no standard error)
};

/// Everything a fit produced.
struct FitResult {
  FitStatus status = FitStatus::failed;
  std::string message;                       ///< what happened, in words
  StateSpaceModel model;                     ///< the fitted model (the best one found)
  std::vector<ParameterEstimate> estimates;  ///< one per free parameter, in spec order
  double log_likelihood = 0.0;      ///< log L (diffuse log L_d when some states are diffuse) of `model`
  int parameters = 0;               ///< number of estimated parameters, k
  int diffuse_states = 0;           ///< number of diffuse initial states, q
  std::size_t observed_values = 0;  ///< non-missing values, N
  double aic = 0.0;                 ///< -2 log L + 2 (k + q)
  double bic = 0.0;                 ///< -2 log L + (k + q) log N
  std::string method;      ///< "em", "mle" or "em+mle": what actually ran ("none" with nothing to estimate)
  int em_iterations = 0;   ///< EM steps taken
  int mle_iterations = 0;  ///< L-BFGS iterations taken
  std::vector<double> em_trace;       ///< log L before each EM step and after the last (when asked)
  std::vector<std::string> warnings;  ///< plain sentences
};

/// Why EM cannot update every free parameter in closed form (e.g. a variance tied to a fixed
/// covariance, an A entry in a row without process noise); empty when it can.
std::string em_unavailable_reason(const ModelTemplate& model_template);

/// Fits the free parameters of `model_template` to `series` (rows one model step apart).
/// Parameters without a "start" begin from values chosen from the data (docs/algorithms.md).
FitResult fit_model(const ModelTemplate& model_template, const ObservationSeries& series,
                    const FitOptions& options);

/// The JSON report of a fit (keys documented in docs/cli.md), ending with a newline.
std::string write_fit_report_json(const FitResult& result, const std::string& model_path,
                                  const std::string& input_path, std::size_t rows);

}  // namespace statewise
