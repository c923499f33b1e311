// `statewise filter --state FILE [--append]`: resumed runs against one uninterrupted run, runs stopped
// at every step of saving, kill -9 at random moments, two runs on one state file, and state files
// that are damaged or belong to another model. The reference throughout is first principles: a log
// filtered in one uninterrupted run is what any sequence of resumed runs over it must write, byte
// for byte (docs/unattended.md).

#include <doctest/doctest.h>
#include <fcntl.h>
#include <signal.h>
#include <sys/file.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <thread>
#include <vector>

#include "cli_run.h"

namespace {

using statewise::testing::CommandResult;
using statewise::testing::ScratchFolder;
using statewise::testing::run_statewise_with;

const std::string kColdRoom = STATEWISE_SOURCE_DIR "/examples/cold-room";

std::string file_text(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> lines;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) lines.push_back(line);
  return lines;
}

// Header plus data rows [begin, end) of `lines` (lines[0] is the header).
std::string rows_text(const std::vector<std::string>& lines, std::size_t begin, std::size_t end) {
  std::string text = lines[0] + "\n";
  for (std::size_t i = begin; i < end; ++i) text += lines[i + 1] + "\n";
  return text;
}

// One way of running the filter: the model file's text, the log's lines and extra flags.
struct Setup {
  std::string name;
  std::string model;
  std::vector<std::string> lines;  // header + data rows
  std::string flags;
  bool whole_log_each_time = false;  // without a time column rows are counted from the log's start
};

std::string cold_room_model() { return file_text(kColdRoom + "/model.json"); }
std::vector<std::string> cold_room_lines(std::size_t rows) {
  std::vector<std::string> lines = lines_of(file_text(kColdRoom + "/data.csv"));
  lines.resize(rows + 1);
  return lines;
}

std::string replace(std::string text, const std::string& from, const std::string& to) {
  const std::size_t at = text.find(from);
  REQUIRE(at != std::string::npos);
  return text.replace(at, from.size(), to);
}

std::vector<Setup> setups() {
  std::vector<Setup> all;
  all.push_back({"plain", cold_room_model(), cold_room_lines(400), "", false});
  // Probe values 30 degrees off on rows 150..169: every value rejected for more than
  // kReacquireAfterRows rows, so the gate's run of rejected rows and a re-acquisition cross splits.
  Setup gate{"reject", cold_room_model(), cold_room_lines(400), "--reject 0.999", false};
  for (std::size_t row = 150; row < 170; ++row) {
    std::vector<std::string> cells;
    std::istringstream in(gate.lines[row + 1]);
    std::string cell;
    while (std::getline(in, cell, ',')) cells.push_back(cell);
    gate.lines[row + 1] = cells[0] + "," + std::to_string(std::stod(cells[1]) + 30) + "," +
                          std::to_string(std::stod(cells[2]) + 30) + "," + cells[3];
  }
  all.push_back(gate);
  // Every 7th row missing, refilled on the --regular grid (anchored at the first row of the log).
  Setup grid{"regular", cold_room_model(), {}, "--regular 60", false};
  const std::vector<std::string> full = cold_room_lines(400);
  grid.lines.push_back(full[0]);
  for (std::size_t row = 0; row < 400; ++row)
    if (row % 7 != 3) grid.lines.push_back(full[row + 1]);
  all.push_back(grid);
  all.push_back({"square-root", cold_room_model(), cold_room_lines(400), "--numerics square-root", false});
  // Every state diffuse: the exact diffuse phase lasts the first two rows, so a split after row 1
  // saves the diffuse part of the covariance.
  all.push_back({"diffuse",
                 replace(cold_room_model(), "\"initial\": {\"mean\": [-18, 0], \"covariance\": [4, 0.01]}",
                         "\"initial\": {\"diffuse\": true}"),
                 cold_room_lines(400), "", false});
  all.push_back({"no time column", replace(cold_room_model(), "\"time\": {\"column\": \"time\"},", ""),
                 cold_room_lines(400), "", true});
  all.push_back({"duplicates merged", cold_room_model(), {}, "--duplicates mean", false});
  Setup& merged = all.back();
  merged.lines.push_back(full[0]);
  for (std::size_t row = 0; row < 400; ++row) {
    merged.lines.push_back(full[row + 1]);
    if (row % 5 == 0) merged.lines.push_back(full[row + 1]);  // a repeated time, merged into one row
  }
  return all;
}

