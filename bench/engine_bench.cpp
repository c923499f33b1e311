// Times the estimation engine alone (forward Kalman filter + RTS backward pass), without reading or
// writing text, for comparison with the numpy reference's filter and smoother loops.
// Usage: statewise_engine_bench MODEL.json INPUT.csv

#include <chrono>
#include <cstdio>

#include "statewise/csv.h"
#include "statewise/filter.h"
#include "statewise/model.h"
#include "statewise/series.h"
#include "statewise/smoother.h"

int main(int argc, char** argv) {
  using namespace statewise;
  if (argc != 3) return 2;
  const StateSpaceModel model = load_model(argv[1]);
  CsvReader reader = CsvReader::open(argv[2], CsvOptions{});
  ObservationStream stream(reader, model);
  const ObservationSeries series = read_series(stream, model);
  const std::size_t rows = series.rows();

  const auto start = std::chrono::steady_clock::now();
  TransitionSchedule schedule;
  schedule.transitions.push_back(model_transition(model));
  KalmanFilter filter(model);
  InnovationRecord record = make_innovation_record(model.channel_count());
  StateTrack track(model.state_count());
  track.reserve(rows);
  double log_likelihood = 0.0;
  for (std::size_t t = 0; t < rows; ++t) {
    if (t > 0) filter.predict(schedule.step(t - 1), series.row_inputs(t - 1));
    if (filter.update(series.row_values(t), record) != StepStatus::ok) return 1;
    log_likelihood += record.log_likelihood;
    track.push_back(filter.mean(), filter.covariance());
  }
  const auto filtered = std::chrono::steady_clock::now();
  if (!rts_smooth(track, schedule, series.inputs.data(), series.input_count).ok) return 1;
  const auto smoothed = std::chrono::steady_clock::now();
  const double filter_seconds = std::chrono::duration<double>(filtered - start).count();
  const double total_seconds = std::chrono::duration<double>(smoothed - start).count();
  std::printf("engine: %zu rows, filter %.3f s, filter+smoother %.3f s = %.3f us/row (log-likelihood %.6f)\n", rows,
              filter_seconds, total_seconds, total_seconds / static_cast<double>(rows) * 1e6, log_likelihood);
  return 0;
}
