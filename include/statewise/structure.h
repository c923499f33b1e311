#pragma once
/// \file structure.h
/// Whether a model can work at all, before any estimate is trusted: observability of (A, C) and which
/// state directions the channels cannot see, controllability of (A, Q^(1/2)) (which directions the
/// process noise reaches), the eigenvalues of A and a stability verdict, the steady state of the
/// filter from the discrete algebraic Riccati equation, and, with a log, how much of each channel
/// is missing. Methods and tolerances in docs/algorithms.md, section "Structural checks".

#include <Eigen/Core>
#include <complex>
#include <cstddef>
#include <string>
#include <vector>

#include "statewise/model.h"
#include "statewise/time_axis.h"

namespace statewise {

/// Condition number of the observability matrix above which a full-rank model gets a warning that
/// some direction is barely seen (half of double precision's digits lost).
inline constexpr double kConditionWarning = 1e8;
/// Stability margin: a discrete eigenvalue with | |λ| - 1 | <= kStabilityTolerance is on the unit
/// circle; a continuous one with |Re λ| <= kStabilityTolerance * ||F||_1 is on the imaginary axis.
/// Wide enough for the error of eigenvalues of a 2×2 Jordan block (about sqrt(machine epsilon)).
inline constexpr double kStabilityTolerance = 1e-6;

/// Where eigenvalues lie relative to the stability boundary.
enum class Stability {
  stable,    ///< all strictly inside (discrete: |λ| < 1; continuous: Re λ < 0)
  marginal,  ///< none outside, some on the boundary (e.g. a random walk or a constant)
  unstable,  ///< some outside (the state grows without bound)
};

/// A verdict in words: "stable", "on the stability boundary", "unstable".
const char* describe(Stability stability);
/// A verdict's name in JSON reports: "stable", "marginal", "unstable".
const char* stability_name(Stability stability);

/// Classifies eigenvalues of a discrete transition or a continuous drift (`drift_norm` = ||F||_1,
/// used for the continuous tolerance).
Stability classify(const std::vector<std::complex<double>>& eigenvalues, TimeDomain domain,
                   double drift_norm);

/// A direction in state space, with a readable description such as `position` or
/// `0.7071*level - 0.7071*offset`.
struct StateDirection {
  Eigen::VectorXd vector;   ///< unit length, largest component positive
  std::string description;  ///< in the model's state names
};

/// The outcome of a rank test on [C; C A; ...; C A^{n-1}] (observability) or
/// [S, A S, ..., A^{n-1} S] with S = Q^(1/2) (controllability).
struct RankTest {
  int rank = 0;    ///< numerical rank
  int states = 0;  ///< n (full rank)
  /// Singular values at or below this count as zero: max(rows, cols) * machine epsilon * the largest
  /// singular value (the convention of numpy.linalg.matrix_rank and MATLAB's rank).
  double tolerance = 0.0;
  double condition_number = 0.0;  ///< largest / n-th singular value; infinite when rank < n
  /// A basis of the missing directions, made readable (reduced row echelon form, so a single state
  /// shows as its name): for observability the directions no channel sees; for controllability the
  /// directions no process noise reaches.
  std::vector<StateDirection> directions;
  std::vector<std::complex<double>> modes;        ///< eigenvalues of A restricted to those directions
  Stability modes_stability = Stability::stable;  ///< of `modes`; stable when there are none
};

/// Observability of (A, C): rank of [C; C A; ...; C A^{n-1}] by SVD, the unobservable subspace (its
/// null space) and the eigenvalues of A there. (A, C) is detectable when those modes are stable.
RankTest observability(const StateSpaceModel& model);

/// Controllability of (A, Q^(1/2)), Q^(1/2) the symmetric square root: rank of the reachability
/// matrix by SVD, the directions outside its range and the eigenvalues of A on them. (A, Q^(1/2)) is
/// stabilizable when those modes are stable.
RankTest noise_controllability(const StateSpaceModel& model);

/// How the Riccati solve ended.
enum class RiccatiStatus {
  stabilizing,      ///< converged, and the error dynamics A (I - K C) are stable: the filter settles
  not_stabilizing,  ///< converged, but A (I - K C) has eigenvalues on the unit circle
  no_solution,      ///< no stabilizing solution: (A, C) is not detectable, or the doubling did not converge
  not_computed,     ///< not attempted (see `message`)
};

/// The filter's steady state: the solution P of the discrete algebraic Riccati equation
///   P = A P A' - A P C' (C P C' + R)^{-1} C P A' + Q,
/// the steady-state predicted covariance, and what follows from it.
struct RiccatiSolution {
  RiccatiStatus status = RiccatiStatus::not_computed;
  int doublings = 0;                     ///< doubling steps taken
  Eigen::MatrixXd predicted_covariance;  ///< P (before each update)
  Eigen::MatrixXd filtered_covariance;   ///< P - K S K' (after each update)
  Eigen::MatrixXd gain;                  ///< K = P C' S^{-1}, n×m, S = C P C' + R
  double spectral_radius = 0.0;          ///< of A (I - K C), the predicted error's dynamics
  double relative_residual = 0.0;        ///< ||P - Riccati(P)||_F / ||P||_F
  std::string message;                   ///< why not computed, or what went wrong
};

/// Most doubling steps tried; each squares the horizon, so 100 covers any convergent case.
inline constexpr int kMaxDoublings = 100;

/// Solves the filter's DARE for a discrete (A, C, Q, R) with the structure-preserving doubling
/// algorithm (E. K.-W. Chu, H.-Y. Fan, W.-W. Lin, C.-S. Wang, Structure-preserving algorithms for
/// periodic discrete-time algebraic Riccati equations, Int. J. Control 77(8), 2004; convergence:
/// W.-W. Lin, S.-F. Xu, SIAM J. Matrix Anal. Appl. 28(1), 2006). Needs R positive definite
/// (otherwise not_computed). m = 0 channels is allowed (then it solves P = A P A' + Q).
RiccatiSolution solve_filter_riccati(const Eigen::MatrixXd& A, const Eigen::MatrixXd& C,
                                     const Eigen::MatrixXd& Q, const Eigen::MatrixXd& R);

/// Everything `check` says about a model.
struct StructureReport {
  RankTest observability;                         ///< of (A, C) (continuous: (F, C))
  RankTest noise_controllability;                 ///< of (A, Q^(1/2)) (continuous: (F, Qc^(1/2)))
  std::vector<std::complex<double>> eigenvalues;  ///< of A (continuous: of F)
  Stability stability = Stability::stable;        ///< of A
  bool detectable = true;                         ///< every unobservable mode is stable
  bool stabilizable = true;                       ///< every mode the noise does not reach is stable
  /// Seconds per step of the Riccati part: the model's step, `dt` for a continuous model, 0 when
  /// rows are steps.
  double riccati_step = 0.0;
  RiccatiSolution riccati;            ///< the steady state
  bool can_work = true;               ///< false: the estimates cannot settle (see `verdict`)
  std::string verdict;                ///< one plain sentence saying why it can or cannot work
  std::vector<std::string> warnings;  ///< plain sentences
};

/// Analyzes a model. A continuous model's steady state is computed for the model discretized over
/// `dt` seconds (not computed when dt is 0; `riccati.message` says so). The model cannot work when
/// some direction no channel sees is not stable (not detectable), or when the Riccati doubling does
/// not converge. A
/// converged solution that is not stabilizing (noise-free directions on the stability boundary, e.g.
/// a constant offset) still works, with a warning: the filter keeps learning them ever more precisely.
StructureReport analyze_structure(const StateSpaceModel& model, double dt);

/// Missing values and gaps of one channel in a log.
struct ChannelCoverage {
  std::string name;                        ///< the channel's CSV column
  std::size_t observed = 0;                ///< rows with a value
  std::size_t missing = 0;                 ///< rows without
  double missing_fraction = 0.0;           ///< missing / rows (NaN for an empty log)
  std::size_t longest_missing_run = 0;     ///< most consecutive rows without a value
  std::size_t longest_run_first_line = 0;  ///< line of the first row of that run (0 when none)
  /// Longest time without a value: between two consecutive values, or from the log's first row to
  /// the first value, or from the last value to the log's last row (the whole span when none).
  /// NaN without a time column.
  double longest_gap_seconds = 0.0;
  std::size_t longest_gap_from_line = 0;  ///< line where that stretch starts
  std::size_t longest_gap_to_line = 0;    ///< line where it ends
};

/// The time axis and channels of a whole log.
struct LogCoverage {
  std::size_t rows = 0;                   ///< timeline rows (after merging repeated times)
  bool has_time = false;                  ///< the model has a time column
  double span_seconds = 0.0;              ///< last time - first time
  double median_gap_seconds = 0.0;        ///< median of the gaps between consecutive rows
  double largest_gap_seconds = 0.0;       ///< largest of them
  std::size_t largest_gap_line = 0;       ///< line of the row after the largest gap
  std::vector<ChannelCoverage> channels;  ///< one per channel, model order
};

/// Gathers LogCoverage from timeline rows, in order.
class CoverageAccumulator {
 public:
  /// Prepares for a model's channels.
  explicit CoverageAccumulator(const StateSpaceModel& model);
  /// Adds one timeline row.
  void add(const TimelineRow& row);
  /// The coverage so far.
  LogCoverage result() const;