// Runs the log in parts split at `splits` (data-row indices) with --state and --append, and returns
// the output file's text. Each part holds the new rows only, or the whole log so far.
std::string run_in_parts(const ScratchFolder& folder, const Setup& setup, const std::vector<std::size_t>& splits,
                         bool whole_log, bool through_stdin) {
  std::filesystem::remove(folder.path("out.csv"));
  std::filesystem::remove(folder.path("state.json"));
  const std::size_t rows = setup.lines.size() - 1;
  std::size_t begin = 0;
  for (std::size_t k = 0; k <= splits.size(); ++k) {
    const std::size_t end = k < splits.size() ? splits[k] : rows;
    folder.write("part.csv", rows_text(setup.lines, whole_log ? 0 : begin, end));
    const CommandResult run =
        run_statewise_with(folder, "", "filter -m model.json --state state.json --append -o out.csv " + setup.flags +
                                 (through_stdin ? " -" : " part.csv"),
                 through_stdin ? "part.csv" : "/dev/null");
    REQUIRE_MESSAGE(run.status == 0, setup.name << ": part " << k << ": " << run.err);
    begin = end;
  }
  return folder.read("out.csv");
}

std::string run_whole(const ScratchFolder& folder, const Setup& setup) {
  folder.write("model.json", setup.model);
  folder.write("whole.csv", rows_text(setup.lines, 0, setup.lines.size() - 1));
  const CommandResult run = run_statewise_with(folder, "", "filter -m model.json whole.csv -o whole-out.csv " + setup.flags);
  REQUIRE_MESSAGE(run.status == 0, run.err);
  return folder.read("whole-out.csv");
}

}  // namespace

TEST_CASE("filter --state --append in parts writes what one uninterrupted run writes") {
  ScratchFolder folder;
  const std::vector<std::vector<std::size_t>> split_sets = {
      {200}, {1}, {2, 3}, {1, 2, 3, 4}, {100, 155, 160, 165, 300}, {7, 49, 151, 152, 399}, {399}};
  for (const Setup& setup : setups()) {
    CAPTURE(setup.name);
    // Reference: one uninterrupted run over the whole log (first principles).
    const std::string whole = run_whole(folder, setup);
    const std::size_t rows = setup.lines.size() - 1;
    for (const auto& splits : split_sets) {
      std::vector<std::size_t> kept;
      for (const std::size_t split : splits)
        if (split < rows) kept.push_back(split);
      CHECK_MESSAGE(run_in_parts(folder, setup, kept, setup.whole_log_each_time, false) == whole,
                    setup.name << " split " << kept.size() + 1 << " ways");
    }
    // The log through standard input, and the whole log so far on every run (rows already in the
    // state skipped) for the setups with a time column.
    CHECK(run_in_parts(folder, setup, {120, 250}, setup.whole_log_each_time, true) == whole);
    CHECK(run_in_parts(folder, setup, {120, 250}, true, false) == whole);
  }
}

TEST_CASE("filter --state without --append writes each run's new rows") {
  ScratchFolder folder;
  const Setup setup = setups()[0];
  const std::vector<std::string> whole = lines_of(run_whole(folder, setup));
  folder.write("part.csv", rows_text(setup.lines, 0, 150));
  REQUIRE(run_statewise_with(folder, "", "filter -m model.json --state state.json part.csv -o a.csv").status == 0);
  folder.write("part.csv", rows_text(setup.lines, 100, 400));  // 50 rows already seen
  const CommandResult run = run_statewise_with(folder, "", "filter -m model.json --state state.json part.csv -o b.csv");
  REQUIRE(run.status == 0);
  CHECK(run.err ==
        "statewise: warning: 50 rows of part.csv were skipped: the state file state.json already accounts for them\n");
  const std::vector<std::string> a = lines_of(folder.read("a.csv")), b = lines_of(folder.read("b.csv"));
  REQUIRE(a.size() == 151);
  REQUIRE(b.size() == 251);
  CHECK(a[0] == whole[0]);
  CHECK(b[0] == whole[0]);  // a replaced output has its header
  for (std::size_t i = 1; i < a.size(); ++i) CHECK(a[i] == whole[i]);
  for (std::size_t i = 1; i < b.size(); ++i) CHECK(b[i] == whole[150 + i]);
  // --quiet keeps the warning off standard error.
  folder.write("part.csv", rows_text(setup.lines, 0, 400));
  const CommandResult quiet = run_statewise_with(folder, "", "filter -m model.json --state state.json part.csv -o c.csv -q");
  CHECK(quiet.status == 0);
  CHECK(quiet.err.empty());
  CHECK(lines_of(folder.read("c.csv")).size() == 1);  // every row already seen: the header alone
}

