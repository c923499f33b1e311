#include "statewise/structure.h"

#include <Eigen/Eigenvalues>
#include <Eigen/LU>
#include <Eigen/SVD>
#include <algorithm>
#include <charconv>
#include <cmath>
#include <limits>

#include "detail/json_util.h"
#include "statewise/discretize.h"
#include "statewise/version.h"

namespace statewise {

namespace {

constexpr double kInfinity = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kEpsilon = std::numeric_limits<double>::epsilon();
// Components of a readable direction below this (relative to its largest) are written as zero.
constexpr double kDirectionCutoff = 1e-10;

std::string number_text(double value, int digits = 6) {
  if (std::isinf(value)) return value > 0 ? "infinite" : "-infinite";
  char buffer[64];
  const auto result =
      std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::general, digits);
  return std::string(buffer, result.ptr);
}

std::string eigenvalue_text(const std::complex<double>& value) {
  if (std::abs(value.imag()) <= 1e-12 * std::max(1.0, std::abs(value))) return number_text(value.real());
  return number_text(value.real()) + (value.imag() < 0 ? "-" : "+") + number_text(std::abs(value.imag())) +
         "i";
}

std::string list_text(const std::vector<std::string>& items) {
  std::string out;
  for (std::size_t i = 0; i < items.size(); ++i) {
    if (i > 0) out += i + 1 == items.size() ? " and " : ", ";
    out += items[i];
  }
  return out;
}

std::vector<std::complex<double>> eigenvalues_of(const Eigen::MatrixXd& matrix) {
  std::vector<std::complex<double>> values;
  if (matrix.rows() == 0) return values;
  const Eigen::EigenSolver<Eigen::MatrixXd> solver(matrix, false);
  for (Eigen::Index i = 0; i < solver.eigenvalues().size(); ++i) values.push_back(solver.eigenvalues()(i));
  std::sort(values.begin(), values.end(), [](const auto& a, const auto& b) {
    return std::abs(a) != std::abs(b) ? std::abs(a) > std::abs(b) : a.imag() > b.imag();
  });
  return values;
}

double one_norm(const Eigen::MatrixXd& matrix) {
  return matrix.size() == 0 ? 0.0 : matrix.cwiseAbs().colwise().sum().maxCoeff();
}

// A basis of the same subspace in reduced row echelon form (partial pivoting), each vector scaled to
// unit length with its largest component positive: a subspace holding a single state's axis shows
// that axis exactly.
std::vector<Eigen::VectorXd> readable_basis(const Eigen::MatrixXd& basis) {
  Eigen::MatrixXd rows = basis.transpose();
  const Eigen::Index r = rows.rows(), n = rows.cols();
  Eigen::Index pivot_row = 0;
  for (Eigen::Index column = 0; column < n && pivot_row < r; ++column) {
    Eigen::Index best = 0;
    const double size = rows.col(column).segment(pivot_row, r - pivot_row).cwiseAbs().maxCoeff(&best);
    if (size < 1e-9) continue;
    rows.row(pivot_row).swap(rows.row(pivot_row + best));
    rows.row(pivot_row) /= rows(pivot_row, column);
    for (Eigen::Index i = 0; i < r; ++i)
      if (i != pivot_row) rows.row(i) -= rows(i, column) * rows.row(pivot_row);
    ++pivot_row;
  }
  std::vector<Eigen::VectorXd> vectors;
  for (Eigen::Index i = 0; i < r; ++i) {
    Eigen::VectorXd v = rows.row(i).transpose();
    const double largest = v.cwiseAbs().maxCoeff();
    for (Eigen::Index k = 0; k < n; ++k)
      if (std::abs(v(k)) <= kDirectionCutoff * largest) v(k) = 0.0;
    Eigen::Index at = 0;
    v.cwiseAbs().maxCoeff(&at);
    if (v(at) < 0) v = -v;
    vectors.push_back(v / v.norm());
  }
  return vectors;
}

std::string describe_direction(const Eigen::VectorXd& vector, const std::vector<std::string>& names) {
  std::vector<Eigen::Index> nonzero;
  for (Eigen::Index k = 0; k < vector.size(); ++k)
    if (vector(k) != 0.0) nonzero.push_back(k);
  if (nonzero.size() == 1) return names[static_cast<std::size_t>(nonzero[0])];
  std::string out;
  for (const Eigen::Index k : nonzero) {
    const double coefficient = vector(k);
    if (out.empty())
      out += coefficient < 0 ? "-" : "";
    else
      out += coefficient < 0 ? " - " : " + ";
    out += number_text(std::abs(coefficient), 4) + "*" + names[static_cast<std::size_t>(k)];
  }
  return out;
}

// Rank of K = [M; M P; M P^2; ...; M P^{n-1}] and the eigenvalues of P on its null space (which is
// P-invariant). Observability: M = C, P = A. Controllability of (A, S): M = S', P = A' (the
// reachability matrix transposed); the eigenvalues of A' there are those of A on the quotient.
RankTest krylov_rank_test(const Eigen::MatrixXd& first, const Eigen::MatrixXd& power,
                          const StateSpaceModel& model) {
  const Eigen::Index n = power.rows();
  RankTest test;
  test.states = static_cast<int>(n);
  Eigen::MatrixXd stacked(first.rows() * n, n);
  Eigen::MatrixXd block = first;
  for (Eigen::Index k = 0; k < n; ++k) {
    stacked.middleRows(k * first.rows(), first.rows()) = block;
    block = (block * power).eval();
  }
  Eigen::MatrixXd null_space;
  if (stacked.rows() == 0) {
    test.rank = 0;
    test.condition_number = kInfinity;
    null_space = Eigen::MatrixXd::Identity(n, n);
  } else {
    const Eigen::JacobiSVD<Eigen::MatrixXd> svd(stacked, Eigen::ComputeFullV);
    const Eigen::VectorXd& singular = svd.singularValues();
    const double largest = singular.size() > 0 ? singular(0) : 0.0;
    test.tolerance = static_cast<double>(std::max(stacked.rows(), stacked.cols())) * kEpsilon * largest;
    for (Eigen::Index i = 0; i < singular.size(); ++i)
      if (singular(i) > test.tolerance) ++test.rank;
    test.condition_number = test.rank == n ? largest / singular(n - 1) : kInfinity;
    null_space = svd.matrixV().rightCols(n - test.rank);
  }
  if (null_space.cols() > 0) {
    for (const Eigen::VectorXd& v : readable_basis(null_space))
      test.directions.push_back({v, describe_direction(v, model.state_names)});
    test.modes = eigenvalues_of(null_space.transpose() * power * null_space);
  }
  test.modes_stability = classify(test.modes, model.domain, one_norm(model.A));
  return test;
}

// The symmetric square root of a PSD matrix (negative rounding-level eigenvalues taken as zero).
Eigen::MatrixXd symmetric_square_root(const Eigen::MatrixXd& matrix) {
  if (matrix.size() == 0) return matrix;
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> solver(matrix);
  const Eigen::VectorXd roots = solver.eigenvalues().cwiseMax(0.0).cwiseSqrt();
  return solver.eigenvectors() * roots.asDiagonal() * solver.eigenvectors().transpose();
}

void symmetrize(Eigen::MatrixXd& matrix) { matrix = (0.5 * (matrix + matrix.transpose())).eval(); }

std::string directions_text(const RankTest& test) {
  std::vector<std::string> names;
  for (const auto& direction : test.directions) names.push_back("\"" + direction.description + "\"");
  return list_text(names);
}

std::string modes_text(const RankTest& test) {
  std::vector<std::string> values;
  for (const auto& mode : test.modes) values.push_back(eigenvalue_text(mode));
  return list_text(values);
}

}  // namespace

