#include "statewise/fit.h"

#include <Eigen/Cholesky>
#include <Eigen/Eigenvalues>
#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <set>
#include <stdexcept>
// LBFGSpp (Debian liblbfgspp-dev), header-only.
#include <LBFGS.h>

#include "detail/json_util.h"
#include "statewise/diffuse.h"
#include "statewise/version.h"

namespace statewise {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// A variance below kZeroVarianceShare of its data scale went to zero; one below kSmallVarianceShare
// did when setting it to zero lowers log L by less than kNegligibleLogLikelihood (docs/algorithms.md).
constexpr double kZeroVarianceShare = 1e-9;
constexpr double kSmallVarianceShare = 1e-4;
constexpr double kNegligibleLogLikelihood = 1e-4;
// Penalty for a point where the log-likelihood cannot be computed (the line search then steps back).
constexpr double kInvalidObjective = 1e30;

bool is_covariance(ModelMatrix matrix) { return matrix == ModelMatrix::Q || matrix == ModelMatrix::R; }

// ---- Starting values and scales -----------------------------------------------------------------

// Per channel, half the mean squared change between consecutive observed values: for a level plus
// noise this is about the noise variance plus half the level variance, a fair scale for both.
std::vector<double> channel_scales(const ObservationSeries& series) {
  std::vector<double> scales(static_cast<std::size_t>(series.channels), 1.0);
  for (int c = 0; c < series.channels; ++c) {
    double sum = 0.0, total = 0.0, total_squares = 0.0;
    std::size_t pairs = 0, count = 0;
    for (std::size_t t = 0; t < series.rows(); ++t) {
      const double y = series.row_values(t)[c];
      if (std::isnan(y)) continue;
      ++count;
      total += y;
      total_squares += y * y;
      if (t > 0 && !std::isnan(series.row_values(t - 1)[c])) {
        const double change = y - series.row_values(t - 1)[c];
        sum += change * change;
        ++pairs;
      }
    }
    double scale = pairs > 0 ? 0.5 * sum / static_cast<double>(pairs) : 0.0;
    if (!(scale > 0.0) && count > 1) {
      const double mean = total / static_cast<double>(count);
      scale = (total_squares - static_cast<double>(count) * mean * mean) / static_cast<double>(count - 1);
    }
    scales[static_cast<std::size_t>(c)] = scale > 0.0 && std::isfinite(scale) ? scale : 1.0;
  }
  return scales;
}

// The data scale of each parameter (used for starting values and "went to zero").
std::vector<double> parameter_scales(const EstimationSpec& spec, const ObservationSeries& series) {
  const std::vector<double> channel = channel_scales(series);
  double mean_scale = 0.0;
  for (const double s : channel) mean_scale += s / static_cast<double>(channel.size());
  std::vector<double> scales(spec.size(), 1.0);
  for (std::size_t p = 0; p < spec.size(); ++p) {
    const FreeParameter& free = spec.parameters[p];
    if (free.kind == ParameterKind::coefficient) continue;
    double largest_times = 0.0, channel_sum = 0.0;
    int diagonal = 0;
    for (const auto& entry : spec.entries) {
      if (entry.parameter != static_cast<int>(p) || entry.row != entry.column) continue;
      largest_times = std::max(largest_times, entry.times);
      channel_sum +=
          free.matrix == ModelMatrix::R ? channel[static_cast<std::size_t>(entry.row)] : mean_scale;
      ++diagonal;
    }
    const double base = diagonal > 0 ? 0.5 * channel_sum / diagonal : 0.5 * mean_scale;
    scales[p] = largest_times > 0.0 ? base / largest_times : base;
  }
  for (const auto& block : spec.full_blocks) {
    std::size_t k = 0;
    for (Eigen::Index i = 0; i < block.size; ++i)
      for (Eigen::Index j = 0; j <= i; ++j, ++k) {
        const double diagonal_scale =
            0.5 * (block.matrix == ModelMatrix::R ? channel[static_cast<std::size_t>(i)] : mean_scale);
        scales[static_cast<std::size_t>(block.parameters[k])] = diagonal_scale;
      }
  }
  return scales;
}

// Natural starting values: the file's "start", else the data scale for variances and full blocks
// (with zero covariances), else the placeholder already in the model (0, or 1 for C).
Eigen::VectorXd starting_values(const ModelTemplate& model_template, const std::vector<double>& scales) {
  const EstimationSpec& spec = model_template.spec;
  Eigen::VectorXd values = spec.values(model_template.model);
  for (std::size_t p = 0; p < spec.size(); ++p) {
    const FreeParameter& free = spec.parameters[p];
    if (free.start) {
      values(static_cast<Eigen::Index>(p)) = *free.start;
    } else if (free.kind == ParameterKind::variance) {
      values(static_cast<Eigen::Index>(p)) = scales[p];
    }
  }
  for (const auto& block : spec.full_blocks) {
    std::size_t k = 0;
    for (Eigen::Index i = 0; i < block.size; ++i)
      for (Eigen::Index j = 0; j <= i; ++j, ++k) {
        const auto p = static_cast<std::size_t>(block.parameters[k]);
        values(block.parameters[k]) = block.start ? (*block.start)(i, j) : (i == j ? scales[p] : 0.0);
      }
  }
  return values;
}

// ---- The search scale ----------------------------------------------------------------------------
// coefficient: theta = value; variance: theta = log value; full block: P = L L' with L lower
// triangular, theta = log L_ii on the diagonal and L_ij below it.

Eigen::VectorXd to_search(const EstimationSpec& spec, const Eigen::VectorXd& values,
                          const std::vector<double>& scales) {
  Eigen::VectorXd theta = values;
  for (std::size_t p = 0; p < spec.size(); ++p)
    if (spec.parameters[p].kind == ParameterKind::variance)
      theta(static_cast<Eigen::Index>(p)) =
          std::log(std::max(values(static_cast<Eigen::Index>(p)), scales[p] * 1e-12));
  for (const auto& block : spec.full_blocks) {
    Eigen::MatrixXd P(block.size, block.size);
    std::size_t k = 0;
    for (Eigen::Index i = 0; i < block.size; ++i)
      for (Eigen::Index j = 0; j <= i; ++j, ++k) P(i, j) = P(j, i) = values(block.parameters[k]);
    Eigen::LLT<Eigen::MatrixXd> llt(P);
    double jitter = 1e-12 * std::max(1.0, P.diagonal().cwiseAbs().maxCoeff());
    while (llt.info() != Eigen::Success && jitter < 1e300) {
      llt.compute(P + jitter * Eigen::MatrixXd::Identity(block.size, block.size));
      jitter *= 10.0;
    }
    const Eigen::MatrixXd L = llt.matrixL();
    k = 0;
    for (Eigen::Index i = 0; i < block.size; ++i)
      for (Eigen::Index j = 0; j <= i; ++j, ++k)
        theta(block.parameters[k]) = i == j ? std::log(std::max(L(i, i), 1e-150)) : L(i, j);
  }
  return theta;
}

Eigen::VectorXd to_natural(const EstimationSpec& spec, const Eigen::VectorXd& theta) {
  Eigen::VectorXd values = theta;
  for (std::size_t p = 0; p < spec.size(); ++p)
    if (spec.parameters[p].kind == ParameterKind::variance)
      values(static_cast<Eigen::Index>(p)) = std::exp(theta(static_cast<Eigen::Index>(p)));
  for (const auto& block : spec.full_blocks) {
    Eigen::MatrixXd L = Eigen::MatrixXd::Zero(block.size, block.size);
    std::size_t k = 0;
    for (Eigen::Index i = 0; i < block.size; ++i)
      for (Eigen::Index j = 0; j <= i; ++j, ++k)
        L(i, j) = i == j ? std::exp(theta(block.parameters[k])) : theta(block.parameters[k]);
    const Eigen::MatrixXd P = L * L.transpose();
    k = 0;
    for (Eigen::Index i = 0; i < block.size; ++i)
      for (Eigen::Index j = 0; j <= i; ++j, ++k) values(block.parameters[k]) = P(i, j);
  }
  return values;
}

std::size_t observed_count(const ObservationSeries& series) {
  std::size_t count = 0;
  for (const double value : series.values) count += std::isnan(value) ? 0 : 1;
  return count;
}

// ---- Likelihood ---------------------------------------------------------------------------------

struct Evaluator {
  const EstimationSpec& spec;
  const ObservationSeries& series;
  StateSpaceModel work;
  int evaluations = 0;

