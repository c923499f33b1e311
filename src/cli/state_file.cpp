#include "cli/state_file.h"

#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fcntl.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include <CLI/CLI.hpp>

#include "statewise/error.h"
#include "statewise/time_axis.h"

namespace statewise::cli {

namespace {

std::string system_reason() { return std::strerror(errno); }

std::string folder_of(const std::string& path) {
  const std::size_t slash = path.rfind('/');
  if (slash == std::string::npos) return ".";
  if (slash == 0) return "/";
  return path.substr(0, slash);
}

// The whole file, or nothing when it does not exist; raises InputError when it cannot be read.
std::optional<std::string> read_existing(const std::string& path) {
  const int descriptor = open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (descriptor < 0) {
    if (errno == ENOENT) return std::nullopt;
    raise_input_error({path, 0, 0, ""}, "cannot read the state file: " + system_reason());
  }
  std::string text;
  char buffer[1 << 16];
  for (;;) {
    const ssize_t count = ::read(descriptor, buffer, sizeof buffer);
    if (count < 0 && errno == EINTR) continue;
    if (count < 0) {
      const std::string reason = system_reason();
      close(descriptor);
      raise_input_error({path, 0, 0, ""}, "cannot read the state file: " + reason);
    }
    if (count == 0) break;
    text.append(buffer, static_cast<std::size_t>(count));
  }
  close(descriptor);
  return text;
}

void write_all(int descriptor, const std::string& text, const std::string& path) {
  const char* data = text.data();
  std::size_t size = text.size();
  while (size > 0) {
    const ssize_t written = ::write(descriptor, data, size);
    if (written < 0 && errno == EINTR) continue;
    if (written < 0) throw OutputError{path + ": cannot write the state: " + system_reason()};
    data += written;
    size -= static_cast<std::size_t>(written);
  }
}

std::string number_setting(double value) {
  char text[32];
  std::snprintf(text, sizeof text, "%.17g", value);
  return text;
}

}  // namespace

void add_state_options(CLI::App& command, EstimateOptions& options) {
  command
      .add_option("--state", options.state_path,
                  "Resume from this state file and save the new state to it after the run: rows at or before the "
                  "saved time are skipped; with --by, one entry per group (docs/unattended.md)")
      ->type_name("FILE");
  command.add_flag("--append", options.append,
                   "Append the estimates to the -o file instead of replacing it (no second header); with --state "
                   "each row is written exactly once, even when a run is killed");
  command.add_flag("--reset", options.reset,
                   "With --state: ignore the saved state (even one for another model) and start from the model's "
                   "prior");
  command.add_flag("--no-wait", options.no_wait,
                   "With --state: when another run holds the state file, exit at once with status 5 instead of "
                   "waiting");
}

void test_exit_point(const char* point) {
  // Test-only: lets the test suite stop the program at a chosen point as if it were killed there.
  static const char* wanted = std::getenv("STATEWISE_TEST_EXIT_AT");
  if (wanted != nullptr && std::strcmp(wanted, point) == 0) _exit(137);
}

std::string run_settings_text(const EstimateOptions& options) {
  return "numerics=" + options.trust.numerics + " reject=" + options.trust.reject +
         " regular=" + number_setting(options.regular_step) + " duplicates=" + options.duplicates +
         " digits=" + std::to_string(options.digits) + " format=" + options.format +
         (options.by.empty() ? "" : " by=" + options.by);
}

StateSession::StateSession(const EstimateOptions& options, const StateSpaceModel& model)
    : path_(options.state_path), append_(options.append) {
  if (path_.empty()) {
    if (options.reset || options.no_wait)
      raise_input_error({options.reset ? "--reset" : "--no-wait", 0, 0, ""}, "needs --state FILE");
    return;
  }
  if (options.sort)
    raise_input_error({"--sort", 0, 0, ""},
                      "cannot be used with --state: a resumed run skips rows at or before the saved time, so the "
                      "log must come in time order");
  // The lock is on a sidecar file, not on the state file itself: the state is replaced by renaming a
  // new file over it, and a lock on the old file would not stop a run that opens the new one.
  const std::string lock_path = path_ + ".lock";
  lock_descriptor_ = open(lock_path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0666);
  if (lock_descriptor_ < 0) throw OutputError{lock_path + ": cannot open the lock file: " + system_reason()};
  const int operation = LOCK_EX | (options.no_wait ? LOCK_NB : 0);
  while (flock(lock_descriptor_, operation) != 0) {
    if (errno == EINTR) continue;
    if (errno == EWOULDBLOCK)
      throw BusyError{path_ + ": another statewise run is using this state file (it holds " + lock_path +
                      "); not waiting because of --no-wait"};
    throw OutputError{lock_path + ": cannot lock: " + system_reason()};
  }

  next_.model_fingerprint = model_fingerprint(model);
  next_.states = model.state_names;
  next_.settings = run_settings_text(options);
  if (options.reset) {
    warn(path_ + ": --reset: the saved state is ignored; the filter starts from the model's prior");
    return;
  }
  const std::optional<std::string> text = read_existing(path_);
  if (!text) return;
  RunState saved = parse_run_state(*text, path_);
  check_run_state(saved, model, options.model_path, next_.settings, path_);
  if (!append_ && saved.output_length)
    raise_input_error({"--append", 0, 0, ""},
                      "missing: the state in " + path_ +
                          " was saved by runs that appended to their output; give --append again (or --reset)");
  saved_ = std::move(saved);
  next_.groups = saved_->groups;
}

StateSession::~StateSession() {
  if (lock_descriptor_ >= 0) close(lock_descriptor_);  // releases the lock
}

const SeriesState* StateSession::resume_point(const std::string& group) const {
  if (!saved_) return nullptr;
  const auto found = saved_->groups.find(group);
  return found == saved_->groups.end() ? nullptr : &found->second;
}

void StateSession::prepare_output(OutputFile& output) {
  if (!active() || !append_) return;
  if (saved_ && saved_->output_length) {
    const std::uint64_t recorded = *saved_->output_length;
    const std::uint64_t actual = output.length();
    if (actual < recorded)
      raise_input_error({path_, 0, 0, "output_length"},
                        "the state accounts for " + std::to_string(recorded) + " bytes of " + output.path() +
                            ", but it has " + std::to_string(actual) +
                            "; it was changed after the last run (restore it, or start again with --reset)");
    // Rows written by a run killed before it saved its state: the next rows replace them.
    if (actual > recorded) {
      output.truncate_to(recorded);
      warn(output.path() + ": cut back from " + std::to_string(actual) + " to " + std::to_string(recorded) +
           " bytes, the length the state accounts for (an earlier run stopped before saving its state)");
    }
    return;
  }
  // No state yet: record where this run's rows start before writing any, so that the rows of a
  // first run killed midway are cut off by the next run too.
  next_.output_length = output.length();
  write(next_);
}

void StateSession::save(const SeriesState& series, const OutputFile& output) {
  if (!active()) return;
  record("", series);
  save(output);
}

void StateSession::save(const OutputFile& output) {
  if (!active()) return;
  if (append_) next_.output_length = output.length();
  write(next_);
}

void StateSession::write(const RunState& state) {
  // A temporary file beside the state, synced, then renamed over it, then the folder synced: the
  // state file is always either the old state or the new one, whole (docs/unattended.md).
  const std::string text = write_run_state(state);
  std::string temporary = path_ + ".tmp-XXXXXX";
  const int descriptor = mkostemp(temporary.data(), O_CLOEXEC);
  if (descriptor < 0) throw OutputError{path_ + ": cannot create a temporary file beside it: " + system_reason()};
  try {
    write_all(descriptor, text, path_);
    if (fsync(descriptor) != 0) throw OutputError{path_ + ": cannot write the state: " + system_reason()};
  } catch (...) {
    close(descriptor);
    unlink(temporary.c_str());
    throw;
  }
  close(descriptor);
  test_exit_point("after-state-write");
  if (rename(temporary.c_str(), path_.c_str()) != 0) {
    const std::string reason = system_reason();
    unlink(temporary.c_str());
    throw OutputError{path_ + ": cannot put the state in place: " + reason};
  }
  test_exit_point("after-state-rename");
  const int folder = open(folder_of(path_).c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (folder >= 0) {
    fsync(folder);
    close(folder);
  }
}

ResumeSkipper::ResumeSkipper(const SeriesState* resume, const StateSpaceModel& model)
    : resume_(resume), has_time_(!model.time_column.empty()), done_(resume == nullptr) {
  if (resume_) log_rows_ = resume_->log_rows;
}

bool ResumeSkipper::skip(const ObservationRow& row) {
  if (!done_) {
    bool seen = false;
    if (!has_time_) {
      seen = skipped_ < resume_->log_rows;
    } else if (resume_->rows > 0) {
      // A time that cannot be read is not skipped: the timeline reports it.
      ParsedTime parsed;
      std::string problem;
      seen = try_parse_time(row.time_text, parsed, problem) && !(resume_->position.last_time < parsed.time);
    }
    if (seen) {
      ++skipped_;
      return true;
    }
    done_ = true;
  }
  ++log_rows_;
  return false;
}

}  // namespace statewise::cli