const char* describe(Stability stability) {
  switch (stability) {
    case Stability::stable:
      return "stable";
    case Stability::marginal:
      return "on the stability boundary";
    case Stability::unstable:
      return "unstable";
  }
  return "unknown";
}

const char* stability_name(Stability stability) {
  switch (stability) {
    case Stability::stable:
      return "stable";
    case Stability::marginal:
      return "marginal";
    case Stability::unstable:
      return "unstable";
  }
  return "unknown";
}

Stability classify(const std::vector<std::complex<double>>& eigenvalues, TimeDomain domain,
                   double drift_norm) {
  Stability result = Stability::stable;
  for (const auto& value : eigenvalues) {
    double outside = 0.0, margin = 0.0;  // > margin: outside; within ±margin: on the boundary
    if (domain == TimeDomain::continuous) {
      outside = value.real();
      margin = kStabilityTolerance * drift_norm;
    } else {
      outside = std::abs(value) - 1.0;
      margin = kStabilityTolerance;
    }
    if (outside > margin) return Stability::unstable;
    if (outside >= -margin) result = Stability::marginal;
  }
  return result;
}

RankTest observability(const StateSpaceModel& model) { return krylov_rank_test(model.C, model.A, model); }

RankTest noise_controllability(const StateSpaceModel& model) {
  return krylov_rank_test(symmetric_square_root(model.Q), model.A.transpose(), model);
}

