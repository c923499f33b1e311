#pragma once
// Small models shared by the engine tests (invented for the tests).

#include <Eigen/Core>

#include "statewise/model.h"

namespace statewise::testing {

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