TEST_CASE("a run stopped at any step of saving is undone or completed by the next run") {
  ScratchFolder folder;
  const Setup setup = setups()[1];  // with the gate: the most state to carry
  const std::string whole = run_whole(folder, setup);
  for (const char* point : {"after-output-write", "after-output-fsync", "after-state-write", "after-state-rename"}) {
    for (const std::size_t stopped_part : {0u, 1u}) {
      CAPTURE(point);
      CAPTURE(stopped_part);
      std::filesystem::remove(folder.path("out.csv"));
      std::filesystem::remove(folder.path("state.json"));
      const std::vector<std::size_t> bounds = {0, 130, 260, 400};
      for (std::size_t k = 0; k + 1 < bounds.size(); ++k) {
        folder.write("part.csv", rows_text(setup.lines, bounds[k], bounds[k + 1]));
        const std::string command =
            "filter -m model.json --state state.json --append -o out.csv part.csv " + setup.flags;
        if (k == stopped_part) {
          // Test-only hook (src/cli/state_file.h): ends the process with _exit(137) at `point`.
          const CommandResult stopped = run_statewise_with(folder, std::string("STATEWISE_TEST_EXIT_AT=") + point + " ", command);
          REQUIRE(stopped.status == 137);
        }
        const CommandResult run = run_statewise_with(folder, "", command);
        REQUIRE_MESSAGE(run.status == 0, run.err);
      }
      CHECK(folder.read("out.csv") == whole);
    }
  }
}

TEST_CASE("kill -9 at random moments then one more run gives the uninterrupted output") {
  ScratchFolder folder;
  // A log long enough that a run takes a while: the cold-room rows repeated with times one minute
  // apart (the model has no step, so only the order of times matters).
  const std::vector<std::string> base = cold_room_lines(2880);
  Setup setup{"long", cold_room_model(), {base[0]}, "--reject 0.999", false};
  for (std::size_t copy = 0; copy < 10; ++copy)
    for (std::size_t row = 0; row < 2880; ++row) {
      const std::size_t index = copy * 2880 + row;
      const std::string& line = base[row + 1];
      setup.lines.push_back(std::to_string(1700000000 + 60 * index) + line.substr(line.find(',')));
    }
  const std::string whole = run_whole(folder, setup);
  const auto started = std::chrono::steady_clock::now();
  REQUIRE(run_statewise_with(folder, "", "filter -m model.json whole.csv -o timing.csv " + setup.flags).status == 0);
  const auto full_run = std::chrono::steady_clock::now() - started;
  std::mt19937 random(20261202);
  std::uniform_int_distribution<long long> delay(0, std::chrono::duration_cast<std::chrono::microseconds>(full_run).count());
  int killed = 0;
  for (int attempt = 0; attempt < 25; ++attempt) {
    const pid_t child = fork();
    REQUIRE(child >= 0);
    if (child == 0) {
      if (chdir(folder.path("").c_str()) != 0) _exit(120);
      const int null = open("/dev/null", O_RDWR);
      dup2(null, STDOUT_FILENO);
      dup2(null, STDERR_FILENO);
      execl(STATEWISE_BINARY, STATEWISE_BINARY, "filter", "-m", "model.json", "--state", "state.json", "--append", "-o",
            "out.csv", "whole.csv", "--reject", "0.999", static_cast<char*>(nullptr));
      _exit(121);
    }
    std::this_thread::sleep_for(std::chrono::microseconds(delay(random)));
    kill(child, SIGKILL);
    int status = 0;
    waitpid(child, &status, 0);
    killed += WIFSIGNALED(status) ? 1 : 0;
  }
  MESSAGE(killed << " of 25 runs were killed before they finished");
  const CommandResult last =
      run_statewise_with(folder, "", "filter -m model.json --state state.json --append -o out.csv whole.csv " + setup.flags);
  REQUIRE_MESSAGE(last.status == 0, last.err);
  CHECK(folder.read("out.csv") == whole);
}

