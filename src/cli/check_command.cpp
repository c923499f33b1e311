// `statewise check`: can the model work at all? A structural report on standard output (and as
// JSON with --report), exit status 3 when the model cannot work.

#include <algorithm>
#include <charconv>
#include <cmath>
#include <string>
#include <vector>

#include "cli/commands.h"
#include "cli/exit_codes.h"
#include "cli/log_input.h"
#include "cli/output_file.h"
#include "statewise/csv.h"
#include "statewise/error.h"
#include "statewise/model.h"
#include "statewise/series.h"
#include "statewise/structure.h"
#include "statewise/time_axis.h"

namespace statewise::cli {

namespace {

std::string number_text(double value, int digits = 4) {
  if (std::isnan(value)) return "-";
  if (std::isinf(value)) return "infinite";
  char buffer[64];
  const auto result =
      std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::general, digits);
  return std::string(buffer, result.ptr);
}

std::string duration_text(double seconds) {
  if (std::isnan(seconds)) return "-";
  std::string text = number_text(seconds, 7) + " s";
  if (seconds >= 2 * 86400.0)
    text += " (" + number_text(seconds / 86400.0, 3) + " d)";
  else if (seconds >= 2 * 3600.0)
    text += " (" + number_text(seconds / 3600.0, 3) + " h)";
  else if (seconds >= 120.0)
    text += " (" + number_text(seconds / 60.0, 3) + " min)";
  return text;
}

std::string plural(std::size_t count, const char* word) {
  return std::to_string(count) + " " + word + (count == 1 ? "" : "s");
}

std::string eigenvalue_text(const std::complex<double>& value) {
  if (std::abs(value.imag()) <= 1e-12 * std::max(1.0, std::abs(value))) return number_text(value.real(), 6);
  return number_text(value.real(), 6) + (value.imag() < 0 ? "-" : "+") +
         number_text(std::abs(value.imag()), 6) + "i";
}

std::string eigenvalues_text(const std::vector<std::complex<double>>& values) {
  std::string out;
  for (const auto& value : values) out += (out.empty() ? "" : ", ") + eigenvalue_text(value);
  return out;
}

// Rows of text cells, written with each column padded to its widest cell.
std::string aligned(const std::vector<std::vector<std::string>>& rows, const std::string& indent) {
  std::vector<std::size_t> widths;
  for (const auto& row : rows)
    for (std::size_t i = 0; i < row.size(); ++i) {
      if (widths.size() <= i) widths.push_back(0);
      widths[i] = std::max(widths[i], row[i].size());
    }
  std::string out;
  for (const auto& row : rows) {
    std::string line = indent;
    for (std::size_t i = 0; i < row.size(); ++i) {
      line += row[i];
      if (i + 1 < row.size()) line += std::string(widths[i] - row[i].size() + 2, ' ');
    }
    out += line + "\n";
  }
  return out;
}

std::string rank_text(const RankTest& test, const char* full, const char* deficient) {
  return "rank " + std::to_string(test.rank) + " of " + std::to_string(test.states) + ", " +
         (test.rank == test.states ? full : deficient);
}

std::string check_text(const CheckReport& report, const StateSpaceModel& model) {
  const StructureReport& s = report.structure;
  const char* matrix = model.domain == TimeDomain::continuous ? "F" : "A";
  std::string out = "Model: " + report.model_path + " (" + domain_name(model.domain);
  if (model.step > 0.0) out += ", step " + number_text(model.step, 10) + " s";
  out += "; " + plural(model.state_names.size(), "state") + ", " +
         plural(model.observation_names.size(), "channel") + ", " +
         plural(model.input_names.size(), "input") + ")\n";
  if (!report.channels_left_out.empty()) {
    std::string names;
    for (const auto& name : report.channels_left_out) names += (names.empty() ? "\"" : ", \"") + name + "\"";
    out += "  left out of the analysis: " + names + ", with no value in the log\n";
  }

  out += std::string("Observability of (") + matrix +
         ", C): " + rank_text(s.observability, "observable", "not observable") + "\n";
  for (const auto& direction : s.observability.directions)
    out += "  cannot be seen from the channels: " + direction.description + "\n";
  if (!s.observability.modes.empty())
    out += std::string("  eigenvalues of ") + matrix + " there: " + eigenvalues_text(s.observability.modes) +
           " (" + describe(s.observability.modes_stability) + "; " +
           (s.detectable ? "detectable" : "not detectable") + ")\n";
  if (s.observability.rank == s.observability.states)
    out += "  condition number of the observability matrix: " +
           number_text(s.observability.condition_number, 3) + "\n";

  out += std::string("Process noise reach, controllability of (") + matrix + ", Q^(1/2)): " +
         rank_text(s.noise_controllability, "every direction gets noise", "some directions get none") + "\n";
  for (const auto& direction : s.noise_controllability.directions)
    out += "  no process noise reaches: " + direction.description + "\n";
  if (!s.noise_controllability.modes.empty())
    out += std::string("  eigenvalues of ") + matrix +
           " there: " + eigenvalues_text(s.noise_controllability.modes) + " (" +
           describe(s.noise_controllability.modes_stability) + "; " +
           (s.stabilizable ? "stabilizable" : "not stabilizable") + ")\n";

  out += std::string("Eigenvalues of ") + matrix + ": " + eigenvalues_text(s.eigenvalues) + " (" +
         describe(s.stability) + ")\n";

  const RiccatiSolution& riccati = s.riccati;
  out += "Steady state (discrete algebraic Riccati equation";
  if (model.domain == TimeDomain::continuous && s.riccati_step > 0.0)
    out += ", for rows " + number_text(s.riccati_step, 6) + " s apart";
  out += "): ";
  switch (riccati.status) {
    case RiccatiStatus::stabilizing:
    case RiccatiStatus::not_stabilizing: {
      out +=
          std::string(riccati.status == RiccatiStatus::stabilizing ? "stabilizing solution"
                                                                   : "a solution that is not stabilizing") +
          " (" + plural(static_cast<std::size_t>(riccati.doublings), "doubling step") + ")\n";
      std::vector<std::vector<std::string>> rows;
      std::vector<std::string> header = {"state", "sd before update", "sd after update"};
      for (const auto& channel : model.observation_names) header.push_back("gain for " + channel);
      rows.push_back(header);
      for (std::size_t i = 0; i < model.state_names.size(); ++i) {
        const auto k = static_cast<Eigen::Index>(i);
        std::vector<std::string> row = {
            model.state_names[i], number_text(std::sqrt(std::max(riccati.predicted_covariance(k, k), 0.0))),
            number_text(std::sqrt(std::max(riccati.filtered_covariance(k, k), 0.0)))};
        for (Eigen::Index c = 0; c < riccati.gain.cols(); ++c) row.push_back(number_text(riccati.gain(k, c)));
        rows.push_back(row);
      }
      out += aligned(rows, "  ");
      break;
    }
    case RiccatiStatus::no_solution:
      out += "no stabilizing solution; " + riccati.message + "\n";
      break;
    case RiccatiStatus::not_computed:
      out += "not computed: " + riccati.message + "\n";
      break;
  }

  if (report.has_coverage) {
    const LogCoverage& c = report.coverage;
    out += "Log: " + report.input_path + ", " + plural(c.rows, "row");
    if (c.has_time && c.rows > 1)
      out += " over " + duration_text(c.span_seconds) + "; median gap " +
             duration_text(c.median_gap_seconds) + ", largest " + duration_text(c.largest_gap_seconds) +
             " before line " + std::to_string(c.largest_gap_line);
    out += "\n";
    std::vector<std::vector<std::string>> rows = {
        {"channel", "missing", "longest run of missing rows", "longest time without a value"}};
    for (const auto& channel : c.channels) {
      std::string run = plural(channel.longest_missing_run, "row");
      if (channel.longest_missing_run > 0)
        run += " (from line " + std::to_string(channel.longest_run_first_line) + ")";
      std::string gap = "-";
      if (c.has_time && c.rows > 0)
        gap = duration_text(channel.longest_gap_seconds) + " (lines " +
              std::to_string(channel.longest_gap_from_line) + " to " +
              std::to_string(channel.longest_gap_to_line) + ")";
      rows.push_back({channel.name, number_text(100.0 * channel.missing_fraction, 3) + "%", run, gap});
    }
    out += aligned(rows, "  ");
  }
  for (const auto& warning : s.warnings) out += "Warning: " + warning + "\n";
  out += "Verdict: " + s.verdict + "\n";
  return out;
}

// The model without the channels that never had a value in the log.
StateSpaceModel without_channels(const StateSpaceModel& model, const std::vector<bool>& keep) {
  StateSpaceModel reduced = model;
  std::vector<Eigen::Index> kept;
  reduced.observation_names.clear();
  for (std::size_t c = 0; c < keep.size(); ++c)
    if (keep[c]) {
      kept.push_back(static_cast<Eigen::Index>(c));
      reduced.observation_names.push_back(model.observation_names[c]);
    }
  const auto m = static_cast<Eigen::Index>(kept.size());
  reduced.C.resize(m, model.C.cols());
  reduced.R.resize(m, m);
  for (Eigen::Index a = 0; a < m; ++a) {
    reduced.C.row(a) = model.C.row(kept[static_cast<std::size_t>(a)]);
    for (Eigen::Index b = 0; b < m; ++b)
      reduced.R(a, b) = model.R(kept[static_cast<std::size_t>(a)], kept[static_cast<std::size_t>(b)]);
  }
  return reduced;
}

}  // namespace