namespace {

// Spectral radius of the predicted error's dynamics A (I - K C), K = P C' (C P C' + R)^{-1}.
double error_radius(const Eigen::MatrixXd& A, const Eigen::MatrixXd& C, const Eigen::MatrixXd& R,
                    const Eigen::MatrixXd& P) {
  Eigen::MatrixXd closed = A;
  if (C.rows() > 0) {
    const Eigen::MatrixXd S = C * P * C.transpose() + R;
    const Eigen::MatrixXd gain = S.ldlt().solve(C * P).transpose();
    closed = A * (Eigen::MatrixXd::Identity(A.rows(), A.cols()) - gain * C);
  }
  double radius = 0.0;
  for (const auto& value : eigenvalues_of(closed)) radius = std::max(radius, std::abs(value));
  return radius;
}

bool stabilizing(const Eigen::MatrixXd& A, const Eigen::MatrixXd& C, const Eigen::MatrixXd& R,
                 const Eigen::MatrixXd& P) {
  return error_radius(A, C, R, P) < 1.0 - kStabilityTolerance;
}

// The plain Riccati recursion P <- A (P - P C' (C P C' + R)^{-1} C P) A' + Q from `start`; true when the
// relative change fell below 1e-13 within kMaxRecursionSteps steps, with the limit in `start`.
constexpr int kMaxRecursionSteps = 20000;
bool iterate_riccati(const Eigen::MatrixXd& A, const Eigen::MatrixXd& C, const Eigen::MatrixXd& Q,
                     const Eigen::MatrixXd& R, Eigen::MatrixXd& start) {
  Eigen::MatrixXd P = start;
  for (int step = 0; step < kMaxRecursionSteps; ++step) {
    Eigen::MatrixXd filtered = P;
    if (C.rows() > 0) {
      const Eigen::MatrixXd S = C * P * C.transpose() + R;
      const Eigen::MatrixXd CP = C * P;
      filtered -= CP.transpose() * S.ldlt().solve(CP);
    }
    Eigen::MatrixXd next = A * filtered * A.transpose() + Q;
    symmetrize(next);
    if (!next.allFinite()) return false;
    const double change = (next - P).norm();
    P = std::move(next);
    if (change <= 1e-13 * P.norm()) {
      start = P;
      return true;
    }
  }
  return false;
}

}  // namespace

