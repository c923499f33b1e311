#pragma once
// Small models shared by the engine tests. Their numbers are invented for the tests (no outside source);
// what the tests check against is named in each test.

#include <Eigen/Dense>
#include <cmath>

#include "statewise/model.h"

namespace statewise::testing {

// The cold-room model of examples/cold-room (an invented demo model): two states, two probes.
inline StateSpaceModel cold_room_model() {
  StateSpaceModel model;
  model.state_names = {"air_temp", "warming_rate"};
  model.observation_names = {"probe_a", "probe_b"};
  model.A.resize(2, 2);
  model.A << 1.0, 1.0, 0.0, 0.98;
  model.B = Eigen::MatrixXd::Zero(2, 0);
  model.C.resize(2, 2);
  model.C << 1.0, 0.0, 1.0, 0.0;
  model.Q = Eigen::Vector2d(0.0004, 0.00002).asDiagonal();
  model.R = Eigen::Vector2d(0.01, 0.04).asDiagonal();
  model.initial_mean = Eigen::Vector2d(-18.0, 0.0);
  model.initial_covariance = Eigen::Vector2d(4.0, 0.01).asDiagonal();
  validate_model(model, "test");
  return model;
}

// Two states, two channels with correlated noise, one input: exercises every matrix.
inline StateSpaceModel two_channel_model() {
  StateSpaceModel model;
  model.state_names = {"a", "b"};
  model.observation_names = {"y1", "y2"};
  model.input_names = {"u"};
  model.A.resize(2, 2);
  model.A << 0.9, 0.2, -0.1, 0.8;
  model.B.resize(2, 1);
  model.B << 0.5, -0.25;
  model.C.resize(2, 2);
  model.C << 1.0, 0.0, 0.5, 1.0;
  model.Q.resize(2, 2);
  model.Q << 0.3, 0.05, 0.05, 0.2;
  model.R.resize(2, 2);
  model.R << 0.5, 0.1, 0.1, 0.4;
  model.initial_mean = Eigen::Vector2d(1.0, -2.0);
  model.initial_covariance.resize(2, 2);
  model.initial_covariance << 2.0, 0.3, 0.3, 1.0;
  validate_model(model, "test");
  return model;
}

// An ill-conditioned measurement: P0 = I (3 states), two channels H = [[1, 1, 1], [1, 1, 1 + δ]],
// R = δ² I, A = I, Q = 2^-20 I. For small δ (2^-27) the plain update cannot factor S on the first row.
inline StateSpaceModel ill_conditioned_model(double delta) {
  StateSpaceModel model;
  model.state_names = {"a", "b", "c"};
  model.observation_names = {"y1", "y2"};
  model.A = Eigen::MatrixXd::Identity(3, 3);
  model.B = Eigen::MatrixXd::Zero(3, 0);
  model.C.resize(2, 3);
  model.C << 1, 1, 1, 1, 1, 1 + delta;
  model.Q = std::ldexp(1.0, -20) * Eigen::MatrixXd::Identity(3, 3);
  model.R = delta * delta * Eigen::MatrixXd::Identity(2, 2);
  model.initial_mean = Eigen::VectorXd::Zero(3);
  model.initial_covariance = Eigen::MatrixXd::Identity(3, 3);
  validate_model(model, "test");
  return model;
}

// A damped oscillator plus a drifting offset, two channels, one input.
inline StateSpaceModel three_state_model() {
  StateSpaceModel model;
  model.state_names = {"position", "velocity", "offset"};
  model.observation_names = {"y1", "y2"};
  model.input_names = {"u"};
  model.A.resize(3, 3);
  model.A << 0.95, 0.1, 0.0, -0.2, 0.9, 0.0, 0.0, 0.0, 1.0;
  model.B.resize(3, 1);
  model.B << 0.0, 0.1, 0.0;
  model.C.resize(2, 3);
  model.C << 1.0, 0.0, 1.0, 0.0, 1.0, 0.0;
  model.Q = Eigen::Vector3d(0.01, 0.04, 0.001).asDiagonal();
  model.R.resize(2, 2);
  model.R << 0.2, 0.05, 0.05, 0.3;
  model.initial_mean = Eigen::Vector3d(0.5, 0.0, 1.0);
  model.initial_covariance = Eigen::Vector3d(1.0, 1.0, 4.0).asDiagonal();
  validate_model(model, "test");
  return model;
}

// Continuous time: position and velocity driven by white-noise acceleration of spectral density q,
// with a known acceleration input entering the velocity with gain -1 (gravity g as input: dv = -g dt).
inline StateSpaceModel kinematic_model(double q) {
  StateSpaceModel model;
  model.state_names = {"position", "velocity"};
  model.observation_names = {"height"};
  model.input_names = {"g"};
  model.A.resize(2, 2);
  model.A << 0, 1, 0, 0;
  model.B.resize(2, 1);
  model.B << 0, -1;
  model.C.resize(1, 2);
  model.C << 1, 0;
  model.Q.resize(2, 2);
  model.Q << 0, 0, 0, q;
  model.R = Eigen::MatrixXd::Constant(1, 1, 0.25);
  model.initial_mean = Eigen::Vector2d(100.0, 0.0);
  model.initial_covariance = Eigen::Vector2d(4.0, 1.0).asDiagonal();
  model.time_column = "time";
  model.domain = TimeDomain::continuous;
  validate_model(model, "test");
  return model;
}

}  // namespace statewise::testing