int run_check(const CheckOptions& options) {
  const StateSpaceModel model = load_model(options.model_path);
  if (options.dt != 0.0 && model.domain != TimeDomain::continuous)
    raise_input_error({"--dt", 0, 0, ""},
                      "applies to continuous models only; a discrete model's steady state is "
                      "per model step");
  if (options.dt < 0.0 || !std::isfinite(options.dt))
    raise_input_error({"--dt", 0, 0, ""},
                      "expected a positive number of seconds, got " + number_text(options.dt, 17));

  CheckReport report;
  report.model_path = options.model_path;
  report.input_path = options.input_path;
  StateSpaceModel analyzed = model;
  double dt = options.dt;
  if (!options.input_path.empty()) {
    check_sort_flag(model, options.sort);
    TimelineOptions timeline_options;
    timeline_options.duplicates = parse_duplicate_policy(options.duplicates);
    Timeline timeline(model, timeline_options, options.input_path == "-" ? "<stdin>" : options.input_path);
    CsvReader reader =
        CsvReader::open(options.input_path, make_csv_options(options.delimiter, options.missing_tokens));
    ObservationStream stream(reader, model);
    CoverageAccumulator coverage(model);
    read_timeline(stream, timeline, options.sort, [&](TimelineRow& row) { coverage.add(row); });
    report.coverage = coverage.result();
    report.has_coverage = true;
    std::vector<bool> keep;
    for (const auto& channel : report.coverage.channels) {
      keep.push_back(channel.observed > 0 || report.coverage.rows == 0);
      if (!keep.back()) report.channels_left_out.push_back(channel.name);
    }
    if (!report.channels_left_out.empty()) analyzed = without_channels(model, keep);
    if (dt == 0.0 && model.domain == TimeDomain::continuous) dt = report.coverage.median_gap_seconds;
  }
  report.model = &analyzed;
  report.structure = analyze_structure(analyzed, dt);
  if (!report.channels_left_out.empty()) {
    std::string names;
    for (const auto& name : report.channels_left_out) names += (names.empty() ? "\"" : ", \"") + name + "\"";
    report.structure.warnings.insert(report.structure.warnings.begin(),
                                     "the analysis leaves out " + names + ", which has no value in the log");
  }

  OutputFile output("-");
  output.write(check_text(report, analyzed));
  output.commit();
  if (!options.report_path.empty())
    write_whole_file(options.report_path, write_check_report_json(report), options.input_path);
  return report.structure.can_work ? kExitSuccess : kExitModelCannotWork;
}

}  // namespace statewise::cli
