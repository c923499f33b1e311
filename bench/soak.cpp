// Numerical soak: filters and smooths a very long simulated log of a 4-state level + trend + AR(2)
// model with 2 channels and missing values, and checks at every step that the filtered and smoothed
// covariances stay symmetric positive semidefinite, that the filter settles on the Riccati (DARE)
// solution and that the smoother settles on the fixed point of its covariance recursion.
//
// Usage: statewise_soak [STEPS [BLOCK]]   (defaults 100000000 and 10000000)
// Prints the worst deviations of every check and exits 1 when one exceeds its tolerance.
//
// Smoothing 1e8 rows cannot hold every row's moments (160 bytes per row here), so the backward
// pass is checkpointed: the forward pass saves the filtered moments (and the simulator's state) at
// the first row of every BLOCK rows; then, block by block from the end, it recomputes the block's
// filtered moments from its checkpoint with the very same arithmetic, appends the smoothed moment of
// the next block's first row and runs the library's RTS pass (rts_smooth) over the block. The RTS
// step for row t needs only row t's filtered moments and row t+1's smoothed ones, so the result is
// identical, bit for bit, to one backward pass over all rows; memory is BLOCK rows instead of STEPS.

#include <sys/resource.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <limits>
#include <vector>

#include <Eigen/Cholesky>
#include <Eigen/Core>
#include <Eigen/LU>

#include "statewise/filter.h"
#include "statewise/model.h"
#include "statewise/smoother.h"
#include "statewise/structure.h"

namespace {

using statewise::StateSpaceModel;

constexpr int kStates = 4;
constexpr int kChannels = 2;
// Missing values come in bursts: in every period of kPeriod rows, channel 0 is missing on the first
// kFirstMissing rows and both channels on the next kBothMissing rows. Between bursts the filter and
// smoother settle again, so the steady-state checks run at the rows farthest from the bursts.
constexpr std::uint64_t kPeriod = 1000;
constexpr std::uint64_t kFirstMissing = 20;
constexpr std::uint64_t kBothMissing = 5;
constexpr std::uint64_t kFilterCheckRow = kPeriod - 1;  // last row before the next burst
constexpr std::uint64_t kSmootherCheckRow = 500;        // midway between two bursts
constexpr double kSteadyTolerance = 1e-9;               // relative, Frobenius norm

// Level + trend + AR(2) (Harvey, Forecasting, Structural Time Series Models and the Kalman Filter,
// 1989, chapter 2): x = (level, trend, ar, ar_previous); channel 0 sees level + ar, channel 1 the level.
StateSpaceModel soak_model() {
  StateSpaceModel model;
  model.state_names = {"level", "trend", "ar", "ar_previous"};
  model.observation_names = {"y_with_ar", "y_level"};
  model.A = Eigen::MatrixXd::Zero(kStates, kStates);
  model.A << 1, 1, 0, 0,  //
      0, 1, 0, 0,         //
      0, 0, 0.6, 0.2,     //
      0, 0, 1, 0;
  model.B = Eigen::MatrixXd::Zero(kStates, 0);
  model.C = Eigen::MatrixXd::Zero(kChannels, kStates);
  model.C << 1, 0, 1, 0,  //
      1, 0, 0, 0;
  model.Q = Eigen::Vector4d(0.5, 0.05, 1.0, 0.0).asDiagonal();
  model.R = Eigen::Vector2d(0.5, 2.0).asDiagonal();
  model.initial_mean = Eigen::VectorXd::Zero(kStates);
  model.initial_covariance = 100.0 * Eigen::MatrixXd::Identity(kStates, kStates);
  statewise::validate_model(model, "soak model");
  return model;
}

// splitmix64 (Steele, Lea, Flood, Fast splittable pseudorandom number generators, OOPSLA 2014).
struct Random {
  std::uint64_t state = 0x5eed;
  std::uint64_t next() {
    std::uint64_t z = (state += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
  }
  double uniform() { return (static_cast<double>(next() >> 11) + 0.5) * 0x1.0p-53; }
  // Box-Muller, one normal per call.
  double normal() { return std::sqrt(-2.0 * std::log(uniform())) * std::cos(6.283185307179586 * uniform()); }
};

// The simulated system: its true state and the generator; copied into checkpoints.
struct Simulator {
  Eigen::Vector4d x = Eigen::Vector4d::Zero();
  Random random;
  // Produces row t's values (NaN = missing).
  void row(const StateSpaceModel& model, std::uint64_t t, double* values) {
    if (t > 0) {
      Eigen::Vector4d noise;
      for (int i = 0; i < kStates; ++i) noise(i) = std::sqrt(model.Q(i, i)) * random.normal();
      x = model.A * x + noise;
    }
    for (int j = 0; j < kChannels; ++j) values[j] = model.C.row(j).dot(x) + std::sqrt(model.R(j, j)) * random.normal();
    const std::uint64_t phase = t % kPeriod;
    if (phase < kFirstMissing + kBothMissing) values[0] = std::numeric_limits<double>::quiet_NaN();
    if (phase >= kFirstMissing && phase < kFirstMissing + kBothMissing)
      values[1] = std::numeric_limits<double>::quiet_NaN();
  }
};

// Worst deviations seen by the per-step checks of one kind of covariance.
struct Worst {
  double asymmetry = 0.0;          // max |P - P'| / max |P|
  double smallest_pivot = 1e300;   // min of LDLT's D / max |P|
  double steady_deviation = 0.0;   // max ||P - P_steady||_F / ||P_steady||_F at the check rows
  std::uint64_t steady_checks = 0;
  std::uint64_t rows = 0;