  // log L at natural values; NaN when it cannot be computed.
  double log_likelihood(const Eigen::VectorXd& values) {
    ++evaluations;
    if (!values.allFinite()) return kNaN;
    spec.apply(values, work);
    const SeriesLikelihood result = exact_log_likelihood(work, series);
    if (result.status != StepStatus::ok || !std::isfinite(result.log_likelihood)) return kNaN;
    return result.log_likelihood;
  }
};

// ---- EM -----------------------------------------------------------------------------------------

// One free entry of a matrix in a constrained regression.
struct Slot {
  Eigen::Index row, column;  // in the stacked matrix G (for [A B], B's columns come after A's)
  int parameter;
  double times;
};

// Minimizes tr(W (G_F Szz G_F' - 2 Sxz_F G_F')) over the parameters of `slots`, G_F being the rows
// `rows` of G with the other entries fixed (Holmes 2012, the constrained update of B and Z). Writes
// the solution into `values`. False when the normal equations are singular.
bool constrained_regression(const std::vector<Eigen::Index>& rows, const std::vector<Slot>& slots,
                            const Eigen::MatrixXd& G, const Eigen::MatrixXd& Szz, const Eigen::MatrixXd& Sxz,
                            const Eigen::MatrixXd& W, Eigen::VectorXd& values) {
  const auto r = static_cast<Eigen::Index>(rows.size());
  const Eigen::Index c = G.cols();
  std::map<Eigen::Index, Eigen::Index> position;
  for (Eigen::Index i = 0; i < r; ++i) position[rows[static_cast<std::size_t>(i)]] = i;
  std::vector<int> parameters;
  for (const auto& slot : slots)
    if (std::find(parameters.begin(), parameters.end(), slot.parameter) == parameters.end())
      parameters.push_back(slot.parameter);
  const auto k = static_cast<Eigen::Index>(parameters.size());
  Eigen::MatrixXd fixed(r, c), Sxz_F(r, c);
  for (Eigen::Index i = 0; i < r; ++i) {
    fixed.row(i) = G.row(rows[static_cast<std::size_t>(i)]);
    Sxz_F.row(i) = Sxz.row(rows[static_cast<std::size_t>(i)]);
  }
  std::vector<Eigen::MatrixXd> X(static_cast<std::size_t>(k), Eigen::MatrixXd::Zero(r, c));
  for (const auto& slot : slots) {
    const auto a = static_cast<std::size_t>(std::find(parameters.begin(), parameters.end(), slot.parameter) -
                                            parameters.begin());
    X[a](position[slot.row], slot.column) += slot.times;
    fixed(position[slot.row], slot.column) = 0.0;
  }
  // Normal equations: H_ab = tr(X_a' W X_b Szz), b_a = tr(X_a' (W Sxz_F - W F Szz)).
  const Eigen::MatrixXd residual = W * Sxz_F - W * fixed * Szz;
  Eigen::MatrixXd H(k, k);
  Eigen::VectorXd b(k);
  for (Eigen::Index a = 0; a < k; ++a) {
    const Eigen::MatrixXd& Xa = X[static_cast<std::size_t>(a)];
    b(a) = (Xa.array() * residual.array()).sum();
    for (Eigen::Index bb = 0; bb < k; ++bb)
      H(a, bb) = (Xa.array() * (W * X[static_cast<std::size_t>(bb)] * Szz).array()).sum();
  }
  const Eigen::LLT<Eigen::MatrixXd> llt(0.5 * (H + H.transpose()));
  if (llt.info() != Eigen::Success) return false;
  const Eigen::VectorXd solution = llt.solve(b);
  if (!solution.allFinite()) return false;
  for (Eigen::Index a = 0; a < k; ++a) values(parameters[static_cast<std::size_t>(a)]) = solution(a);
  return true;
}

// Inverse of the block of a covariance over `rows`; false when singular.
bool block_inverse(const Eigen::MatrixXd& covariance, const std::vector<Eigen::Index>& rows,
                   Eigen::MatrixXd& inverse) {
  const auto r = static_cast<Eigen::Index>(rows.size());
  Eigen::MatrixXd block(r, r);
  for (Eigen::Index i = 0; i < r; ++i)
    for (Eigen::Index j = 0; j < r; ++j)
      block(i, j) = covariance(rows[static_cast<std::size_t>(i)], rows[static_cast<std::size_t>(j)]);
  const Eigen::LLT<Eigen::MatrixXd> llt(block);
  if (llt.info() != Eigen::Success) return false;
  const double largest = block.diagonal().maxCoeff();
  for (Eigen::Index i = 0; i < r; ++i)
    if (!(llt.matrixLLT()(i, i) * llt.matrixLLT()(i, i) > 1e-12 * largest)) return false;
  inverse = llt.solve(Eigen::MatrixXd::Identity(r, r));
  return true;
}

// The M-step of a covariance matrix given S, the expected second moment of its noise: a whole
// matrix becomes S; a variance with shape M on its states I becomes tr(M^+ S_II) / rank M
// (Shumway and Stoffer 1982; Holmes 2012 for the constrained forms).
void covariance_update(const EstimationSpec& spec, ModelMatrix matrix, const Eigen::MatrixXd& S,
                       Eigen::VectorXd& values) {
  for (const auto& block : spec.full_blocks) {
    if (block.matrix != matrix) continue;
    std::size_t k = 0;
    for (Eigen::Index i = 0; i < block.size; ++i)
      for (Eigen::Index j = 0; j <= i; ++j, ++k) values(block.parameters[k]) = 0.5 * (S(i, j) + S(j, i));
  }
  for (std::size_t p = 0; p < spec.size(); ++p) {
    if (spec.parameters[p].matrix != matrix || spec.parameters[p].kind != ParameterKind::variance) continue;
    std::vector<Eigen::Index> states;
    for (const auto& entry : spec.entries)
      if (entry.parameter == static_cast<int>(p)) {
        if (std::find(states.begin(), states.end(), entry.row) == states.end()) states.push_back(entry.row);
        if (std::find(states.begin(), states.end(), entry.column) == states.end())
          states.push_back(entry.column);
      }
    std::sort(states.begin(), states.end());
    const auto r = static_cast<Eigen::Index>(states.size());
    Eigen::MatrixXd shape = Eigen::MatrixXd::Zero(r, r), block(r, r);
    auto at = [&](Eigen::Index state) {
      return static_cast<Eigen::Index>(std::find(states.begin(), states.end(), state) - states.begin());
    };
    for (const auto& entry : spec.entries)
      if (entry.parameter == static_cast<int>(p)) shape(at(entry.row), at(entry.column)) = entry.times;
    for (Eigen::Index i = 0; i < r; ++i)
      for (Eigen::Index j = 0; j < r; ++j)
        block(i, j) = S(states[static_cast<std::size_t>(i)], states[static_cast<std::size_t>(j)]);
    const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> eigen(shape);
    const double largest = eigen.eigenvalues().cwiseAbs().maxCoeff();
    double trace = 0.0;
    int rank = 0;
    for (Eigen::Index i = 0; i < r; ++i) {
      const double lambda = eigen.eigenvalues()(i);
      if (lambda > 1e-12 * largest) {
        const Eigen::VectorXd u = eigen.eigenvectors().col(i);
        trace += u.dot(block * u) / lambda;
        ++rank;
      }
    }
    values(static_cast<Eigen::Index>(p)) = rank > 0 ? std::max(trace / rank, 0.0) : 0.0;
  }
}

// One EM step from `values`. Returns false (with `trouble`) when the E-step or an M-step fails;
// `log_likelihood` is that of `values` (before the step).
bool em_step(const ModelTemplate& model_template, const ObservationSeries& series, Eigen::VectorXd& values,
             double& log_likelihood, std::string& trouble) {
  const EstimationSpec& spec = model_template.spec;
  StateSpaceModel model = model_template.model;
  spec.apply(values, model);
  const ExactSmoothing smoothed = exact_smooth(model, series, true);
  if (smoothed.likelihood.status != StepStatus::ok) {
    trouble = std::string("the smoother failed: ") + describe(smoothed.likelihood.status);
    return false;
  }
  log_likelihood = smoothed.likelihood.log_likelihood;
  const Eigen::Index n = model.state_count(), m = model.channel_count(), p = model.input_count();
  const std::size_t T = series.rows();
  if (T < 2) {
    trouble = "the log needs at least two rows";
    return false;
  }
  // Sufficient statistics of the E-step.
  Eigen::MatrixXd Szz = Eigen::MatrixXd::Zero(n + p, n + p), Sxz = Eigen::MatrixXd::Zero(n, n + p);
  Eigen::MatrixXd S11 = Eigen::MatrixXd::Zero(n, n), Sxx = Eigen::MatrixXd::Zero(n, n);
  Eigen::MatrixXd Syx = Eigen::MatrixXd::Zero(m, n), Syy = Eigen::MatrixXd::Zero(m, m);
  Eigen::VectorXd z(n + p);
  for (std::size_t t = 0; t < T; ++t) {
    const Eigen::VectorXd x = smoothed.track.mean(t);
    const Eigen::MatrixXd Exx = Eigen::MatrixXd(smoothed.track.covariance(t)) + x * x.transpose();
    Sxx += Exx;
    if (t > 0) {
      const Eigen::VectorXd previous = smoothed.track.mean(t - 1);
      const Eigen::MatrixXd Eprev =
          Eigen::MatrixXd(smoothed.track.covariance(t - 1)) + previous * previous.transpose();
      const Eigen::MatrixXd Elag = smoothed.lag_one[t] + x * previous.transpose();
      Eigen::VectorXd u = Eigen::VectorXd::Zero(p);
      for (Eigen::Index j = 0; j < p; ++j) u(j) = series.row_inputs(t - 1)[j];
      Szz.topLeftCorner(n, n) += Eprev;
      Szz.topRightCorner(n, p) += previous * u.transpose();
      Szz.bottomLeftCorner(p, n) += u * previous.transpose();
      Szz.bottomRightCorner(p, p) += u * u.transpose();
      Sxz.leftCols(n) += Elag;
      Sxz.rightCols(p) += x * u.transpose();
      S11 += Exx;
    }
    // Observed and (given the current C and R) expected missing values (Shumway and Stoffer 1982,
    // section 4; Holmes 2012, section 6): y_mis = H x + c + e with H = C_m - G C_o, c = G y_o,
    // G = R_mo R_oo^-1 and Var(e) = R_mm - G R_om.
    const double* y = series.row_values(t);
    std::vector<Eigen::Index> o, mis;
    for (Eigen::Index c = 0; c < m; ++c) (std::isnan(y[c]) ? mis : o).push_back(c);
    Eigen::VectorXd Ey(m);
    Eigen::MatrixXd Eyx(m, n), Eyy(m, m);
    Eigen::VectorXd y_o(static_cast<Eigen::Index>(o.size()));
    for (std::size_t a = 0; a < o.size(); ++a) y_o(static_cast<Eigen::Index>(a)) = y[o[a]];
    Eigen::MatrixXd G =
        Eigen::MatrixXd::Zero(static_cast<Eigen::Index>(mis.size()), static_cast<Eigen::Index>(o.size()));
    if (!mis.empty() && !o.empty()) {
      Eigen::MatrixXd Roo(y_o.size(), y_o.size()), Rmo(G.rows(), G.cols());
      for (std::size_t a = 0; a < o.size(); ++a) {
        for (std::size_t b = 0; b < o.size(); ++b)
          Roo(static_cast<Eigen::Index>(a), static_cast<Eigen::Index>(b)) = model.R(o[a], o[b]);
        for (std::size_t b = 0; b < mis.size(); ++b)
          Rmo(static_cast<Eigen::Index>(b), static_cast<Eigen::Index>(a)) = model.R(mis[b], o[a]);
      }
      if (Rmo.cwiseAbs().maxCoeff() > 0.0) G = Roo.ldlt().solve(Rmo.transpose()).transpose();
    }
    for (std::size_t a = 0; a < o.size(); ++a) {
      Ey(o[a]) = y[o[a]];
      Eyx.row(o[a]) = y[o[a]] * x.transpose();
    }
    for (std::size_t b = 0; b < mis.size(); ++b) {
      Eigen::VectorXd H = model.C.row(mis[b]).transpose();
      double c = 0.0;
      for (std::size_t a = 0; a < o.size(); ++a) {
        const double g = G(static_cast<Eigen::Index>(b), static_cast<Eigen::Index>(a));
        H -= g * model.C.row(o[a]).transpose();
        c += g * y[o[a]];
      }
      Ey(mis[b]) = H.dot(x) + c;
      Eyx.row(mis[b]) = H.transpose() * Exx + c * x.transpose();
    }
    for (Eigen::Index a = 0; a < m; ++a)
      for (Eigen::Index b = 0; b < m; ++b) {
        const bool a_missing = std::isnan(y[a]), b_missing = std::isnan(y[b]);
        if (!a_missing && !b_missing) {
          Eyy(a, b) = y[a] * y[b];
        } else if (a_missing != b_missing) {
          const Eigen::Index missing = a_missing ? a : b, present = a_missing ? b : a;
          Eyy(a, b) = Ey(missing) * y[present];
        } else {
          // E[y_a y_b] = H_a Exx H_b' + H_a x c_b + c_a x'H_b' + c_a c_b + R_ab - (G R_om)_ab
          const auto ia = static_cast<Eigen::Index>(std::find(mis.begin(), mis.end(), a) - mis.begin());
          const auto ib = static_cast<Eigen::Index>(std::find(mis.begin(), mis.end(), b) - mis.begin());
          Eigen::VectorXd Ha = model.C.row(a).transpose(), Hb = model.C.row(b).transpose();
          double ca = 0.0, cb = 0.0, GRab = 0.0;
          for (std::size_t s = 0; s < o.size(); ++s) {
            const auto is = static_cast<Eigen::Index>(s);
            Ha -= G(ia, is) * model.C.row(o[s]).transpose();
            Hb -= G(ib, is) * model.C.row(o[s]).transpose();
            ca += G(ia, is) * y[o[s]];
            cb += G(ib, is) * y[o[s]];
            GRab += G(ia, is) * model.R(o[s], b);
          }
          Eyy(a, b) = Ha.dot(Exx * Hb) + Ha.dot(x) * cb + ca * Hb.dot(x) + ca * cb + model.R(a, b) - GRab;
        }
      }
    Syx += Eyx;
    Syy += Eyy;
  }

  // M-steps in turn (each given the others' newest values: an ECM, Meng and Rubin 1993, which keeps
  // the log-likelihood from decreasing).
  std::vector<Slot> dynamics, observation;
  std::vector<Eigen::Index> dynamic_rows, observation_rows, mean_rows;
  std::vector<Slot> mean_slots;
  auto add_row = [](std::vector<Eigen::Index>& rows, Eigen::Index row) {
    if (std::find(rows.begin(), rows.end(), row) == rows.end()) rows.push_back(row);
  };
  for (const auto& entry : spec.entries) {
    if (entry.matrix == ModelMatrix::A || entry.matrix == ModelMatrix::B) {
      dynamics.push_back(
          {entry.row, entry.column + (entry.matrix == ModelMatrix::B ? n : 0), entry.parameter, entry.times});
      add_row(dynamic_rows, entry.row);
    } else if (entry.matrix == ModelMatrix::C) {
      observation.push_back({entry.row, entry.column, entry.parameter, entry.times});
      add_row(observation_rows, entry.row);
    } else if (entry.matrix == ModelMatrix::initial_mean) {
      mean_slots.push_back({entry.row, 0, entry.parameter, entry.times});
      add_row(mean_rows, entry.row);
    }
  }
  Eigen::MatrixXd W;
  if (!dynamics.empty()) {
    Eigen::MatrixXd stacked(n, n + p);
    stacked << model.A, model.B;
    if (!block_inverse(model.Q, dynamic_rows, W) ||
        !constrained_regression(dynamic_rows, dynamics, stacked, Szz, Sxz, W, values)) {
      trouble = "the update of A or B is singular (a state with estimated dynamics has no process noise)";
      return false;
    }
    spec.apply(values, model);
  }
  if (!observation.empty()) {
    if (!block_inverse(model.R, observation_rows, W) ||
        !constrained_regression(observation_rows, observation, model.C, Sxx, Syx, W, values)) {
      trouble = "the update of C is singular (a channel with estimated loadings has no noise)";
      return false;
    }
    spec.apply(values, model);
  }
  {
    Eigen::MatrixXd stacked(n, n + p);
    stacked << model.A, model.B;
    // S_Q = (1/(T-1)) sum E[(x_t - G z_{t-1})(x_t - G z_{t-1})']
    const Eigen::MatrixXd SQ =
        (S11 - stacked * Sxz.transpose() - Sxz * stacked.transpose() + stacked * Szz * stacked.transpose()) /
        static_cast<double>(T - 1);
    covariance_update(spec, ModelMatrix::Q, SQ, values);
    // S_R = (1/T) sum E[(y_t - C x_t)(y_t - C x_t)']
    const Eigen::MatrixXd SR =
        (Syy - model.C * Syx.transpose() - Syx * model.C.transpose() + model.C * Sxx * model.C.transpose()) /
        static_cast<double>(T);
    covariance_update(spec, ModelMatrix::R, SR, values);
    spec.apply(values, model);
  }
  if (!mean_slots.empty()) {
    // The prior mean maximizes log N(x_0; mu, P_0) in expectation: a regression of x̂_0 with weight P_0^-1.
    if (!block_inverse(model.initial_covariance, mean_rows, W)) {
      trouble = "the initial mean cannot be updated: its prior variance is zero";
      return false;
    }
    const Eigen::MatrixXd one = Eigen::MatrixXd::Ones(1, 1);
    const Eigen::MatrixXd first = smoothed.track.mean(0);
    if (!constrained_regression(mean_rows, mean_slots, model.initial_mean, one, first, W, values)) {
      trouble = "the update of the initial mean is singular";
      return false;
    }
  }
  if (!values.allFinite()) {
    trouble = "an update was not finite";
    return false;
  }
  return true;
}

// ---- Standard errors ----------------------------------------------------------------------------

// Observed information on the search scale by central differences of log L, turned into standard
// errors of the natural values by the delta method. `active` marks parameters not at zero.
std::vector<double> standard_errors(const EstimationSpec& spec, Evaluator& evaluator,
                                    const Eigen::VectorXd& theta, const std::vector<bool>& active,
                                    std::string& trouble) {
  const Eigen::Index k = theta.size();
  std::vector<Eigen::Index> index;
  for (Eigen::Index i = 0; i < k; ++i)
    if (active[static_cast<std::size_t>(i)]) index.push_back(i);
  const auto a = static_cast<Eigen::Index>(index.size());
  std::vector<double> errors(static_cast<std::size_t>(k), kNaN);
  if (a == 0) return errors;
  auto f = [&](const Eigen::VectorXd& point) { return evaluator.log_likelihood(to_natural(spec, point)); };
  const double center = f(theta);
  Eigen::VectorXd h(a);
  for (Eigen::Index i = 0; i < a; ++i)
    h(i) = 1e-4 * std::max(1.0, std::abs(theta(index[static_cast<std::size_t>(i)])));
  Eigen::MatrixXd hessian(a, a);
  for (Eigen::Index i = 0; i < a; ++i) {
    const Eigen::Index pi = index[static_cast<std::size_t>(i)];
    Eigen::VectorXd plus = theta, minus = theta;
    plus(pi) += h(i);
    minus(pi) -= h(i);
    hessian(i, i) = (f(plus) - 2.0 * center + f(minus)) / (h(i) * h(i));
    for (Eigen::Index j = 0; j < i; ++j) {
      const Eigen::Index pj = index[static_cast<std::size_t>(j)];
      Eigen::VectorXd pp = theta, pm = theta, mp = theta, mm = theta;
      pp(pi) += h(i), pp(pj) += h(j);
      pm(pi) += h(i), pm(pj) -= h(j);
      mp(pi) -= h(i), mp(pj) += h(j);
      mm(pi) -= h(i), mm(pj) -= h(j);
      hessian(i, j) = hessian(j, i) = (f(pp) - f(pm) - f(mp) + f(mm)) / (4.0 * h(i) * h(j));
    }
  }
  if (!hessian.allFinite()) {
    trouble = "the log-likelihood could not be evaluated around the estimate";
    return errors;
  }
  const Eigen::MatrixXd information = -hessian;
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> eigen(information);
  const double largest = eigen.eigenvalues().cwiseAbs().maxCoeff();
  if (!(eigen.eigenvalues().minCoeff() > 1e-10 * largest)) {
    trouble =
        "the observed information is not positive definite: the likelihood is flat in some direction, "
        "so some parameters are not determined by the data";
    return errors;
  }
  const Eigen::MatrixXd covariance_theta = eigen.eigenvectors() *
                                           eigen.eigenvalues().cwiseInverse().asDiagonal() *
                                           eigen.eigenvectors().transpose();
  // Jacobian of the natural values with respect to the active search values (central differences
  // of a smooth closed-form map).
  Eigen::MatrixXd J = Eigen::MatrixXd::Zero(k, a);
  for (Eigen::Index i = 0; i < a; ++i) {
    const Eigen::Index pi = index[static_cast<std::size_t>(i)];
    Eigen::VectorXd plus = theta, minus = theta;
    const double step = 1e-6 * std::max(1.0, std::abs(theta(pi)));
    plus(pi) += step;
    minus(pi) -= step;
    J.col(i) = (to_natural(spec, plus) - to_natural(spec, minus)) / (2.0 * step);
  }
  const Eigen::MatrixXd covariance = J * covariance_theta * J.transpose();
  for (Eigen::Index i = 0; i < k; ++i)
    if (active[static_cast<std::size_t>(i)])
      errors[static_cast<std::size_t>(i)] = std::sqrt(std::max(covariance(i, i), 0.0));
  return errors;
}

// ---- L-BFGS -------------------------------------------------------------------------------------

struct Objective {
  const EstimationSpec& spec;
  Evaluator& evaluator;
  double values_count;
  Eigen::VectorXd best_theta;
  double best = std::numeric_limits<double>::infinity();

