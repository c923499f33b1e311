#include "statewise/discretize.h"

#include <bit>
#include <charconv>
#include <cmath>
#include <string>
#include <unsupported/Eigen/MatrixFunctions>

#include "statewise/error.h"

namespace statewise {

namespace {

void symmetrize(Eigen::MatrixXd& matrix) { matrix = (0.5 * (matrix + matrix.transpose())).eval(); }

Transition identity_transition(Eigen::Index n, Eigen::Index p) {
  return Transition{Eigen::MatrixXd::Identity(n, n), Eigen::MatrixXd::Zero(n, p),
                    Eigen::MatrixXd::Zero(n, n)};
}

std::string number_text(double value) {
  char buffer[64];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::general, 10);
  return std::string(buffer, result.ptr);
}

// A gap rounded to the nanosecond; gaps beyond a nanosecond count that int64 can hold stay as they are.
double rounded_gap(double seconds) {
  const double units = seconds / kGapResolution;
  return units < 9e18 ? std::round(units) * kGapResolution : seconds;
}

}  // namespace

Transition compose(const Transition& first, const Transition& second) {
  Transition result;
  result.A.noalias() = second.A * first.A;
  result.B.noalias() = second.A * first.B;
  result.B += second.B;
  const Eigen::MatrixXd propagated = second.A * first.Q;
  result.Q.noalias() = propagated * second.A.transpose();
  result.Q += second.Q;
  symmetrize(result.Q);
  return result;
}

Transition discretize_continuous(const Eigen::MatrixXd& F, const Eigen::MatrixXd& G,
                                 const Eigen::MatrixXd& Qc, double dt) {
  const Eigen::Index n = F.rows();
  const Eigen::Index p = G.cols();
  if (dt == 0.0) return identity_transition(n, p);
  // Halve the interval until ||F h||_1 <= 1. Van Loan's block holds e^{-F h}, which for a stable F
  // grows like e^{|λ| h}: without this, a gap of 30 time constants already loses digits and 100
  // overflows (tests/discretize_test.cpp, "long gaps of a stable model").
  double h = dt;
  int halvings = 0;
  double norm = (F * h).cwiseAbs().colwise().sum().maxCoeff();
  while (norm > 1.0 && halvings < 1000) {
    h *= 0.5;
    norm *= 0.5;
    ++halvings;
  }
  // Van Loan (1978), Theorem 1: exp([[-F, Qc], [0, F']] h) = [[., Φ^-1 Q], [0, Φ']] with Φ = e^{F h},
  // so Q = Φ (upper-right block).
  Eigen::MatrixXd block = Eigen::MatrixXd::Zero(2 * n, 2 * n);
  block.topLeftCorner(n, n) = -F * h;
  block.topRightCorner(n, n) = Qc * h;
  block.bottomRightCorner(n, n) = F.transpose() * h;
  const Eigen::MatrixXd exponential = block.exp();
  Transition step;
  step.A = exponential.bottomRightCorner(n, n).transpose();
  step.Q = step.A * exponential.topRightCorner(n, n);
  symmetrize(step.Q);
  // Zero-order hold (Van Loan 1978, same theorem with the input as a constant state):
  // exp([[F, G], [0, 0]] h) = [[Φ, ∫_0^h e^{F s} ds G], [0, I]].
  if (p > 0) {
    Eigen::MatrixXd hold = Eigen::MatrixXd::Zero(n + p, n + p);
    hold.topLeftCorner(n, n) = F * h;
    hold.topRightCorner(n, p) = G * h;
    step.B = hold.exp().topRightCorner(n, p);
  } else {
    step.B = Eigen::MatrixXd::Zero(n, 0);
  }
  for (int k = 0; k < halvings; ++k) step = compose(step, step);
  return step;
}

Transition repeat_transition(const Transition& step, std::int64_t k) {
  if (k == 1) return step;
  Transition result = identity_transition(step.A.rows(), step.B.cols());
  Transition power = step;
  bool first = true;
  // Binary powering: powers of one transition commute, so the order of composition is free.
  while (k > 0) {
    if (k & 1) {
      result = first ? power : compose(result, power);
      first = false;
    }
    k >>= 1;
    if (k > 0) power = compose(power, power);
  }
  return result;
}

Transition transition_for_gap(const StateSpaceModel& model, const Gap& gap) {
  if (model.domain == TimeDomain::continuous)
    return discretize_continuous(model.A, model.B, model.Q, rounded_gap(gap.seconds));
  return repeat_transition(model_transition(model), gap.steps);
}

StateSpaceModel discretize_model(const StateSpaceModel& model, double dt) {
  const SourceLocation where{"--dt", 0, 0, ""};
  if (!(dt > 0.0) || !std::isfinite(dt))
    raise_input_error(where, "expected a positive number of seconds, got " + number_text(dt));
  StateSpaceModel result = model;
  Transition transition;
  if (model.domain == TimeDomain::continuous) {
    transition = discretize_continuous(model.A, model.B, model.Q, dt);
  } else {
    if (!(model.step > 0.0))
      raise_input_error(where, "the model is already discrete and has no \"step\" to count " +
                                   number_text(dt) +
                                   " s in; expected a continuous model or a discrete one with a step");
    const double steps = dt / model.step;
    const double whole = std::round(steps);
    if (whole < 1.0 || std::abs(dt - whole * model.step) > kStepTolerance * model.step)
      raise_input_error(where, "expected a whole multiple of the model's step of " + number_text(model.step) +
                                   " s, got " + number_text(dt) + " (" + number_text(steps) + " steps)");
    transition = repeat_transition(model_transition(model), static_cast<std::int64_t>(whole));
  }
  result.domain = TimeDomain::discrete;
  result.step = dt;
  result.A = transition.A;
  result.B = transition.B;
  result.Q = transition.Q;
  return result;
}

TransitionCache::TransitionCache(const StateSpaceModel& model, std::size_t capacity)
    : domain_(model.domain), capacity_(capacity) {
  if (domain_ == TimeDomain::continuous) {
    F_ = model.A;
    G_ = model.B;
    Qc_ = model.Q;
  } else {
    one_step_ = model_transition(model);
  }
}

std::int64_t TransitionCache::key_of(const Gap& gap) const {
  if (domain_ == TimeDomain::discrete) return gap.steps;
  // The bits of the rounded gap: distinct for distinct non-negative doubles.
  return std::bit_cast<std::int64_t>(rounded_gap(gap.seconds));
}

std::uint32_t TransitionCache::index(const Gap& gap) {
  const std::int64_t key = key_of(gap);
  if (has_last_ && key == last_key_) return last_index_;
  const auto found = index_of_key_.find(key);
  if (found != index_of_key_.end()) {
    has_last_ = true;
    last_key_ = key;
    last_index_ = found->second;
    return found->second;
  }
  if (capacity_ > 0 && transitions_.size() >= capacity_) {
    transitions_.clear();
    index_of_key_.clear();
  }
  if (domain_ == TimeDomain::continuous)
    transitions_.push_back(discretize_continuous(F_, G_, Qc_, rounded_gap(gap.seconds)));
  else
    transitions_.push_back(repeat_transition(one_step_, gap.steps));
  ++discretizations_;
  const auto index = static_cast<std::uint32_t>(transitions_.size() - 1);
  index_of_key_.emplace(key, index);
  has_last_ = true;
  last_key_ = key;
  last_index_ = index;
  return index;
}

std::vector<Transition> TransitionCache::take_transitions() {
  index_of_key_.clear();
  has_last_ = false;
  std::vector<Transition> taken = std::move(transitions_);
  transitions_.clear();
  return taken;
}

}  // namespace statewise