  template <typename Matrix>
  void check(const Matrix& covariance) {
    const Eigen::Matrix4d p = covariance;
    const double scale = p.cwiseAbs().maxCoeff();
    asymmetry = std::max(asymmetry, (p - p.transpose()).cwiseAbs().maxCoeff() / scale);
    const Eigen::LDLT<Eigen::Matrix4d> ldlt(p);
    smallest_pivot = std::min(smallest_pivot, ldlt.vectorD().minCoeff() / scale);
    ++rows;
  }
  template <typename Matrix>
  void check_steady(const Matrix& covariance, const Eigen::MatrixXd& steady) {
    steady_deviation = std::max(steady_deviation, (Eigen::MatrixXd(covariance) - steady).norm() / steady.norm());
    ++steady_checks;
  }
};

struct Checkpoint {
  std::uint64_t row = 0;
  Eigen::VectorXd mean;
  Eigen::MatrixXd covariance;
  Simulator simulator;  // state after producing `row`
};

// Mixes row t's smoothed moments into 64 bits (splitmix64's finalizer over the entries' bit patterns).
template <typename Mean, typename Covariance>
std::uint64_t digest(std::uint64_t t, const Mean& mean, const Covariance& covariance) {
  Random mixer{t};
  std::uint64_t bits = 0;
  for (Eigen::Index i = 0; i < mean.size(); ++i) {
    std::memcpy(&bits, &mean(i), sizeof bits);
    mixer.state ^= bits;
    mixer.next();
  }
  for (Eigen::Index j = 0; j < covariance.cols(); ++j)
    for (Eigen::Index i = 0; i < covariance.rows(); ++i) {
      std::memcpy(&bits, &covariance(i, j), sizeof bits);
      mixer.state ^= bits;
      mixer.next();
    }
  return mixer.next();
}

double seconds_since(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

}  // namespace

int main(int argc, char** argv) {
  using namespace statewise;
  const std::uint64_t steps = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 100000000ULL;
  const std::uint64_t block = argc > 2 ? std::strtoull(argv[2], nullptr, 10) : 10000000ULL;
  if (steps < 2 * kPeriod || block < 2) return 2;
  const StateSpaceModel model = soak_model();

  // The steady states the filter and the smoother must settle on.
  const RiccatiSolution riccati = solve_filter_riccati(model.A, model.C, model.Q, model.R);
  if (riccati.status != RiccatiStatus::stabilizing) {
    std::printf("Riccati: %s\n", riccati.message.c_str());
    return 1;
  }
  const Eigen::MatrixXd& filtered_steady = riccati.filtered_covariance;
  const Eigen::MatrixXd& predicted_steady = riccati.predicted_covariance;
  // RTS in steady state: J = P_f A' P_p^-1 and the smoothed covariance is the fixed point of
  // P_s = P_f + J (P_s - P_p) J' (Rauch, Tung, Striebel 1965), a Stein equation whose iteration
  // contracts at the rate of J's spectral radius squared.
  const Eigen::MatrixXd gain = filtered_steady * model.A.transpose() * predicted_steady.inverse();
  Eigen::MatrixXd smoothed_steady = filtered_steady;
  for (int k = 0; k < 100000; ++k) {
    const Eigen::MatrixXd next = filtered_steady + gain * (smoothed_steady - predicted_steady) * gain.transpose();
    const double change = (next - smoothed_steady).norm();
    smoothed_steady = next;
    if (change <= 1e-17 * smoothed_steady.norm()) break;
  }
  std::printf("soak: %llu steps, blocks of %llu rows; closed-loop spectral radius %.4f (%d doublings)\n",
              static_cast<unsigned long long>(steps), static_cast<unsigned long long>(block), riccati.spectral_radius,
              riccati.doublings);

  TransitionSchedule schedule;
  schedule.transitions.push_back(model_transition(model));
  KalmanFilter filter(model);
  InnovationRecord record = make_innovation_record(kChannels);
  Simulator simulator;
  std::vector<Checkpoint> checkpoints;
  Worst filtered;
  double values[kChannels];

  // Forward pass over all rows, saving a checkpoint at the start of each block.
  const auto start = std::chrono::steady_clock::now();
  for (std::uint64_t t = 0; t < steps; ++t) {
    simulator.row(model, t, values);
    if (t > 0) filter.predict(schedule.step(t - 1), nullptr);
    if (filter.update(values, record) != StepStatus::ok) {
      std::printf("filter failed at row %llu\n", static_cast<unsigned long long>(t));
      return 1;
    }
    filtered.check(filter.covariance());
    if (t % kPeriod == kFilterCheckRow && t >= kPeriod) filtered.check_steady(filter.covariance(), filtered_steady);
    if (t % block == 0) checkpoints.push_back({t, filter.mean(), filter.covariance(), simulator});
  }
  const double forward_seconds = seconds_since(start);

  // Backward pass, block by block from the end.
  Worst smoothed;
  // A digest of every smoothed mean and covariance entry's bits, independent of the order rows are
  // visited: the same for any BLOCK (the checkpointed pass is exact), which two block sizes show.
  std::uint64_t checksum = 0;
  Eigen::VectorXd carried_mean;
  Eigen::MatrixXd carried_covariance;
  for (std::size_t b = checkpoints.size(); b-- > 0;) {
    const Checkpoint& checkpoint = checkpoints[b];
    const std::uint64_t end = std::min(steps, checkpoint.row + block);
    StateTrack track(kStates);
    track.reserve(static_cast<std::size_t>(end - checkpoint.row) + 1);
    filter.set_state(checkpoint.mean, checkpoint.covariance);
    Simulator replay = checkpoint.simulator;
    track.push_back(filter.mean(), filter.covariance());
    for (std::uint64_t t = checkpoint.row + 1; t < end; ++t) {
      replay.row(model, t, values);
      filter.predict(schedule.step(t - 1), nullptr);
      if (filter.update(values, record) != StepStatus::ok) return 1;
      track.push_back(filter.mean(), filter.covariance());
    }
    if (end < steps) track.push_back(carried_mean, carried_covariance);  // row `end`, already smoothed
    const SmoothStatus status = rts_smooth(track, schedule, nullptr, 0);
    if (!status.ok) {
      std::printf("smoother failed: %s\n", status.message.c_str());
      return 1;
    }
    for (std::uint64_t t = checkpoint.row; t < end; ++t) {
      const auto covariance = track.covariance(static_cast<std::size_t>(t - checkpoint.row));
      smoothed.check(covariance);
      checksum ^= digest(t, track.mean(static_cast<std::size_t>(t - checkpoint.row)), covariance);
      if (t % kPeriod == kSmootherCheckRow && t >= kPeriod && t + kPeriod < steps)
        smoothed.check_steady(covariance, smoothed_steady);
    }
    carried_mean = track.mean(0);
    carried_covariance = track.covariance(0);
  }
  const double total_seconds = seconds_since(start);

  rusage usage{};
  getrusage(RUSAGE_SELF, &usage);
  const auto report = [](const char* name, const Worst& worst) {
    std::printf("%s: %llu rows, worst asymmetry %.3g, smallest LDLT pivot / max|P| %.3g, worst relative deviation "
                "from the steady state %.3g over %llu checks\n",
                name, static_cast<unsigned long long>(worst.rows), worst.asymmetry, worst.smallest_pivot,
                worst.steady_deviation, static_cast<unsigned long long>(worst.steady_checks));
  };
  report("filtered", filtered);
  report("smoothed", smoothed);
  std::printf("digest of the smoothed moments: %016llx\n", static_cast<unsigned long long>(checksum));
  std::printf("time: forward %.1f s, forward+backward %.1f s; peak memory %.1f MB\n", forward_seconds, total_seconds,
              static_cast<double>(usage.ru_maxrss) / 1024.0);
  // PSD with tolerance: a pivot may be negative only by rounding (n * machine epsilon of the scale).
  const double pivot_tolerance = -4.0 * kStates * std::numeric_limits<double>::epsilon();
  const bool passed = filtered.rows == steps && smoothed.rows == steps && filtered.asymmetry <= 1e-15 &&
                      smoothed.asymmetry <= 1e-15 && filtered.smallest_pivot >= pivot_tolerance &&
                      smoothed.smallest_pivot >= pivot_tolerance && filtered.steady_deviation <= kSteadyTolerance &&
                      smoothed.steady_deviation <= kSteadyTolerance && filtered.steady_checks > 0 &&
                      smoothed.steady_checks > 0;
  std::printf("%s\n", passed ? "all checks passed" : "CHECKS FAILED");
  return passed ? 0 : 1;
}