  double value(const Eigen::VectorXd& theta) {
    const double ll = evaluator.log_likelihood(to_natural(spec, theta));
    if (std::isnan(ll)) return kInvalidObjective;
    const double f = -ll / values_count;
    if (f < best) {
      best = f;
      best_theta = theta;
    }
    return f;
  }

  // f and its gradient by central differences (one-sided next to a point that cannot be evaluated).
  double operator()(const Eigen::VectorXd& theta, Eigen::VectorXd& gradient) {
    const double f = value(theta);
    gradient.resize(theta.size());
    if (f >= kInvalidObjective) {
      gradient.setZero();
      return f;
    }
    for (Eigen::Index i = 0; i < theta.size(); ++i) {
      const double h = 1e-6 * std::max(1.0, std::abs(theta(i)));
      Eigen::VectorXd point = theta;
      point(i) = theta(i) + h;
      const double up = value(point);
      point(i) = theta(i) - h;
      const double down = value(point);
      if (up < kInvalidObjective && down < kInvalidObjective)
        gradient(i) = (up - down) / (2.0 * h);
      else if (up < kInvalidObjective)
        gradient(i) = (up - f) / h;
      else if (down < kInvalidObjective)
        gradient(i) = (f - down) / h;
      else
        gradient(i) = 0.0;
    }
    return f;
  }
};

const char* kind_name(ParameterKind kind) {
  switch (kind) {
    case ParameterKind::variance:
      return "variance";
    case ParameterKind::full_covariance:
      return "covariance";
    default:
      return "coefficient";
  }
}

}  // namespace

