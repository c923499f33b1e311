// Smoothing a whole log at once, with the model built in code rather than read from a file: the
// cold-room model of examples/cold-room/model.json, written in C++. Prints the same table as
// `statewise smooth -m examples/cold-room/model.json --missing -999 LOG.csv`.
//
// Usage: batch LOG.csv

#include <iostream>
#include <span>
#include <string>

#include <statewise/csv.h>
#include <statewise/output_table.h>
#include <statewise/series.h>
#include <statewise/smoother.h>

namespace {

statewise::StateSpaceModel cold_room_model() {
  statewise::StateSpaceModel model;
  model.state_names = {"air_temp", "warming_rate"};
  model.observation_names = {"probe_a", "probe_b"};  // CSV columns
  model.input_names = {"compressor"};
  model.time_column = "time";
  model.A.resize(2, 2);
  model.A << 1, 1,  // x_t = A x_{t-1} + B u_{t-1} + w_t
      0, 0.98;
  model.B.resize(2, 1);
  model.B << -0.06, 0;
  model.C.resize(2, 2);
  model.C << 1, 0,  // y_t = C x_t + v_t: both probes see the air temperature
      1, 0;
  model.Q = Eigen::Vector2d(0.0004, 0.00002).asDiagonal();
  model.R = Eigen::Vector2d(0.01, 0.04).asDiagonal();
  model.initial_mean = Eigen::Vector2d(-18, 0);
  model.initial_covariance = Eigen::Vector2d(4, 0.01).asDiagonal();
  statewise::validate_model(model, "cold_room_model()");  // raises InputError naming any problem
  return model;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::cerr << "usage: batch LOG.csv\n";
    return 2;
  }
  try {
    const statewise::StateSpaceModel model = cold_room_model();
    statewise::CsvOptions options;
    options.missing_tokens = {"-999"};
    statewise::CsvReader reader = statewise::CsvReader::open(argv[1], options);
    statewise::ObservationStream stream(reader, model);
    const statewise::ObservationSeries series = statewise::read_series(stream, model);
    const auto m = static_cast<std::size_t>(model.channel_count());
    const auto p = static_cast<std::size_t>(model.input_count());

    // Forward: filter every row, keeping each row's filtered mean and covariance.
    statewise::KalmanFilter filter(model);
    statewise::InnovationRecord innovations;
    statewise::StateTrack track(model.state_count());
    track.reserve(series.rows());
    for (std::size_t t = 0; t < series.rows(); ++t) {
      const auto status = filter.step(std::span(series.row_values(t), m), std::span(series.row_inputs(t), p), innovations);
      if (status != statewise::StepStatus::ok) {
        std::cerr << "batch: line " << series.lines[t] << ": " << statewise::describe(status) << '\n';
        return 1;
      }
      track.push_back(filter.mean(), filter.covariance());
    }

    // Backward: the Rauch-Tung-Striebel smoother, in place over the stored moments.
    statewise::TransitionSchedule schedule;
    schedule.transitions.push_back(statewise::model_transition(model));
    const statewise::SmoothStatus smoothed = statewise::rts_smooth(track, schedule, series.inputs.data(), series.input_count);
    if (!smoothed.ok) {
      std::cerr << "batch: line " << series.lines[smoothed.row] << ": " << smoothed.message << '\n';
      return 1;
    }

    // The smoothed means and covariances of every row, as the CLI writes them.
    const statewise::EstimateTableWriter writer(model, statewise::EstimateKind::smoothed, statewise::TableFormat{});
    std::string out;
    writer.append_header(out);
    for (std::size_t t = 0; t < series.rows(); ++t)
      writer.append_row(out, series.time_text(t), series.row_values(t), track.mean(t), track.covariance(t), nullptr);
    std::cout << out;
    return 0;
  } catch (const statewise::InputError& e) {
    std::cerr << "batch: " << e.what() << '\n';
    return 2;
  }
}
