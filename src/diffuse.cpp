#include "statewise/diffuse.h"

#include <Eigen/Cholesky>
#include <cmath>
#include <numbers>

#include "detail/model_json.h"
#include "statewise/error.h"

namespace statewise {

namespace {

const double kLogTwoPi = std::log(2.0 * std::numbers::pi);

void symmetrize(Eigen::MatrixXd& matrix) {
  const Eigen::MatrixXd average = 0.5 * (matrix + matrix.transpose());
  matrix = average;
}

bool negligible(const Eigen::MatrixXd& diffuse) {
  return diffuse.size() == 0 || diffuse.cwiseAbs().maxCoeff() <= kDiffuseTolerance;
}

// The state augmented with its previous value, z_t = (x_t, x_{t-1}):
//   z_t = [A 0; I 0] z_{t-1} + [B; 0] u_{t-1} + [w_t; 0],  y_t = [C 0] z_t + v_t,
// so that the smoothed covariance of z_t holds Cov(x_t, x_{t-1} | all data). The previous value of
// the first row does not exist; it is a fixed zero and never used.
StateSpaceModel augmented_with_previous(const StateSpaceModel& model) {
  const Eigen::Index n = model.state_count(), m = model.channel_count(), p = model.input_count();
  StateSpaceModel big;
  big.observation_names = model.observation_names;
  big.input_names = model.input_names;
  for (const auto& name : model.state_names) big.state_names.push_back(name);
  for (const auto& name : model.state_names) big.state_names.push_back(name + "_previous");
  big.A = Eigen::MatrixXd::Zero(2 * n, 2 * n);
  big.A.topLeftCorner(n, n) = model.A;
  big.A.bottomLeftCorner(n, n).setIdentity();
  big.B = Eigen::MatrixXd::Zero(2 * n, p);
  big.B.topRows(n) = model.B;
  big.C = Eigen::MatrixXd::Zero(m, 2 * n);
  big.C.leftCols(n) = model.C;
  big.Q = Eigen::MatrixXd::Zero(2 * n, 2 * n);
  big.Q.topLeftCorner(n, n) = model.Q;
  big.R = model.R;
  big.initial_mean = Eigen::VectorXd::Zero(2 * n);
  big.initial_mean.head(n) = model.initial_mean;
  big.initial_covariance = Eigen::MatrixXd::Zero(2 * n, 2 * n);
  big.initial_covariance.topLeftCorner(n, n) = model.initial_covariance;
  if (model.has_diffuse_states()) {
    big.diffuse.assign(static_cast<std::size_t>(2 * n), false);
    for (Eigen::Index i = 0; i < n; ++i)
      big.diffuse[static_cast<std::size_t>(i)] = model.diffuse[static_cast<std::size_t>(i)];
  }
  return big;
}

}  // namespace

Eigen::MatrixXd initial_diffuse_covariance(const StateSpaceModel& model) {
  const Eigen::Index n = model.state_count();
  Eigen::MatrixXd diffuse = Eigen::MatrixXd::Zero(n, n);
  for (std::size_t i = 0; i < model.diffuse.size(); ++i)
    if (model.diffuse[i]) diffuse(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(i)) = 1.0;
  return diffuse;
}

UnivariateRowResult univariate_update(const StateSpaceModel& model, const double* values,
                                      Eigen::VectorXd& mean, Eigen::MatrixXd& covariance,
                                      Eigen::MatrixXd* diffuse, std::vector<ScalarUpdate>* updates) {
  UnivariateRowResult result;
  const int m = model.channel_count();
  std::vector<int> observed;
  for (int c = 0; c < m; ++c)
    if (!std::isnan(values[c])) observed.push_back(c);
  const auto k = static_cast<Eigen::Index>(observed.size());
  if (k == 0) return result;

  // Decorrelate the observed values (D&K 2012, section 6.4.3): with R_o = P' L D L' P (pivoted,
  // L unit lower triangular), y* = L^-1 P y_o and Z* = L^-1 P C_o have independent noise of
  // variances D, and the Jacobian of the change is 1, so the likelihood is unchanged.
  Eigen::MatrixXd Z(k, model.state_count());
  Eigen::VectorXd y(k), noise(k);
  Eigen::MatrixXd R_o(k, k);
  bool diagonal = true;
  for (Eigen::Index a = 0; a < k; ++a) {
    const int ca = observed[static_cast<std::size_t>(a)];
    Z.row(a) = model.C.row(ca);
    y(a) = values[ca];
    for (Eigen::Index b = 0; b < k; ++b) {
      R_o(a, b) = model.R(ca, observed[static_cast<std::size_t>(b)]);
      if (a != b && R_o(a, b) != 0.0) diagonal = false;
    }
  }
  if (diagonal) {
    noise = R_o.diagonal();
  } else {
    const Eigen::LDLT<Eigen::MatrixXd> ldlt(R_o);
    y = ldlt.transpositionsP() * y;
    Z = ldlt.transpositionsP() * Z;
    ldlt.matrixL().solveInPlace(y);
    ldlt.matrixL().solveInPlace(Z);
    noise = ldlt.vectorD().cwiseMax(0.0);
  }

  Eigen::VectorXd M_star, M_inf;
  for (Eigen::Index i = 0; i < k; ++i) {
    const Eigen::VectorXd z = Z.row(i).transpose();
    const double v = y(i) - z.dot(mean);
    M_star.noalias() = covariance * z;
    const double F_star = z.dot(M_star) + noise(i);
    double F_inf = 0.0;
    if (diffuse != nullptr) {
      M_inf.noalias() = *diffuse * z;
      F_inf = z.dot(M_inf);
      if (!(F_inf > kDiffuseTolerance * z.squaredNorm())) F_inf = 0.0;
    }
    if (F_inf > 0.0) {
      // D&K 2012, section 5.2.1 (one value): K0 = M_inf / F_inf, a += K0 v,
      // P_* += M_inf M_inf' F_* / F_inf² - (M_* M_inf' + M_inf M_*') / F_inf, P_inf -= M_inf M_inf' / F_inf.
      mean += M_inf * (v / F_inf);
      covariance += M_inf * M_inf.transpose() * (F_star / (F_inf * F_inf)) -
                    (M_star * M_inf.transpose() + M_inf * M_star.transpose()) / F_inf;
      *diffuse -= M_inf * M_inf.transpose() / F_inf;
      symmetrize(*diffuse);
      result.log_likelihood += -0.5 * (kLogTwoPi + std::log(F_inf));
      ++result.diffuse_values;
    } else {
      if (!(F_star > 0.0) || !std::isfinite(F_star)) {
        result.status =
            std::isfinite(F_star) ? StepStatus::singular_innovation_covariance : StepStatus::not_finite;
        return result;
      }
      // Ordinary update of one value: K = M_* / F_*, a += K v, P_* -= M_* M_*' / F_*.
      mean += M_star * (v / F_star);
      covariance -= M_star * M_star.transpose() / F_star;
      result.log_likelihood += -0.5 * (kLogTwoPi + std::log(F_star) + v * v / F_star);
      result.nis += v * v / F_star;
      ++result.proper_values;
    }
    symmetrize(covariance);
    if (updates != nullptr) {
      ScalarUpdate update;
      update.z = z;
      update.v = v;
      update.F_star = F_star;
      update.F_inf = F_inf;
      update.M_star = M_star;
      if (F_inf > 0.0) update.M_inf = M_inf;
      updates->push_back(std::move(update));
    }
  }
  if (!mean.allFinite() || !covariance.allFinite()) result.status = StepStatus::not_finite;
  return result;
}

namespace {

// The forward pass, keeping what the smoother needs when `keep` is true.
struct ForwardPass {
  SeriesLikelihood likelihood;
  std::vector<Eigen::VectorXd> predicted_mean;        // a_t
  std::vector<Eigen::MatrixXd> predicted_covariance;  // P_*,t
  std::vector<Eigen::MatrixXd> predicted_diffuse;     // P_inf,t for t < diffuse_rows
  std::vector<std::vector<ScalarUpdate>> updates;     // per row
};

ForwardPass forward(const StateSpaceModel& model, const ObservationSeries& series, bool keep) {
  ForwardPass pass;
  const Transition transition = model_transition(model);
  Eigen::VectorXd mean = model.initial_mean, predicted_mean(model.state_count());
  Eigen::MatrixXd covariance = model.initial_covariance, predicted(model.state_count(), model.state_count());
  Eigen::MatrixXd workspace(model.state_count(), model.state_count());
  Eigen::MatrixXd diffuse = initial_diffuse_covariance(model);
  bool in_diffuse_phase = model.has_diffuse_states();
  const std::size_t rows = series.rows();
  if (keep) {
    pass.predicted_mean.reserve(rows);
    pass.predicted_covariance.reserve(rows);
    pass.updates.resize(rows);
  }
  for (std::size_t t = 0; t < rows; ++t) {
    if (t > 0) {
      predict_moments(transition, mean, covariance, series.row_inputs(t - 1), predicted_mean, predicted,
                      workspace);
      mean.swap(predicted_mean);
      covariance.swap(predicted);
      if (in_diffuse_phase) {
        diffuse = model.A * diffuse * model.A.transpose();
        symmetrize(diffuse);
      }
    }
    if (keep) {
      pass.predicted_mean.push_back(mean);
      pass.predicted_covariance.push_back(covariance);
      if (in_diffuse_phase) pass.predicted_diffuse.push_back(diffuse);
    }
    const double* values = series.row_values(t);
    for (int c = 0; c < series.channels; ++c)
      if (!std::isnan(values[c])) ++pass.likelihood.observed_values;
    const UnivariateRowResult row =
        univariate_update(model, values, mean, covariance, in_diffuse_phase ? &diffuse : nullptr,
                          keep ? &pass.updates[t] : nullptr);
    if (row.status != StepStatus::ok) {
      pass.likelihood.status = row.status;
      pass.likelihood.row = t;
      return pass;
    }
    pass.likelihood.log_likelihood += row.log_likelihood;
    if (in_diffuse_phase) {
      ++pass.likelihood.diffuse_rows;
      if (negligible(diffuse)) {
        in_diffuse_phase = false;
        diffuse.setZero();
      }
    }
  }
  pass.likelihood.diffuse_resolved = !in_diffuse_phase;
  if (!std::isfinite(pass.likelihood.log_likelihood)) pass.likelihood.status = StepStatus::not_finite;
  return pass;
}

}  // namespace

SeriesLikelihood exact_log_likelihood(const StateSpaceModel& model, const ObservationSeries& series) {
  return forward(model, series, false).likelihood;
}

ExactSmoothing exact_smooth(const StateSpaceModel& model, const ObservationSeries& series,
                            bool with_lag_one) {
  const StateSpaceModel big = with_lag_one ? augmented_with_previous(model) : StateSpaceModel{};
  const StateSpaceModel& run = with_lag_one ? big : model;
  ForwardPass pass = forward(run, series, true);
  ExactSmoothing result;
  result.likelihood = pass.likelihood;
  if (pass.likelihood.status != StepStatus::ok) return result;

  const Eigen::Index n = run.state_count();
  const std::size_t rows = series.rows();
  const std::size_t d = pass.predicted_diffuse.size();
  std::vector<Eigen::VectorXd> means(rows);
  std::vector<Eigen::MatrixXd> covariances(rows);
  // r = r0 + r1/kappa + ..., N = N0 + N1/kappa + N2/kappa² + ... (D&K 2012, section 5.3).
  Eigen::VectorXd r0 = Eigen::VectorXd::Zero(n), r1 = Eigen::VectorXd::Zero(n);
  Eigen::MatrixXd N0 = Eigen::MatrixXd::Zero(n, n), N1 = N0, N2 = N0;
  const Eigen::MatrixXd identity = Eigen::MatrixXd::Identity(n, n);
  for (std::size_t t = rows; t-- > 0;) {
    const bool diffuse_row = t < d;
    const auto& updates = pass.updates[t];
    for (std::size_t e = updates.size(); e-- > 0;) {
      const ScalarUpdate& u = updates[e];
      if (u.F_inf > 0.0) {
        // L0 = I - K0 z', L1 = -K1 z' with K0 = M_inf/F_inf, K1 = M_*/F_inf - M_inf F_*/F_inf².
        const Eigen::VectorXd K0 = u.M_inf / u.F_inf;
        const Eigen::VectorXd K1 = u.M_star / u.F_inf - u.M_inf * (u.F_star / (u.F_inf * u.F_inf));
        const Eigen::MatrixXd L0 = identity - K0 * u.z.transpose();
        const Eigen::MatrixXd L1 = -K1 * u.z.transpose();
        const Eigen::MatrixXd zz = u.z * u.z.transpose();
        const Eigen::VectorXd new_r1 = u.z * (u.v / u.F_inf) + L0.transpose() * r1 + L1.transpose() * r0;
        const Eigen::VectorXd new_r0 = L0.transpose() * r0;
        const Eigen::MatrixXd new_N0 = L0.transpose() * N0 * L0;
        const Eigen::MatrixXd new_N1 =
            zz / u.F_inf + L0.transpose() * N1 * L0 + L1.transpose() * N0 * L0 + L0.transpose() * N0 * L1;
        const Eigen::MatrixXd new_N2 = -zz * (u.F_star / (u.F_inf * u.F_inf)) + L0.transpose() * N2 * L0 +
                                       L0.transpose() * N1 * L1 + L1.transpose() * N1 * L0 +
                                       L1.transpose() * N0 * L1;
        r0 = new_r0;
        r1 = new_r1;
        N0 = new_N0;
        N1 = new_N1;
        N2 = new_N2;
      } else {
        // L = I - K z' with K = M_*/F_*: r = z v/F + L'r, N = z z'/F + L'NL (D&K 2012, section 6.4.4).
        const Eigen::VectorXd K = u.M_star / u.F_star;
        const double Kr0 = K.dot(r0);
        r0 = u.z * (u.v / u.F_star) + r0 - u.z * Kr0;
        auto apply_L = [&](Eigen::MatrixXd& N) {
          // L'NL = N - z (K'N) - (N K) z' + z (K'NK) z'
          const Eigen::VectorXd NK = N * K;
          const double KNK = K.dot(NK);
          N -= u.z * NK.transpose() + NK * u.z.transpose();
          N += (KNK * u.z) * u.z.transpose();
        };
        apply_L(N0);
        N0 += u.z * u.z.transpose() / u.F_star;
        if (diffuse_row) {
          r1 -= u.z * K.dot(r1);
          apply_L(N1);
          apply_L(N2);
        }
      }
    }
    const Eigen::VectorXd& a = pass.predicted_mean[t];
    const Eigen::MatrixXd& P = pass.predicted_covariance[t];
    means[t] = a + P * r0;
    covariances[t] = P - P * N0 * P;
    if (diffuse_row) {
      const Eigen::MatrixXd& Pinf = pass.predicted_diffuse[t];
      means[t] += Pinf * r1;
      const Eigen::MatrixXd cross = Pinf * N1 * P;
      covariances[t] -= cross + cross.transpose() + Pinf * N2 * Pinf;
    }
    symmetrize(covariances[t]);
    if (t > 0) {
      // Back over the transition from row t-1: r_{t-1} = A' r_t, N_{t-1} = A' N_t A.
      r0 = run.A.transpose() * r0;
      N0 = run.A.transpose() * N0 * run.A;
      if (t - 1 < d) {
        r1 = run.A.transpose() * r1;
        N1 = run.A.transpose() * N1 * run.A;
        N2 = run.A.transpose() * N2 * run.A;
      }
    }
  }

  const Eigen::Index states = model.state_count();
  result.track = StateTrack(static_cast<int>(states));
  result.track.reserve(rows);
  for (std::size_t t = 0; t < rows; ++t) {
    if (!means[t].allFinite() || !covariances[t].allFinite()) {
      result.likelihood.status = StepStatus::not_finite;
      result.likelihood.row = t;
      return result;
    }
    result.track.push_back(means[t].head(states), covariances[t].topLeftCorner(states, states));
  }
  if (with_lag_one) {
    result.lag_one.resize(rows);
    for (std::size_t t = 0; t < rows; ++t)
      result.lag_one[t] = t == 0 ? Eigen::MatrixXd::Zero(states, states)
                                 : Eigen::MatrixXd(covariances[t].topRightCorner(states, states));
  }
  return result;
}

namespace detail {

std::vector<bool> parse_diffuse_states(const JsonContext& context, const nlohmann::json& value,
                                       const std::vector<std::string>& state_names) {
  std::vector<bool> flags(state_names.size(), false);
  if (value.is_boolean()) {
    flags.assign(state_names.size(), value.get<bool>());
    return flags;
  }
  if (!value.is_array())
    context.fail("initial.diffuse", "expected true, false or a list of state names, got " + describe(value));
  for (std::size_t i = 0; i < value.size(); ++i) {
    const std::string key = "initial.diffuse[" + std::to_string(i) + "]";
    if (!value[i].is_string()) context.fail(key, "expected a state name, got " + describe(value[i]));
    const std::string name = value[i].get<std::string>();
    bool found = false;
    for (std::size_t s = 0; s < state_names.size(); ++s)
      if (state_names[s] == name) {
        if (flags[s]) context.fail(key, "the state \"" + name + "\" is listed twice");
        flags[s] = found = true;
      }
    if (!found) context.fail(key, "no state is named \"" + name + "\"" + did_you_mean(name, state_names));
  }
  return flags;
}

}  // namespace detail

}  // namespace statewise
