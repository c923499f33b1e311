#include "cli/grouped_run.h"

#include <algorithm>
#include <condition_variable>
#include <exception>
#include <iostream>
#include <memory>
#include <mutex>
#include <optional>
#include <thread>
#include <unordered_map>

#include "cli/estimate_run.h"
#include "cli/exit_codes.h"
#include "cli/log_input.h"
#include "cli/output_file.h"
#include "cli/state_file.h"
#include "statewise/csv.h"
#include "statewise/error.h"
#include "statewise/output_table.h"
#include "statewise/report.h"
#include "statewise/version.h"

namespace statewise::cli {

GroupRows::GroupRows(std::string name, const StateSpaceModel& model) : name_(std::move(name)) {
  series_.channels = model.channel_count();
  series_.input_count = model.input_count();
  series_.has_time = !model.time_column.empty();
}

void GroupRows::push_back(const ObservationRow& row) {
  series_.push_back(row);
  time_columns_.push_back(row.time_column);
}

void GroupRows::row(std::size_t t, ObservationRow& out) const {
  const double* values = series_.row_values(t);
  out.values.assign(values, values + series_.channels);
  const double* inputs = series_.row_inputs(t);
  out.inputs.assign(inputs, inputs + (inputs == nullptr ? 0 : series_.input_count));
  const std::string_view time = series_.time_text(t);
  out.time_text.assign(time.begin(), time.end());
  out.line = series_.lines[t];
  out.time_column = time_columns_[t];
}

void GroupRows::release() {
  series_ = ObservationSeries{};
  time_columns_ = {};
}

namespace {

// Raises InputError at --by when the model reads the column: a group column is not a channel.
void check_by_column(const EstimateOptions& options, const StateSpaceModel& model) {
  const std::string& by = options.by;
  std::string role;
  if (by == model.time_column) role = "time column";
  if (std::find(model.observation_names.begin(), model.observation_names.end(), by) !=
      model.observation_names.end())
    role = "channel";
  if (std::find(model.input_names.begin(), model.input_names.end(), by) != model.input_names.end())
    role = "input";
  if (!role.empty())
    raise_input_error({"--by", 0, 0, ""}, "\"" + by + "\" is a " + role +
                                              " of the model; --by needs a column the model does not read");
  const EstimateKind kind = EstimateKind::filtered;  // the filter's columns include the smoother's
  const std::vector<std::string> columns = estimate_columns(model, kind, table_format(options, true));
  if (std::find(columns.begin(), columns.end(), by) != columns.end())
    raise_input_error({"--by", 0, 0, ""}, "the estimates table already has a column \"" + by +
                                              "\"; rename the group column in the log");
  if (!options.trust.plot_path.empty())
    raise_input_error({"--plot", 0, 0, ""},
                      "draws one log and cannot be combined with --by; run the group to plot on its own");
}

std::size_t by_column_index(const CsvReader& reader, const std::string& by) {
  try {
    return reader.column_index(by);
  } catch (const InputError& e) {
    std::string detail = e.detail();
    const std::string place = " in the header";
    const std::size_t at = detail.find(place);
    if (at != std::string::npos) detail.insert(at + place.size(), " for --by");
    raise_input_error(e.location(), detail);
  }
}

// What one group's run produced: its table rows, or the reason it failed.
struct GroupResult {
  int status = kExitSuccess;  // the exit status the failure would have on its own
  std::string message;        // the failure's message (empty when it ran)
  std::string table;          // the group's rows with the group column
  std::string report;         // the run's JSON report (when --report is given)
  std::exception_ptr fatal;   // anything else (out of memory): stops the whole run
  std::optional<FilterResume> resume;  // with --state: the group's next state and the rows it skipped
};

GroupResult run_group(const StateSpaceModel& model, const EstimateOptions& options, GroupedCommand command,
                      const GroupRows& group, const std::string& file, const StateSession& session) {
  GroupResult result;
  try {
    const LeadColumn lead(options.by, group.name(), table_format(options, true));
    TableSink sink{result.table, &lead, {}};
    std::size_t next = 0;
    const RowSource rows = [&](ObservationRow& row) {
      if (next == group.rows()) return false;
      group.row(next++, row);
      return true;
    };
    RunReport report;
    if (command == GroupedCommand::filter) {
      ForwardPass filter(model, forward_pass_options(options.trust));
      if (session.active()) {
        result.resume.emplace();
        result.resume->saved = session.resume_point(group.name());
        result.resume->group = group.name();
      }
      report = filter_rows(model, options, rows, file, filter, sink, result.resume ? &*result.resume : nullptr);
    } else {
      report = smooth_rows(model, options, rows, file, sink, nullptr);
    }
    if (!options.report_path.empty()) result.report = write_report_json(report);
  } catch (const InputError& e) {
    result = GroupResult{kExitBadInput, e.what(), {}, {}, {}, {}};
  } catch (const NumericalFailure& e) {
    result = GroupResult{kExitNumericalFailure, e.message, {}, {}, {}, {}};
  } catch (...) {
    result = GroupResult{};
    result.fatal = std::current_exception();
  }
  return result;
}

// Runs the groups on worker threads, at most `window` groups ahead of the one being written, and
// hands the results out in group order. With one thread, the groups run in the caller's thread.
class GroupRunner {
 public:
  GroupRunner(const StateSpaceModel& model, const EstimateOptions& options, GroupedCommand command,
              GroupedTable& table, const StateSession& session, unsigned threads)
      : model_(model),
        options_(options),
        command_(command),
        table_(table),
        session_(session),
        results_(table.groups.size()) {
    if (threads <= 1) return;
    window_ = 4 * static_cast<std::size_t>(threads);
    for (unsigned i = 0; i < threads; ++i) workers_.emplace_back([this] { work(); });
  }
  GroupRunner(const GroupRunner&) = delete;
  GroupRunner& operator=(const GroupRunner&) = delete;
  // Stops the workers (after an error, the groups not yet started are dropped).
  ~GroupRunner() {
    {
      const std::lock_guard<std::mutex> lock(mutex_);
      stop_ = true;
    }
    room_.notify_all();
    for (std::thread& worker : workers_) worker.join();
  }