RiccatiSolution solve_filter_riccati(const Eigen::MatrixXd& A, const Eigen::MatrixXd& C,
                                     const Eigen::MatrixXd& Q, const Eigen::MatrixXd& R) {
  RiccatiSolution solution;
  const Eigen::Index n = A.rows(), m = C.rows();
  const Eigen::MatrixXd identity = Eigen::MatrixXd::Identity(n, n);
  // The filter's DARE P = A P A' - A P C' (C P C' + R)^{-1} C P A' + Q is the control DARE
  // X = F' X (I + G X)^{-1} F + H with F = A', G = C' R^{-1} C, H = Q.
  Eigen::MatrixXd G = Eigen::MatrixXd::Zero(n, n);
  if (m > 0) {
    const Eigen::LLT<Eigen::MatrixXd> r_factor(R);
    if (r_factor.info() != Eigen::Success || (r_factor.matrixLLT().diagonal().array() <= 0.0).any()) {
      solution.message =
          "R is not positive definite (a channel without measurement noise), which the doubling "
          "algorithm needs";
      return solution;
    }
    G = C.transpose() * r_factor.solve(C);
    symmetrize(G);
  }
  const Eigen::MatrixXd information = G;  // C' R^{-1} C
  // Structure-preserving doubling (Chu, Fan, Lin, Wang 2004; Lin and Xu 2006, eq. (1.5)):
  //   F_{k+1} = F_k (I + G_k H_k)^{-1} F_k
  //   G_{k+1} = G_k + F_k (I + G_k H_k)^{-1} G_k F_k'
  //   H_{k+1} = H_k + F_k' H_k (I + G_k H_k)^{-1} F_k
  // H_k -> X quadratically when a stabilizing solution exists (H_k is the Riccati recursion's value
  // after 2^k steps from P = Q).
  Eigen::MatrixXd F = A.transpose(), H = Q;
  symmetrize(H);
  bool converged = false;
  for (int k = 0; k < kMaxDoublings; ++k) {
    const Eigen::PartialPivLU<Eigen::MatrixXd> w(identity + G * H);
    const Eigen::MatrixXd w_f = w.solve(F);
    const Eigen::MatrixXd w_g = w.solve(G);
    Eigen::MatrixXd next_h = H + F.transpose() * H * w_f;
    Eigen::MatrixXd next_g = G + F * w_g * F.transpose();
    F = (F * w_f).eval();
    symmetrize(next_h);
    symmetrize(next_g);
    solution.doublings = k + 1;
    if (!next_h.allFinite() || !next_g.allFinite() || !F.allFinite()) break;
    const double change = (next_h - H).norm();
    H = std::move(next_h);
    G = std::move(next_g);
    if (change <= 1e-14 * H.norm()) {
      converged = true;
      break;
    }
  }
  if (!converged) {
    solution.status = RiccatiStatus::no_solution;
    solution.message = "the doubling iteration did not converge in " + std::to_string(solution.doublings) +
                       " steps: the covariance grows without bound in some direction";
    return solution;
  }
  // Started from P = Q, the doubling converges to the maximal solution, which is not stabilizing when
  // an unstable direction gets no process noise (x = 1.5 x observed: P = 0 rather than R (1.5^2 - 1)).
  // The filter itself, started from a positive definite P, reaches the stabilizing one (C. E. de Souza,
  // M. R. Gevers, G. C. Goodwin, IEEE Trans. Automatic Control 31(9), 1986): try that recursion.
  if (!stabilizing(A, C, R, H)) {
    Eigen::MatrixXd restart = H + (1.0 + H.norm()) * identity;
    if (iterate_riccati(A, C, Q, R, restart) && stabilizing(A, C, R, restart)) H = restart;
  }
  const Eigen::MatrixXd& P = H;
  solution.predicted_covariance = P;
  if (m > 0) {
    const Eigen::MatrixXd S = C * P * C.transpose() + R;
    const Eigen::MatrixXd PCt = P * C.transpose();
    solution.gain = S.ldlt().solve(PCt.transpose()).transpose();  // K = P C' S^{-1}
    // P_f = P - K S K' = (I + P C' R^{-1} C)^{-1} P (matrix inversion lemma): the second form has no
    // subtraction, so it keeps its digits when the update shrinks P a lot (large Q/R).
    solution.filtered_covariance = (identity + P * information).partialPivLu().solve(P);
    symmetrize(solution.filtered_covariance);
  } else {
    solution.gain = Eigen::MatrixXd::Zero(n, 0);
    solution.filtered_covariance = P;
  }
  const double radius = error_radius(A, C, R, P);
  solution.spectral_radius = radius;
  // Residual of the DARE in its filter form: A P_f A' + Q is the next prediction.
  const Eigen::MatrixXd next = A * solution.filtered_covariance * A.transpose() + Q;
  solution.relative_residual = P.norm() > 0.0 ? (next - P).norm() / P.norm() : (next - P).norm();
  solution.status =
      radius < 1.0 - kStabilityTolerance ? RiccatiStatus::stabilizing : RiccatiStatus::not_stabilizing;
  return solution;
}

