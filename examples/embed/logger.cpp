// A data logger's main loop with the statewise filter inside: each row of readings is filtered as
// it arrives and its estimate printed, and the filter's state is saved so that after a restart the
// logger resumes where it stopped. Here the readings come from a CSV log; a real logger would
// read its sensors and call filter.step() the same way.
//
// Usage: logger MODEL.json LOG.csv STATE.json
// Prints "time,state,state_sd,..." per row. Rows already counted in STATE.json are skipped, so
// running it again on a log that has grown processes only the new rows.

#include <cmath>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <sstream>
#include <string>

#include <statewise/csv.h>
#include <statewise/filter_state.h>
#include <statewise/output_table.h>
#include <statewise/series.h>

namespace {

std::string read_file(const std::string& path) {
  std::ifstream file(path, std::ios::binary);
  std::ostringstream text;
  text << file.rdbuf();
  return text.str();
}

// Replaces `path` only once the new text is completely written: a crash never leaves half a state.
void save_state(const std::string& path, const statewise::KalmanFilter& filter) {
  const std::string temporary = path + ".tmp";
  std::ofstream(temporary, std::ios::binary | std::ios::trunc)
      << statewise::write_filter_state(filter.state(), filter.model());
  std::filesystem::rename(temporary, path);
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 4) {
    std::cerr << "usage: logger MODEL.json LOG.csv STATE.json\n";
    return 2;
  }
  const std::string state_path = argv[3];
  try {
    const statewise::StateSpaceModel model = statewise::load_model(argv[1]);
    statewise::KalmanFilter filter(model);
    if (std::filesystem::exists(state_path))
      filter.restore(statewise::parse_filter_state(read_file(state_path), model, state_path));

    statewise::CsvOptions options;
    options.missing_tokens = {"-999"};  // this log's probes write -999 when they fail
    statewise::CsvReader reader = statewise::CsvReader::open(argv[2], options);
    statewise::ObservationStream stream(reader, model);
    statewise::ObservationRow row;
    statewise::InnovationRecord innovations;
    std::uint64_t row_number = 0;
    while (stream.next(row)) {
      if (row_number++ < filter.rows_processed()) continue;  // processed before the restart
      const statewise::StepStatus status = filter.step(row.values, row.inputs, innovations);
      if (status != statewise::StepStatus::ok) {
        // Numerical trouble is a status, not an exception; the filter is as before this row.
        std::cerr << "logger: line " << row.line << ": " << statewise::describe(status) << '\n';
        save_state(state_path, filter);
        return 1;
      }
      // Each state's estimate and standard deviation, numbers in shortest round-trip form.
      std::string line = row.time_text;
      for (Eigen::Index i = 0; i < filter.mean().size(); ++i) {
        line += ',';
        statewise::append_number(line, filter.mean()(i), 0);
        line += ',';
        statewise::append_number(line, std::sqrt(filter.covariance()(i, i)), 0);
      }
      std::cout << line << '\n';
      if (filter.rows_processed() % 1000 == 0) save_state(state_path, filter);  // now and then
    }
    save_state(state_path, filter);
    return 0;
  } catch (const statewise::InputError& e) {
    // Bad input (model file, log, state file) names the file and the place, as the CLI does.
    std::cerr << "logger: " << e.what() << '\n';
    return 2;
  }
}