const char* status_name(FitStatus status) {
  switch (status) {
    case FitStatus::converged:
      return "converged";
    case FitStatus::iteration_limit:
      return "iteration_limit";
    case FitStatus::stalled:
      return "stalled";
    case FitStatus::failed:
      return "failed";
  }
  return "failed";
}

std::string em_unavailable_reason(const ModelTemplate& model_template) {
  const EstimationSpec& spec = model_template.spec;
  const StateSpaceModel& model = model_template.model;
  // Entries of Q or R that follow a parameter.
  auto free_entry = [&](ModelMatrix matrix, Eigen::Index i, Eigen::Index j, int* parameter) {
    for (const auto& block : spec.full_blocks)
      if (block.matrix == matrix) {
        if (parameter) *parameter = -1;
        return true;
      }
    for (const auto& entry : spec.entries)
      if (entry.matrix == matrix && entry.row == i && entry.column == j) {
        if (parameter) *parameter = entry.parameter;
        return true;
      }
    return false;
  };
  for (std::size_t p = 0; p < spec.size(); ++p) {
    const FreeParameter& free = spec.parameters[p];
    if (is_covariance(free.matrix) && free.kind == ParameterKind::coefficient)
      return free.name + ": a covariance estimated on its own has no closed-form EM update";
    if (free.kind != ParameterKind::variance) continue;
    const Eigen::MatrixXd& M = matrix_of(model, free.matrix);
    std::set<Eigen::Index> states;
    for (const auto& entry : spec.entries)
      if (entry.parameter == static_cast<int>(p)) states.insert(entry.row), states.insert(entry.column);
    for (const Eigen::Index i : states)
      for (Eigen::Index j = 0; j < M.cols(); ++j) {
        int other = -2;
        const bool is_free = free_entry(free.matrix, i, j, &other);
        if (is_free && other == static_cast<int>(p)) continue;
        if (is_free || M(i, j) != 0.0)
          return free.name + ": it shares " + matrix_key(free.matrix) + "[" + std::to_string(i) + "][" +
                 std::to_string(j) + "] with another value, so EM has no closed-form update for it";
      }
  }
  // Rows of A/B (C) with free entries need their own block of Q (R), not tied to other rows, with noise.
  auto check_rows = [&](std::initializer_list<ModelMatrix> matrices, ModelMatrix noise,
                        const char* what) -> std::string {
    std::set<Eigen::Index> rows;
    std::string example;
    for (const auto& entry : spec.entries)
      for (const ModelMatrix matrix : matrices)
        if (entry.matrix == matrix) {
          rows.insert(entry.row);
          if (example.empty()) example = spec.parameters[static_cast<std::size_t>(entry.parameter)].name;
        }
    if (rows.empty()) return "";
    const Eigen::MatrixXd& N = matrix_of(model, noise);
    for (const Eigen::Index i : rows) {
      bool has_noise = free_entry(noise, i, i, nullptr) || N(i, i) > 0.0;
      if (!has_noise)
        return example + ": the " + what + " row " + std::to_string(i) + " has no " + matrix_key(noise) +
               " noise, so EM cannot update its entries";
      for (Eigen::Index j = 0; j < N.cols(); ++j)
        if (!rows.count(j) && (N(i, j) != 0.0 || free_entry(noise, i, j, nullptr)))
          return example + ": " + matrix_key(noise) + "[" + std::to_string(i) + "][" + std::to_string(j) +
                 "] ties its row to one without estimated entries, so EM has no closed-form update";
    }
    return "";
  };
  std::string reason = check_rows({ModelMatrix::A, ModelMatrix::B}, ModelMatrix::Q, "state");
  if (reason.empty()) reason = check_rows({ModelMatrix::C}, ModelMatrix::R, "channel");
  return reason;
}