StructureReport analyze_structure(const StateSpaceModel& model, double dt) {
  StructureReport report;
  report.observability = observability(model);
  report.noise_controllability = noise_controllability(model);
  report.eigenvalues = eigenvalues_of(model.A);
  report.stability = classify(report.eigenvalues, model.domain, one_norm(model.A));
  report.detectable = report.observability.modes_stability == Stability::stable;
  report.stabilizable = report.noise_controllability.modes_stability == Stability::stable;

  if (report.observability.rank == report.observability.states &&
      report.observability.condition_number > kConditionWarning)
    report.warnings.push_back("the observability matrix is nearly singular (condition number " +
                              number_text(report.observability.condition_number, 3) +
                              "): some direction is barely seen from the channels, and its estimate will be "
                              "uncertain and sensitive to the model");

  // The steady state, for one step of the model (continuous: for steps of dt seconds).
  Eigen::MatrixXd A = model.A, Q = model.Q;
  bool riccati_possible = true;
  if (model.domain == TimeDomain::continuous) {
    if (dt > 0.0) {
      const Transition step = discretize_continuous(model.A, model.B, model.Q, dt);
      A = step.A;
      Q = step.Q;
      report.riccati_step = dt;
    } else {
      riccati_possible = false;
      report.riccati.message =
          "a continuous model's steady state depends on the time between rows; give a log "
          "or --dt";
    }
  } else {
    report.riccati_step = model.step;
  }
  if (!report.detectable) {
    // A stabilizing solution needs (A, C) detectable, whatever the step. Without it the doubling may
    // even stop on a huge finite P (the unseen variance grows by a fixed amount per step, tiny relative
    // to P), so it is not run.
    report.riccati.status = RiccatiStatus::no_solution;
    report.riccati.message = "none exists, because a direction the channels cannot see is not stable";
  } else if (riccati_possible) {
    report.riccati = solve_filter_riccati(A, model.C, Q, model.R);
  }

  const RankTest& seen = report.observability;
  const std::string drift = model.domain == TimeDomain::continuous ? "F" : "A";
  const bool observable = seen.rank == seen.states;
  if (!report.detectable) {
    const bool several = seen.directions.size() > 1;
    report.can_work = false;
    report.verdict = std::string("The model cannot work: the ") + (several ? "directions " : "direction ") +
                     directions_text(seen) + " cannot be seen from the channels and " +
                     (several ? "do" : "does") + " not decay on " + (several ? "their" : "its") +
                     " own (eigenvalue" + (seen.modes.size() > 1 ? "s " : " ") + modes_text(seen) + " of " +
                     drift + " there), so " + (several ? "their" : "its") + " uncertainty never shrinks.";
  } else if (report.riccati.status == RiccatiStatus::no_solution) {
    report.can_work = false;
    report.verdict = "The model cannot work: the Riccati equation has no stabilizing solution (" +
                     report.riccati.message + "), so the filter's uncertainty does not settle.";
  } else {
    report.verdict = "The model can work: ";
    report.verdict += observable ? "the channels see every direction of the state"
                                 : "the directions the channels cannot see (" + directions_text(seen) +
                                       ") decay on their own";
    switch (report.riccati.status) {
      case RiccatiStatus::stabilizing:
        report.verdict += ", and the filter settles to a steady state.";
        break;
      case RiccatiStatus::not_stabilizing:
        report.verdict += ", and the filter's uncertainty stays bounded.";
        report.warnings.push_back(
            "the steady-state solution is not stabilizing (the error dynamics A(I - KC) have spectral "
            "radius " +
            number_text(report.riccati.spectral_radius) +
            "): directions without process noise sit on the stability boundary (" +
            (report.noise_controllability.directions.empty()
                 ? std::string("none found")
                 : directions_text(report.noise_controllability)) +
            "), so the filter keeps learning them ever more precisely instead of settling; expected for "
            "constant "
            "or noise-free states");
        break;
      default:
        report.verdict += "; its steady state was not computed.";
        break;
    }
  }
  return report;
}

CoverageAccumulator::CoverageAccumulator(const StateSpaceModel& model)
    : names_(model.observation_names),
      running_(model.observation_names.size()),
      has_time_(!model.time_column.empty()) {}

