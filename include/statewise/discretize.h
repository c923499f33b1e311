#pragma once
/// \file discretize.h
/// Transitions across the gaps between log rows. A continuous-time model
///   dx = (F x + G u) dt + dW,   E[dW dW'] = Qc dt,   u held constant between rows (zero-order hold)
/// is discretized exactly for each gap with Van Loan's matrix exponentials (C. F. Van Loan, Computing
/// integrals involving the matrix exponential, IEEE Trans. Automatic Control 23(3), 1978); a discrete
/// model with a step is raised to the number of steps in the gap. TransitionCache computes each
/// distinct gap once, so a regular log costs one discretization. Equations in docs/algorithms.md.

#include <Eigen/Core>
#include <cstddef>
#include <cstdint>
#include <unordered_map>
#include <vector>

#include "statewise/filter.h"
#include "statewise/model.h"
#include "statewise/time_axis.h"

namespace statewise {

/// Gaps of a continuous model are rounded to a whole number of these seconds (one nanosecond) before
/// discretizing, so rows whose gaps agree to the nanosecond share one transition.
inline constexpr double kGapResolution = 1e-9;

/// The exact discretization over `dt` seconds (>= 0) of dx = (F x + G u) dt + dW with E[dW dW'] = Qc dt
/// and u held constant:
///   A = e^{F dt},   B = ∫_0^dt e^{F s} ds G,   Q = ∫_0^dt e^{F s} Qc e^{F' s} ds (symmetrized).
/// Van Loan's block exponentials give Q and B; when ||F dt||_1 > 1 the interval is first halved until
/// it is not, and the short transition is composed with itself (compose) once per halving, which
/// keeps the block exponential's e^{-F dt} from overflowing on long gaps of stable models.
/// `G` is n×p (p may be 0). dt = 0 gives the identity transition.
Transition discretize_continuous(const Eigen::MatrixXd& F, const Eigen::MatrixXd& G,
                                 const Eigen::MatrixXd& Qc, double dt);

/// `first` followed by `second`, with the same inputs over both:
///   A = A2 A1,   B = A2 B1 + B2,   Q = A2 Q1 A2' + Q2 (symmetrized).
Transition compose(const Transition& first, const Transition& second);

/// `k` >= 0 steps of a one-step transition with the inputs held:
///   A^k,   sum_{i<k} A^i B,   sum_{i<k} A^i Q A^i';
/// k = 0 gives the identity, k = 1 the step itself (unchanged). Uses O(log k) compositions.
Transition repeat_transition(const Transition& step, std::int64_t k);

/// The transition of `model` across one timeline gap: continuous models are discretized for
/// gap.seconds (rounded to kGapResolution), discrete ones repeated gap.steps times.
Transition transition_for_gap(const StateSpaceModel& model, const Gap& gap);

/// The discrete model equivalent to `model` over `dt` seconds, with "step" = dt: a continuous model
/// is discretized; a discrete model with a step is raised to k = dt / step steps, which must be a whole
/// number (within kStepTolerance of a step). Names, C, R, the time column and the initial prior are
/// kept. Raises InputError (location "--dt") for dt <= 0, a discrete model without a step, or dt not a
/// whole number of steps.
StateSpaceModel discretize_model(const StateSpaceModel& model, double dt);

/// Computes and remembers the transition of each distinct gap of one model (by steps for discrete
/// models, by gap rounded to kGapResolution for continuous ones).
class TransitionCache {
 public:
  /// Prepares for `model` (copied). `capacity` > 0 bounds how many transitions are kept (for a
  /// stream of ever-new gaps): a full cache then starts over, and indices and references returned
  /// before are no longer valid. 0 keeps everything, so indices stay valid (for a smoother schedule).
  explicit TransitionCache(const StateSpaceModel& model, std::size_t capacity = 0);

  /// Index of the transition for `gap`, computing it when the gap is new.
  std::uint32_t index(const Gap& gap);
  /// The transition at an index returned by index().
  const Transition& at(std::uint32_t index) const { return transitions_[index]; }
  /// The transition for `gap` (valid until the next call when the cache has a capacity).
  const Transition& transition(const Gap& gap) { return at(index(gap)); }
  /// Moves the distinct transitions out (for TransitionSchedule); the cache is empty afterwards.
  std::vector<Transition> take_transitions();
  /// Discretizations (or step powers) computed so far, for tests and reports.
  std::size_t discretizations() const { return discretizations_; }

 private:
  std::int64_t key_of(const Gap& gap) const;
  TimeDomain domain_;
  Eigen::MatrixXd F_, G_, Qc_;  // continuous models
  Transition one_step_;         // discrete models
  std::size_t capacity_;
  std::unordered_map<std::int64_t, std::uint32_t> index_of_key_;
  std::vector<Transition> transitions_;
  std::size_t discretizations_ = 0;
  bool has_last_ = false;  // the last lookup, which a regular log repeats row after row
  std::int64_t last_key_ = 0;
  std::uint32_t last_index_ = 0;
};

}  // namespace statewise