 private:
  struct Running {
    std::size_t observed = 0, missing = 0, run = 0, run_first_line = 0;
    std::size_t longest_run = 0, longest_run_first_line = 0;
    bool seen = false;
    double last_seen_time = 0.0;
    std::size_t last_seen_line = 0;
    double longest_gap = 0.0;
    std::size_t gap_from = 0, gap_to = 0;
  };
  std::vector<std::string> names_;
  std::vector<Running> running_;
  std::vector<double> gaps_;
  bool has_time_;
  std::size_t rows_ = 0, first_line_ = 0, last_line_ = 0, largest_gap_line_ = 0;
  double last_time_ = 0.0, largest_gap_ = 0.0;
};

/// What `check` reports, for its JSON form.
struct CheckReport {
  std::string model_path;                  ///< the model file as given
  std::string input_path;                  ///< the log as given; empty when none
  const StateSpaceModel* model = nullptr;  ///< the model checked (names, dimensions)
  StructureReport structure;               ///< the analysis
  std::vector<std::string>
      channels_left_out;      ///< channels with no value in the log, left out of the analysis
  bool has_coverage = false;  ///< a log was read
  LogCoverage coverage;       ///< its coverage
};

/// The check report as pretty JSON (keys in docs/cli.md, section "statewise check"); NaN and
/// infinities become null.
std::string write_check_report_json(const CheckReport& report);

}  // namespace statewise