void CoverageAccumulator::add(const TimelineRow& row) {
  const std::size_t line = row.row.line;
  if (rows_ == 0) first_line_ = line;
  if (rows_ > 0 && has_time_) {
    gaps_.push_back(row.gap.seconds);
    if (row.gap.seconds > largest_gap_) {
      largest_gap_ = row.gap.seconds;
      largest_gap_line_ = line;
    }
  }
  ++rows_;
  last_time_ = row.time;
  last_line_ = line;
  for (std::size_t c = 0; c < running_.size(); ++c) {
    Running& r = running_[c];
    if (std::isnan(row.row.values[c])) {
      ++r.missing;
      if (r.run++ == 0) r.run_first_line = line;
      if (r.run > r.longest_run) {
        r.longest_run = r.run;
        r.longest_run_first_line = r.run_first_line;
      }
      continue;
    }
    ++r.observed;
    r.run = 0;
    // Time without a value: since the previous value, or since the log's first row.
    const double since = r.seen ? row.time - r.last_seen_time : row.time;
    if (has_time_ && since > r.longest_gap) {
      r.longest_gap = since;
      r.gap_from = r.seen ? r.last_seen_line : first_line_;
      r.gap_to = line;
    }
    r.seen = true;
    r.last_seen_time = row.time;
    r.last_seen_line = line;
  }
}

LogCoverage CoverageAccumulator::result() const {
  LogCoverage coverage;
  coverage.rows = rows_;
  coverage.has_time = has_time_;
  coverage.span_seconds = has_time_ ? last_time_ : kNaN;
  coverage.largest_gap_seconds = has_time_ ? largest_gap_ : kNaN;
  coverage.largest_gap_line = largest_gap_line_;
  if (has_time_ && !gaps_.empty()) {
    std::vector<double> sorted = gaps_;
    std::sort(sorted.begin(), sorted.end());
    const std::size_t middle = sorted.size() / 2;
    coverage.median_gap_seconds =
        sorted.size() % 2 == 1 ? sorted[middle] : 0.5 * (sorted[middle - 1] + sorted[middle]);
  } else {
    coverage.median_gap_seconds = has_time_ ? 0.0 : kNaN;
  }
  for (std::size_t c = 0; c < running_.size(); ++c) {
    const Running& r = running_[c];
    ChannelCoverage channel;
    channel.name = names_[c];
    channel.observed = r.observed;
    channel.missing = r.missing;
    channel.missing_fraction = rows_ > 0 ? static_cast<double>(r.missing) / static_cast<double>(rows_) : kNaN;
    channel.longest_missing_run = r.longest_run;
    channel.longest_run_first_line = r.longest_run_first_line;
    channel.longest_gap_seconds = kNaN;
    if (has_time_ && rows_ > 0) {
      channel.longest_gap_seconds = r.longest_gap;
      channel.longest_gap_from_line = r.gap_from;
      channel.longest_gap_to_line = r.gap_to;
      // From the last value (or the first row) to the log's last row.
      const double tail = r.seen ? last_time_ - r.last_seen_time : last_time_;
      if (tail > channel.longest_gap_seconds || (!r.seen && rows_ > 0)) {
        channel.longest_gap_seconds = tail;
        channel.longest_gap_from_line = r.seen ? r.last_seen_line : first_line_;
        channel.longest_gap_to_line = last_line_;
      }
    }
    coverage.channels.push_back(channel);
  }
  return coverage;
}

namespace {

using detail::OrderedJson;

OrderedJson complex_list(const std::vector<std::complex<double>>& values) {
  OrderedJson list = OrderedJson::array();
  for (const auto& value : values)
    list.push_back(OrderedJson{{"re", value.real()}, {"im", value.imag()}, {"abs", std::abs(value)}});
  return list;
}

OrderedJson rank_json(const RankTest& test) {
  OrderedJson out = OrderedJson::object();
  out["rank"] = test.rank;
  out["states"] = test.states;
  out["tolerance"] = test.tolerance;
  out["condition_number"] =
      std::isfinite(test.condition_number) ? OrderedJson(test.condition_number) : OrderedJson();
  OrderedJson directions = OrderedJson::array();
  for (const auto& direction : test.directions)
    directions.push_back(OrderedJson{{"description", direction.description},
                                     {"vector", detail::vector_to_json(direction.vector)}});
  out["missing_directions"] = directions;
  out["modes"] = complex_list(test.modes);
  out["modes_stability"] = stability_name(test.modes_stability);
  return out;
}

const char* status_name(RiccatiStatus status) {
  switch (status) {
    case RiccatiStatus::stabilizing:
      return "stabilizing";
    case RiccatiStatus::not_stabilizing:
      return "not_stabilizing";
    case RiccatiStatus::no_solution:
      return "no_solution";
    case RiccatiStatus::not_computed:
      return "not_computed";
  }
  return "unknown";
}

OrderedJson sd_json(const Eigen::MatrixXd& covariance) {
  return detail::vector_to_json(covariance.diagonal().cwiseMax(0.0).cwiseSqrt());
}

OrderedJson nullable(double value) { return std::isfinite(value) ? OrderedJson(value) : OrderedJson(); }

}  // namespace