FitResult fit_model(const ModelTemplate& model_template, const ObservationSeries& series,
                    const FitOptions& options) {
  const EstimationSpec& spec = model_template.spec;
  FitResult result;
  result.model = model_template.model;
  result.parameters = static_cast<int>(spec.size());
  for (const bool flag : model_template.model.diffuse) result.diffuse_states += flag ? 1 : 0;
  Evaluator evaluator{spec, series, model_template.model};
  const std::vector<double> scales = parameter_scales(spec, series);
  Eigen::VectorXd values = starting_values(model_template, scales);
  const Eigen::VectorXd start = values;

  // The data scale for every variance (and zero covariances), whatever the file's "start" says.
  Eigen::VectorXd fallback = values;
  for (std::size_t p = 0; p < spec.size(); ++p)
    if (spec.parameters[p].kind != ParameterKind::coefficient)
      fallback(static_cast<Eigen::Index>(p)) =
          spec.parameters[p].kind == ParameterKind::variance ? scales[p] : 0.0;
  for (const auto& block : spec.full_blocks) {
    std::size_t k = 0;
    for (Eigen::Index i = 0; i < block.size; ++i)
      for (Eigen::Index j = 0; j <= i; ++j, ++k)
        if (i == j) fallback(block.parameters[k]) = scales[static_cast<std::size_t>(block.parameters[k])];
  }
  double log_likelihood = evaluator.log_likelihood(values);
  if (std::isnan(log_likelihood)) {
    // A bad start (e.g. a zero variance that makes a channel exact): retry from the data scale.
    log_likelihood = evaluator.log_likelihood(fallback);
    if (std::isnan(log_likelihood)) {
      result.status = FitStatus::failed;
      result.message =
          "the log-likelihood cannot be computed at the starting values (check that the noise "
          "variances are not zero where channels are observed, and that the log has data)";
      return result;
    }
    result.warnings.push_back(
        "the starting values gave no valid log-likelihood; started from values chosen from the data");
    values = fallback;
  }

  const std::string em_reason = em_unavailable_reason(model_template);
  const bool em_available = em_reason.empty();
  if (options.method == FitMethod::em && !em_available) {
    result.status = FitStatus::failed;
    result.message = "EM cannot fit this model: " + em_reason + "; use --method mle";
    return result;
  }
  int em_budget = 0;
  if (options.method == FitMethod::em)
    em_budget = options.max_em_iterations;
  else if (em_available)
    em_budget = options.em_steps;
  result.status = FitStatus::converged;

  // EM steps.
  bool em_converged = false;
  if (em_budget > 0 && spec.size() > 0) {
    Eigen::VectorXd best = values;
    double previous = -std::numeric_limits<double>::infinity();
    for (int iteration = 0; iteration < em_budget; ++iteration) {
      Eigen::VectorXd next = values;
      double before = 0.0;
      std::string trouble;
      if (!em_step(model_template, series, next, before, trouble)) {
        result.warnings.push_back("EM stopped after " + std::to_string(iteration) + " steps: " + trouble);
        if (options.method == FitMethod::em) result.status = FitStatus::stalled;
        break;
      }
      if (options.keep_em_trace) result.em_trace.push_back(before);
      ++result.em_iterations;
      if (before < previous - 1e-9 * (1.0 + std::abs(previous))) {
        result.warnings.push_back("EM's log-likelihood fell (rounding); kept the best model");
        if (options.method == FitMethod::em) result.status = FitStatus::stalled;
        break;
      }
      best = values;
      log_likelihood = before;
      if (before - previous < options.em_tolerance * (1.0 + std::abs(before))) {
        em_converged = true;
        break;
      }
      previous = before;
      values = next;
    }
    // `values` holds the latest step; make sure it is valid and at least as good as the best.
    const double latest = evaluator.log_likelihood(values);
    if (options.keep_em_trace && !std::isnan(latest)) result.em_trace.push_back(latest);
    if (std::isnan(latest) || latest < log_likelihood) {
      values = best;
    } else {
      log_likelihood = latest;
    }
    if (options.method == FitMethod::em && !em_converged && result.status == FitStatus::converged) {
      result.status = FitStatus::iteration_limit;
      result.message =
          "EM reached its limit of " + std::to_string(em_budget) + " iterations before converging";
    }
  }
  result.method = spec.size() == 0 ? "none" : result.em_iterations > 0 ? "em" : "";

  // L-BFGS.
  if (options.method != FitMethod::em && spec.size() > 0) {
    result.method += result.method.empty() ? "mle" : "+mle";
    // A start many orders of magnitude off can leave a variance where the likelihood hardly depends
    // on it (a noise far below another), which EM cannot leave either: begin from the data scale
    // instead when that is better.
    const double at_data_scale = evaluator.log_likelihood(fallback);
    if (!std::isnan(at_data_scale) && at_data_scale > log_likelihood) {
      values = fallback;
      log_likelihood = at_data_scale;
      result.warnings.push_back(
          "values chosen from the data gave a higher log-likelihood than the starting values; "
          "the search began from them");
    }
    Eigen::VectorXd theta = to_search(spec, values, scales);
    LBFGSpp::LBFGSParam<double> parameters;
    parameters.epsilon = options.gradient_tolerance;
    parameters.epsilon_rel = 0.0;
    parameters.past = 3;
    parameters.delta = 1e-13;
    parameters.max_iterations = options.max_mle_iterations;
    parameters.max_linesearch = 60;
    // Backtracking with the Armijo rule: it only needs values along the line, so a trial point where
    // the log-likelihood cannot be computed simply halves the step.
    LBFGSpp::LBFGSSolver<double, LBFGSpp::LineSearchBacktracking> solver(parameters);
    Objective objective{spec, evaluator,
                        static_cast<double>(std::max<std::size_t>(1, observed_count(series))), theta};
    double f = 0.0;
    // LBFGSpp throws when its line search cannot progress: near the maximum that is the limit of the
    // numerical gradient's precision, elsewhere a region where the curvature changes fast. Restart
    // from the best point while that still gains.
    for (int attempt = 0;; ++attempt) {
      const double best_before = objective.best;
      try {
        result.mle_iterations += solver.minimize(objective, theta, f);
        if (result.mle_iterations >= options.max_mle_iterations) {
          result.status = FitStatus::iteration_limit;
          result.message = "L-BFGS reached its limit of " + std::to_string(options.max_mle_iterations) +
                           " iterations before converging";
        }
        break;
      } catch (const std::exception& error) {
        result.mle_iterations += 1;
        theta = objective.best_theta;
        const bool gained = objective.best < best_before - 1e-12 * std::abs(best_before);
        if (gained && attempt < 20 && result.mle_iterations < options.max_mle_iterations) continue;
        Eigen::VectorXd gradient;
        objective(theta, gradient);
        if (gradient.norm() > 1e3 * options.gradient_tolerance) {
          result.status = FitStatus::stalled;
          result.message = std::string("L-BFGS stopped early (") + error.what() + ")";
        }
        break;
      }
    }
    if (objective.best < kInvalidObjective) theta = objective.best_theta;
    values = to_natural(spec, theta);
    log_likelihood = evaluator.log_likelihood(values);
  }

  // A variance heading for zero creeps there (the log-likelihood is flat on the log scale): one
  // small against its data scale whose removal costs next to no log-likelihood went to zero, and is
  // set to exactly zero when the model still works there.
  std::vector<bool> active(spec.size(), true);
  for (std::size_t p = 0; p < spec.size(); ++p) {
    if (spec.parameters[p].kind != ParameterKind::variance) continue;
    const double value = values(static_cast<Eigen::Index>(p));
    if (value < kSmallVarianceShare * scales[p]) {
      Eigen::VectorXd zeroed = values;
      zeroed(static_cast<Eigen::Index>(p)) = 0.0;
      const double at_zero = evaluator.log_likelihood(zeroed);
      const bool negligible = !std::isnan(at_zero) && at_zero >= log_likelihood - kNegligibleLogLikelihood;
      if (!negligible && value >= kZeroVarianceShare * scales[p]) continue;
      if (negligible) {
        values = zeroed;
        log_likelihood = std::max(log_likelihood, at_zero);
      }
      active[p] = false;
      result.warnings.push_back(
          spec.parameters[p].name +
          " went to zero: the data show no such noise (that part of the model is deterministic)");
    }
  }

  spec.apply(values, result.model);
  const SeriesLikelihood final_likelihood = exact_log_likelihood(result.model, series);
  result.log_likelihood = final_likelihood.log_likelihood;
  result.observed_values = observed_count(series);
  if (!final_likelihood.diffuse_resolved)
    result.warnings.push_back("some diffuse initial states are not determined by the data");
  const double penalty = static_cast<double>(result.parameters + result.diffuse_states);
  result.aic = -2.0 * result.log_likelihood + 2.0 * penalty;
  result.bic = -2.0 * result.log_likelihood +
               penalty * std::log(static_cast<double>(std::max<std::size_t>(1, result.observed_values)));

  std::vector<double> errors(spec.size(), kNaN);
  if (options.standard_errors && spec.size() > 0) {
    std::string trouble;
    errors = standard_errors(spec, evaluator, to_search(spec, values, scales), active, trouble);
    if (!trouble.empty()) result.warnings.push_back("no standard errors: " + trouble);
  }
  for (std::size_t p = 0; p < spec.size(); ++p) {
    ParameterEstimate estimate;
    estimate.name = spec.parameters[p].name;
    estimate.kind = kind_name(spec.parameters[p].kind);
    estimate.value = values(static_cast<Eigen::Index>(p));
    estimate.standard_error = errors[p];
    estimate.start = start(static_cast<Eigen::Index>(p));
    estimate.at_zero = !active[p];
    result.estimates.push_back(estimate);
  }
  if (result.message.empty())
    result.message = result.status == FitStatus::converged ? "converged" : status_name(result.status);
  if (result.status != FitStatus::converged)
    result.warnings.push_back("the fit did not converge (" + result.message +
                              "); the best model found is returned");
  return result;
}