  /// Group k's result (k = 0, 1, 2, ... in turn); its rows are freed.
  GroupResult take(std::size_t k) {
    GroupResult result;
    if (workers_.empty()) {
      result = run_group(model_, options_, command_, table_.groups[k], table_.file, session_);
    } else {
      std::unique_lock<std::mutex> lock(mutex_);
      ready_.wait(lock, [&] { return results_[k] != nullptr; });
      result = std::move(*results_[k]);
      results_[k].reset();
      taken_ = k + 1;
      room_.notify_all();
    }
    table_.groups[k].release();
    return result;
  }

 private:
  void work() {
    std::unique_lock<std::mutex> lock(mutex_);
    for (;;) {
      room_.wait(lock, [&] { return stop_ || next_ >= results_.size() || next_ < taken_ + window_; });
      if (stop_ || next_ >= results_.size()) return;
      const std::size_t k = next_++;
      lock.unlock();
      auto result = std::make_unique<GroupResult>(
          run_group(model_, options_, command_, table_.groups[k], table_.file, session_));
      lock.lock();
      results_[k] = std::move(result);
      ready_.notify_all();
    }
  }

  const StateSpaceModel& model_;
  const EstimateOptions& options_;
  GroupedCommand command_;
  GroupedTable& table_;
  const StateSession& session_;
  std::vector<std::unique_ptr<GroupResult>> results_;
  std::vector<std::thread> workers_;
  std::mutex mutex_;
  std::condition_variable ready_, room_;
  std::size_t next_ = 0, taken_ = 0, window_ = 0;
  bool stop_ = false;
};

std::string json_string(std::string_view text) {
  std::string out;
  append_json_string(out, text);
  return out;
}

// One group's section of the report: the group and its status, then the run's report (without the
// version, which the whole report gives once), indented to sit in the "groups" list.
std::string report_section(const std::string& group, const GroupResult& result) {
  std::string out = "    {\n      \"group\": " + json_string(group) + ",\n      \"status\": ";
  if (!result.message.empty())
    return out + "\"failed\",\n      \"exit_status\": " + std::to_string(result.status) +
           ",\n      \"error\": " + json_string(result.message) + "\n    }";
  out += "\"ok\",\n";
  std::size_t start = result.report.find('\n') + 1;  // after the opening brace
  const std::size_t end = result.report.rfind('}');   // the closing brace
  while (start < end) {
    const std::size_t stop = result.report.find('\n', start) + 1;
    const std::string_view line = std::string_view(result.report).substr(start, stop - start);
    if (line.find("\"statewise_version\"") == std::string_view::npos) out.append("    ").append(line);
    start = stop;
  }
  return out + "    }";
}

std::string report_head(const EstimateOptions& options, GroupedCommand command) {
  return "{\n  \"statewise_version\": " + json_string(STATEWISE_VERSION) + ",\n  \"command\": " +
         json_string(command == GroupedCommand::filter ? "filter" : "smooth") +
         ",\n  \"model\": " + json_string(options.model_path) + ",\n  \"input\": " + json_string(options.input_path) +
         ",\n  \"by\": " + json_string(options.by) + ",\n  \"groups\": [";
}

std::string report_tail(std::size_t ok, std::size_t failed, const std::vector<std::string>& warnings) {
  std::string out = "\n  ],\n  \"summary\": {\n    \"groups\": " + std::to_string(ok + failed) + ",\n    \"ok\": " +
                    std::to_string(ok) + ",\n    \"failed\": " + std::to_string(failed) + "\n  }";
  if (!warnings.empty()) {
    out += ",\n  \"warnings\": [";
    for (std::size_t i = 0; i < warnings.size(); ++i) out += (i > 0 ? ",\n    " : "\n    ") + json_string(warnings[i]);
    out += "\n  ]";
  }
  return out + "\n}\n";
}

void report_group_failure(const std::string& group, const std::string& message) {
  std::fflush(stdout);
  std::cerr << "statewise: error: " << message << " [group " << json_string(group) << "]\n";
}

}  // namespace

GroupedTable read_grouped_table(const EstimateOptions& options, const StateSpaceModel& model) {
  CsvReader reader = CsvReader::open(options.input_path, make_csv_options(options.delimiter, options.missing_tokens));
  const std::size_t by = by_column_index(reader, options.by);
  ObservationStream stream(reader, model);
  GroupedTable table;
  table.file = reader.display_name();
  std::unordered_map<std::string, std::size_t> index_of;
  std::size_t last = 0;  // rows of a group often follow each other: try the last group first
  ObservationRow row;
  while (stream.next(row)) {
    const std::string_view name = reader.field(by);
    if (name.empty())
      raise_input_error(reader.location(by), "the group column \"" + options.by +
                                                 "\" (--by) is empty; every row needs the name of its group");
    if (table.groups.empty() || table.groups[last].name() != name) {
      const auto [place, added] = index_of.try_emplace(std::string(name), table.groups.size());
      if (added) table.groups.emplace_back(place->first, model);
      last = place->second;
    }
    table.groups[last].push_back(row);
  }
  return table;
}

int run_grouped(const EstimateOptions& options, GroupedCommand command) {
  const StateSpaceModel model = load_model(options.model_path);
  check_estimate_options(model, options);
  check_by_column(options, model);
  // With --state (filter): lock, read and check the saved state before anything is written.
  StateSession session(options, model);
  GroupedTable table = read_grouped_table(options, model);
  OutputFile output(options.output_path, options.input_path, options.append);
  session.prepare_output(output);
  std::unique_ptr<OutputFile> report;
  if (!options.report_path.empty()) {
    report = std::make_unique<OutputFile>(options.report_path, options.input_path);
    report->write(report_head(options, command));
  }

  std::string buffer;
  if (options.header && (!options.append || output.length() == 0)) {
    const TableFormat format = table_format(options, command == GroupedCommand::filter || options.trust.innovations);
    LeadColumn(options.by, "", format).append_header(buffer);
    EstimateTableWriter(model, command == GroupedCommand::filter ? EstimateKind::filtered : EstimateKind::smoothed,
                        format)
        .append_header(buffer);
  }
  output.write_buffer(buffer);

  const unsigned threads = options.threads > 0 ? static_cast<unsigned>(options.threads)
                                               : std::max(1u, std::thread::hardware_concurrency());
  const std::size_t groups = table.groups.size();
  std::size_t ok = 0, failed = 0;
  std::uint64_t skipped = 0;
  {
    GroupRunner runner(model, options, command, table, session,
                       static_cast<unsigned>(std::min<std::size_t>(threads, std::max<std::size_t>(groups, 1))));
    for (std::size_t k = 0; k < groups; ++k) {
      const std::string name = table.groups[k].name();
      GroupResult result = runner.take(k);
      if (result.fatal) std::rethrow_exception(result.fatal);
      if (!result.message.empty()) {
        report_group_failure(name, result.message);
        if (options.fail_fast) return result.status;  // nothing is committed
        ++failed;
      } else {
        ++ok;
        if (result.resume) {
          session.record(name, result.resume->next);
          skipped += result.resume->skipped;
        }
        output.write_buffer(result.table);
        if (output.interactive()) output.flush();
      }
      if (report) report->write((k > 0 ? ",\n" : "\n") + report_section(name, result));
    }
  }
  output.flush();
  test_exit_point("after-output-write");
  output.commit();
  test_exit_point("after-output-fsync");
  if (session.active()) {
    // A failed group keeps its saved state, so that the next run tries its rows again.
    session.save(output);
    if (skipped > 0)
      session.warn(std::to_string(skipped) + " rows of " + table.file + " were skipped: the state file " +
                   options.state_path + " already accounts for them");
  }
  for (const std::string& warning : session.warnings())
    if (!options.quiet) std::cerr << "statewise: warning: " << warning << '\n';
  if (report) {
    report->write(report_tail(ok, failed, session.warnings()));
    report->commit();
  }
  return failed > 0 ? kExitSomeGroupsFailed : kExitSuccess;
}

}  // namespace statewise::cli
