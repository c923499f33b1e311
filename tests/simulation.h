#pragma once
// Simulated logs for the statistical tests: draws states and measurements from a model exactly as
// the model file describes them (docs/model-format.md), with a deterministic generator so that every
// run sees the same numbers.

#include <Eigen/Dense>
#include <cmath>
#include <cstdint>
#include <numbers>
#include <vector>

#include "statewise/model.h"

namespace statewise::testing {

// Deterministic pseudo-random numbers (a 64-bit linear congruential generator with Knuth's MMIX
// constants; normals by Box–Muller), so the tests need no library generator whose sequence could
// change between versions.
struct TestRandom {
  std::uint64_t state;
  double uniform() {
    state = state * 6364136223846793005ULL + 1442695040888963407ULL;
    return static_cast<double>(state >> 11) * 0x1.0p-53;
  }
  double normal() {
    const double u1 = uniform() + 1e-300, u2 = uniform();
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * std::numbers::pi * u2);
  }
};

// A factor F with F F' = M for a symmetric PSD M (eigendecomposition; independent of the library's).
inline Eigen::MatrixXd covariance_factor(const Eigen::MatrixXd& covariance) {
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> solver(covariance);
  return solver.eigenvectors() * solver.eigenvalues().cwiseMax(0.0).cwiseSqrt().asDiagonal();
}

struct SimulatedLog {
  int rows = 0;
  std::vector<double> values;  // rows × m, row-major
  std::vector<double> states;  // rows × n, row-major: the true states
};

// x_0 ~ N(initial), x_t = A x_{t-1} + w_t, y_t = C x_t + v_t with v_t ~ N(0, measurement_noise);
// inputs are zero. `measurement_noise` lets a test draw data with a different R than the model's.
inline SimulatedLog simulate(const StateSpaceModel& model, int rows, std::uint64_t seed,
                             const Eigen::MatrixXd& measurement_noise) {
  TestRandom random{seed};
  const int n = model.state_count(), m = model.channel_count();
  const Eigen::MatrixXd initial_factor = covariance_factor(model.initial_covariance);
  const Eigen::MatrixXd process_factor = covariance_factor(model.Q);
  const Eigen::MatrixXd noise_factor = covariance_factor(measurement_noise);
  auto draw = [&](int size) {
    Eigen::VectorXd z(size);
    for (int i = 0; i < size; ++i) z(i) = random.normal();
    return z;
  };
  SimulatedLog log;
  log.rows = rows;
  log.values.resize(static_cast<std::size_t>(rows * m));
  log.states.resize(static_cast<std::size_t>(rows * n));
  Eigen::VectorXd x = model.initial_mean + initial_factor * draw(n);
  for (int t = 0; t < rows; ++t) {
    if (t > 0) x = model.A * x + process_factor * draw(n);
    const Eigen::VectorXd y = model.C * x + noise_factor * draw(m);
    for (int c = 0; c < m; ++c) log.values[static_cast<std::size_t>(t * m + c)] = y(c);
    for (int i = 0; i < n; ++i) log.states[static_cast<std::size_t>(t * n + i)] = x(i);
  }
  return log;
}

inline SimulatedLog simulate(const StateSpaceModel& model, int rows, std::uint64_t seed) {
  return simulate(model, rows, seed, model.R);
}

}  // namespace statewise::testing