std::string write_check_report_json(const CheckReport& report) {
  const StructureReport& s = report.structure;
  const StateSpaceModel& model = *report.model;
  OrderedJson root = OrderedJson::object();
  root["statewise_version"] = STATEWISE_VERSION;
  root["command"] = "check";
  root["model"] = report.model_path;
  root["input"] = report.input_path.empty() ? OrderedJson() : OrderedJson(report.input_path);
  root["domain"] = domain_name(model.domain);
  root["states"] = model.state_names;
  root["channels"] = model.observation_names;
  root["channels_left_out"] = report.channels_left_out;
  root["can_work"] = s.can_work;
  root["verdict"] = s.verdict;
  root["observability"] = rank_json(s.observability);
  root["observability"]["detectable"] = s.detectable;
  root["noise_controllability"] = rank_json(s.noise_controllability);
  root["noise_controllability"]["stabilizable"] = s.stabilizable;
  root["eigenvalues"] = complex_list(s.eigenvalues);
  root["stability"] = stability_name(s.stability);
  OrderedJson riccati = OrderedJson::object();
  riccati["status"] = status_name(s.riccati.status);
  riccati["step_seconds"] = s.riccati_step > 0.0 ? OrderedJson(s.riccati_step) : OrderedJson();
  if (s.riccati.status == RiccatiStatus::stabilizing || s.riccati.status == RiccatiStatus::not_stabilizing) {
    riccati["doublings"] = s.riccati.doublings;
    riccati["predicted_covariance"] = detail::matrix_to_json(s.riccati.predicted_covariance);
    riccati["predicted_sd"] = sd_json(s.riccati.predicted_covariance);
    riccati["filtered_sd"] = sd_json(s.riccati.filtered_covariance);
    riccati["gain"] = detail::matrix_to_json(s.riccati.gain);
    riccati["spectral_radius"] = s.riccati.spectral_radius;
    riccati["relative_residual"] = s.riccati.relative_residual;
  }
  riccati["message"] = s.riccati.message;
  root["steady_state"] = riccati;
  if (report.has_coverage) {
    const LogCoverage& c = report.coverage;
    OrderedJson data = OrderedJson::object();
    data["rows"] = c.rows;
    data["span_seconds"] = nullable(c.span_seconds);
    data["median_gap_seconds"] = nullable(c.median_gap_seconds);
    data["largest_gap_seconds"] = nullable(c.largest_gap_seconds);
    data["largest_gap_line"] = c.largest_gap_line;
    OrderedJson channels = OrderedJson::array();
    for (const auto& channel : c.channels)
      channels.push_back(OrderedJson{{"name", channel.name},
                                     {"observed", channel.observed},
                                     {"missing", channel.missing},
                                     {"missing_fraction", nullable(channel.missing_fraction)},
                                     {"longest_missing_run", channel.longest_missing_run},
                                     {"longest_missing_run_first_line", channel.longest_run_first_line},
                                     {"longest_gap_seconds", nullable(channel.longest_gap_seconds)},
                                     {"longest_gap_from_line", channel.longest_gap_from_line},
                                     {"longest_gap_to_line", channel.longest_gap_to_line}});
    data["channels"] = channels;
    root["data"] = data;
  } else {
    root["data"] = OrderedJson();
  }
  root["warnings"] = s.warnings;
  return detail::dump_json_pretty(root);
}

}  // namespace statewise