TEST_CASE("two runs on one state file: the second waits or exits with status 5 under --no-wait") {
  ScratchFolder folder;
  const Setup setup = setups()[0];
  const std::string whole = run_whole(folder, setup);
  folder.write("first.csv", rows_text(setup.lines, 0, 200));
  folder.write("second.csv", rows_text(setup.lines, 200, 400));
  // The first run reads standard input from a pipe kept open, so it holds the lock until we close it.
  const std::string first_command = "cd '" + folder.path("") + "' && exec '" STATEWISE_BINARY
                                    "' filter -m model.json --state state.json --append -o out.csv - 2> first.err";
  FILE* first = popen(first_command.c_str(), "w");
  REQUIRE(first != nullptr);
  // Wait until it holds the lock (the state file's sidecar FILE.lock, docs/unattended.md).
  bool locked = false;
  for (int i = 0; i < 1000 && !locked; ++i) {
    const int probe = open(folder.path("state.json.lock").c_str(), O_RDWR);
    if (probe >= 0) {
      if (flock(probe, LOCK_EX | LOCK_NB) != 0) locked = true;
      close(probe);  // releases the lock if the probe got it
    }
    if (!locked) std::this_thread::sleep_for(std::chrono::milliseconds(10));
  }
  REQUIRE(locked);
  const CommandResult busy =
      run_statewise_with(folder, "", "filter -m model.json --state state.json --append -o out.csv second.csv --no-wait");
  CHECK(busy.status == 5);
  CHECK(busy.err ==
        "statewise: error: state.json: another statewise run is using this state file (it holds state.json.lock); "
        "not waiting because of --no-wait\n");
  // Without --no-wait the second run waits for the first.
  const pid_t second = fork();
  REQUIRE(second >= 0);
  if (second == 0) {
    close(fileno(first));  // the first run's standard input must end when this test closes it
    if (chdir(folder.path("").c_str()) != 0) _exit(120);
    execl(STATEWISE_BINARY, STATEWISE_BINARY, "filter", "-m", "model.json", "--state", "state.json", "--append", "-o",
          "out.csv", "second.csv", static_cast<char*>(nullptr));
    _exit(121);
  }
  std::this_thread::sleep_for(std::chrono::milliseconds(300));
  int status = 0;
  CHECK(waitpid(second, &status, WNOHANG) == 0);  // still waiting for the lock
  const std::string first_rows = rows_text(setup.lines, 0, 200);
  CHECK(std::fwrite(first_rows.data(), 1, first_rows.size(), first) == first_rows.size());
  CHECK(pclose(first) == 0);
  REQUIRE(waitpid(second, &status, 0) == second);
  CHECK(WIFEXITED(status));
  CHECK(WEXITSTATUS(status) == 0);
  CHECK(folder.read("out.csv") == whole);  // first run's rows, then the second's
}

TEST_CASE("a damaged state file is an error and is left as it was") {
  ScratchFolder folder;
  const Setup setup = setups()[0];
  folder.write("model.json", setup.model);
  folder.write("part.csv", rows_text(setup.lines, 0, 100));
  REQUIRE(run_statewise_with(folder, "", "filter -m model.json --state state.json --append -o out.csv part.csv").status == 0);
  const std::string state = folder.read("state.json");
  const std::string output = folder.read("out.csv");
  folder.write("part.csv", rows_text(setup.lines, 100, 200));
  const std::string command = "filter -m model.json --state state.json --append -o out.csv part.csv";

  folder.write("state.json", state.substr(0, state.size() / 2));  // truncated
  CommandResult run = run_statewise_with(folder, "", command);
  CHECK(run.status == 2);
  CHECK(run.err.rfind("statewise: error: state.json:", 0) == 0);
  CHECK(run.err.find(": invalid JSON: syntax error while parsing ") != std::string::npos);
  CHECK(folder.read("state.json") == state.substr(0, state.size() / 2));
  CHECK(folder.read("out.csv") == output);

  folder.write("state.json", replace(state, "\"rows\": 100", "\"rows\": -1"));
  run = run_statewise_with(folder, "", command);
  CHECK(run.status == 2);
  CHECK(run.err ==
        "statewise: error: state.json: groups[\"\"].rows: expected a whole number (0 or more), got the number -1\n");
  CHECK(folder.read("out.csv") == output);

  folder.write("state.json", "");
  run = run_statewise_with(folder, "", command);
  CHECK(run.status == 2);
  CHECK(run.err == "statewise: error: state.json: the file is empty; expected a JSON object\n");
  CHECK(folder.read("state.json").empty());

  // An output shorter than the state accounts for was changed by someone else.
  folder.write("state.json", state);
  folder.write("out.csv", output.substr(0, 100));
  run = run_statewise_with(folder, "", command);
  CHECK(run.status == 2);
  CHECK(run.err == "statewise: error: state.json: output_length: the state accounts for " +
                       std::to_string(output.size()) +
                       " bytes of out.csv, but it has 100; it was changed after the last run (restore it, or start "
                       "again with --reset)\n");
  CHECK(folder.read("out.csv") == output.substr(0, 100));
  CHECK(folder.read("state.json") == state);
}