std::string write_fit_report_json(const FitResult& result, const std::string& model_path,
                                  const std::string& input_path, std::size_t rows) {
  using detail::OrderedJson;
  auto number = [](double value) { return std::isfinite(value) ? OrderedJson(value) : OrderedJson(nullptr); };
  OrderedJson root = OrderedJson::object();
  root["statewise_version"] = STATEWISE_VERSION;
  root["command"] = "fit";
  root["model"] = model_path;
  root["input"] = input_path;
  root["rows"] = rows;
  root["observed_values"] = result.observed_values;
  root["method"] = result.method;
  root["status"] = status_name(result.status);
  root["converged"] = result.status == FitStatus::converged;
  root["message"] = result.message;
  root["iterations"] = OrderedJson{{"em", result.em_iterations}, {"mle", result.mle_iterations}};
  root["log_likelihood"] = number(result.log_likelihood);
  root["parameters"] = result.parameters;
  root["diffuse_states"] = result.diffuse_states;
  root["aic"] = number(result.aic);
  root["bic"] = number(result.bic);
  OrderedJson estimates = OrderedJson::array();
  for (const auto& e : result.estimates)
    estimates.push_back(OrderedJson{{"name", e.name},
                                    {"kind", e.kind},
                                    {"value", number(e.value)},
                                    {"standard_error", number(e.standard_error)},
                                    {"at_zero", e.at_zero},
                                    {"start", number(e.start)}});
  root["estimates"] = estimates;
  root["warnings"] = result.warnings;
  return detail::dump_json_pretty(root);
}

}  // namespace statewise