TEST_CASE("a state file saved for another model is refused and --reset starts again") {
  ScratchFolder folder;
  const Setup setup = setups()[0];
  folder.write("model.json", setup.model);
  folder.write("part.csv", rows_text(setup.lines, 0, 100));
  REQUIRE(run_statewise_with(folder, "", "filter -m model.json --state state.json -o out.csv part.csv").status == 0);
  const std::string state = folder.read("state.json");
  // Layout and whitespace do not change the model; a number does.
  folder.write("spaced.json", replace(setup.model, "\"A\": [[1, 1], [0, 0.98]]", "\"A\" :\n [ [1, 1],\n [0, 0.980] ]"));
  CHECK(run_statewise_with(folder, "", "filter -m spaced.json --state state.json -o out.csv part.csv").status == 0);
  folder.write("other.json", replace(setup.model, "\"Q\": [0.0004, 0.00002]", "\"Q\": [0.0004, 0.00003]"));
  const std::string saved = folder.read("state.json");
  CommandResult run = run_statewise_with(folder, "", "filter -m other.json --state state.json -o out.csv part.csv");
  CHECK(run.status == 2);
  const std::string fingerprint = saved.substr(saved.find("fnv1a64:"), 24);
  CHECK(run.err.rfind("statewise: error: state.json: model_fingerprint: the state was saved for another model (" +
                          fingerprint + ", states [\"air_temp\",\"warming_rate\"]) than other.json (fnv1a64:",
                      0) == 0);
  CHECK(run.err.find("; --reset starts again from the model's prior\n") != std::string::npos);
  CHECK(folder.read("state.json") == saved);
  run = run_statewise_with(folder, "", "filter -m other.json --state state.json -o out.csv part.csv --reset");
  CHECK(run.status == 0);
  CHECK(run.err ==
        "statewise: warning: state.json: --reset: the saved state is ignored; the filter starts from the model's prior\n");
  CHECK(lines_of(folder.read("out.csv")).size() == 101);
  // Other settings change the estimates too.
  run = run_statewise_with(folder, "", "filter -m other.json --state state.json -o out.csv part.csv --reject 0.99");
  CHECK(run.status == 2);
  CHECK(run.err ==
        "statewise: error: state.json: settings: the state was saved with \"numerics=plain reject= regular=0 "
        "duplicates=error digits=0 format=csv\", but this run has \"numerics=plain reject=0.99 regular=0 "
        "duplicates=error digits=0 format=csv\"; the estimates would differ from one uninterrupted run (--reset "
        "starts again)\n");
}

TEST_CASE("--state refuses --sort and --reset needs --state") {
  ScratchFolder folder;
  folder.write("model.json", cold_room_model());
  folder.write("part.csv", rows_text(cold_room_lines(10), 0, 10));
  CommandResult run = run_statewise_with(folder, "", "filter -m model.json --state state.json --sort part.csv");
  CHECK(run.status == 2);
  CHECK(run.err ==
        "statewise: error: --sort: cannot be used with --state: a resumed run skips rows at or before the saved "
        "time, so the log must come in time order\n");
  run = run_statewise_with(folder, "", "filter -m model.json --reset part.csv");
  CHECK(run.status == 2);
  CHECK(run.err == "statewise: error: --reset: needs --state FILE\n");
  run = run_statewise_with(folder, "", "filter -m model.json --append part.csv");
  CHECK(run.status == 2);
  CHECK(run.err ==
        "statewise: error: --append: needs -o FILE (a regular file); standard output cannot be appended to\n");
}
