// Tests of `statewise smooth --lag K` (docs/cli.md): it agrees with `smooth` and `filter` where the
// definition of the fixed-lag estimate says it must, refuses diffuse models, and streams: each row
// comes out as soon as K more rows have gone in, through pipes.

#include <doctest/doctest.h>
#include <poll.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <filesystem>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "cli_run.h"
#include "run_command.h"

using namespace statewise::testing;  // ScratchFolder, run_statewise, CommandResult, Table

namespace {

const std::string kExamples = STATEWISE_SOURCE_DIR "/examples/";

std::string example(const std::string& name) { return "'" + kExamples + name + "'"; }

// `statewise smooth` with and without --lag on the same arguments.
std::string smooth_arguments(const std::string& scenario, const std::string& extra) {
  return "smooth -m " + example(scenario + "/model.json") + " " + example(scenario + "/data.csv") + " " + extra;
}

// The lines of a text.
std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> lines;
  std::string::size_type begin = 0;
  for (std::string::size_type end; (end = text.find('\n', begin)) != std::string::npos; begin = end + 1)
    lines.push_back(text.substr(begin, end - begin));
  return lines;
}

// statewise running with its standard input and output on pipes, so that a test can write rows one
// at a time and read what comes out in between. Reads give up after a timeout, so that a program
// that does not stream makes the test fail instead of hang.
class PipedStatewise {
 public:
  PipedStatewise(const std::string& folder, const std::vector<std::string>& arguments) {
    int to_child[2], from_child[2];
    REQUIRE(::pipe(to_child) == 0);
    REQUIRE(::pipe(from_child) == 0);
    pid_ = ::fork();
    REQUIRE(pid_ >= 0);
    if (pid_ == 0) {
      ::dup2(to_child[0], 0);
      ::dup2(from_child[1], 1);
      ::close(to_child[0]);
      ::close(to_child[1]);
      ::close(from_child[0]);
      ::close(from_child[1]);
      if (::chdir(folder.c_str()) != 0) ::_exit(126);
      std::vector<std::string> words = {STATEWISE_BINARY};
      words.insert(words.end(), arguments.begin(), arguments.end());
      std::vector<char*> argv;
      for (std::string& word : words) argv.push_back(word.data());
      argv.push_back(nullptr);
      ::execv(STATEWISE_BINARY, argv.data());
      ::_exit(127);
    }
    ::close(to_child[0]);
    ::close(from_child[1]);
    input_ = to_child[1];
    output_ = from_child[0];
  }
  PipedStatewise(const PipedStatewise&) = delete;
  PipedStatewise& operator=(const PipedStatewise&) = delete;
  ~PipedStatewise() {
    close_input();
    if (output_ >= 0) ::close(output_);
    if (pid_ > 0) {
      ::kill(pid_, SIGKILL);  // only when the test gave up on it; the process is ours
      ::waitpid(pid_, nullptr, 0);
    }
  }

  // Writes text to the program's standard input.
  bool write(const std::string& text) {
    std::size_t done = 0;
    while (done < text.size()) {
      const ssize_t count = ::write(input_, text.data() + done, text.size() - done);
      if (count <= 0) return false;
      done += static_cast<std::size_t>(count);
    }
    return true;
  }
  // Closes the program's standard input (the end of the log).
  void close_input() {
    if (input_ >= 0) ::close(input_);
    input_ = -1;
  }
  // The next line the program writes, without its line break; "<timeout>" when none comes within
  // the timeout, "<end>" when the output ends.
  std::string read_line() {
    for (;;) {
      const std::string::size_type end = pending_.find('\n');
      if (end != std::string::npos) {
        std::string line = pending_.substr(0, end);
        pending_.erase(0, end + 1);
        return line;
      }
      pollfd ready{output_, POLLIN, 0};
      const int polled = ::poll(&ready, 1, kTimeoutMilliseconds);
      if (polled < 0 && errno == EINTR) continue;
      if (polled <= 0) return "<timeout>";
      char buffer[4096];
      const ssize_t count = ::read(output_, buffer, sizeof buffer);
      if (count <= 0) return "<end>";
      pending_.append(buffer, static_cast<std::size_t>(count));
    }
  }
  // Waits for the program to exit; its exit status, or -1.
  int wait() {
    int status = 0;
    const pid_t done = ::waitpid(pid_, &status, 0);
    pid_ = -1;
    return done > 0 && WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  }

 private:
  // Generous: the machine running the tests may be busy; a streaming program answers in milliseconds.
  static constexpr int kTimeoutMilliseconds = 20000;
  pid_t pid_ = -1;
  int input_ = -1, output_ = -1;
  std::string pending_;
};

}  // namespace

TEST_SUITE("cli") {
  TEST_CASE("smooth --lag K with K at least the number of rows writes exactly what smooth writes") {
    // First principles: with K >= rows every row is estimated from the whole log, which is the
    // fixed-interval smoother's estimate; both run the same arithmetic, so the text is identical.
    ScratchFolder folder;
    for (const std::string scenario : {"cold-room", "water-tank"}) {
      for (const std::string flags : {"--missing -999", "--missing -999 --innovations --reject 0.999"}) {
        INFO(scenario << " " << flags);
        const CommandResult whole = run_statewise(folder, smooth_arguments(scenario, flags));
        const CommandResult lagged = run_statewise(folder, smooth_arguments(scenario, flags + " --lag 3000"));
        REQUIRE(whole.status == 0);
        CHECK(lagged.err == "");
        REQUIRE(lagged.status == 0);
        CHECK(lagged.out == whole.out);
      }
    }
  }

  TEST_CASE("smooth --lag 0 writes the filter's means and standard deviations") {
    // By definition the estimate of row t given rows 1..t is the filter's; every column of the
    // smoothed table (the filter's table has the innovation columns besides) is the same text.
    ScratchFolder folder;
    const std::string model = example("water-tank/model.json"), data = example("water-tank/data.csv");
    const CommandResult filtered = run_statewise(folder, "filter -m " + model + " " + data);
    const CommandResult lagged = run_statewise(folder, "smooth --lag 0 -m " + model + " " + data);
    REQUIRE(filtered.status == 0);
    REQUIRE(lagged.status == 0);
    const Table f = parse_table(filtered.out), s = parse_table(lagged.out);
    REQUIRE(f.rows.size() == s.rows.size());
    REQUIRE(s.rows.size() > 1000);
    CHECK(s.header.size() == 9);
    std::size_t differing = 0;
    for (std::size_t r = 0; r < s.rows.size(); ++r)
      for (const std::string& column : s.header) differing += s.text(r, column) != f.text(r, column);
    CHECK(differing == 0);
  }

  TEST_CASE("smooth --lag 10: the last 11 rows are the smoother's and earlier rows use 10 rows ahead") {
    // The rows written at the end of the log are estimated from the whole log (the fixed-interval
    // smoother's); the first row is estimated from rows 1..11 only, so it differs from smooth's.
    ScratchFolder folder;
    const CommandResult whole = run_statewise(folder, smooth_arguments("water-tank", ""));
    const CommandResult lagged = run_statewise(folder, smooth_arguments("water-tank", "--lag 10"));
    REQUIRE(whole.status == 0);
    REQUIRE(lagged.status == 0);
    const std::vector<std::string> w = lines_of(whole.out), l = lines_of(lagged.out);
    REQUIRE(w.size() == l.size());
    CHECK(l[0] == w[0]);
    // The last 10 rows come from the final flush; the one before them was written when the last row
    // arrived, so it too is estimated from the whole log. The row before that misses the last row.
    for (std::size_t i = w.size() - 11; i < w.size(); ++i) CHECK(l[i] == w[i]);
    CHECK(l[1] != w[1]);
    CHECK(l[w.size() - 12] != w[w.size() - 12]);
  }

  TEST_CASE("smooth --lag writes the lag into the report") {
    // Specification: docs/outputs.md, the JSON report.
    ScratchFolder folder;
    const CommandResult result =
        run_statewise(folder, smooth_arguments("cold-room", "--missing -999 --lag 4 --report report.json -o out.csv"));
    REQUIRE(result.status == 0);
    const nlohmann::json report = nlohmann::json::parse(folder.read("report.json"));
    CHECK(report["command"] == "smooth");
    CHECK(report["lag"] == 4);
    CHECK(report["rows"] == 2880);
  }

  TEST_CASE("smooth --lag refuses a model with diffuse initial states naming the key") {
    // Decision: docs/decisions.md, "smooth --lag and diffuse initial states".
    ScratchFolder folder;
    folder.write("model.json", R"({"version": 1, "states": ["level"], "observations": ["y"],
      "A": 1, "C": 1, "Q": 0.1, "R": 1, "initial": {"diffuse": true}})");
    folder.write("data.csv", "y\n1\n2\n");
    const CommandResult result = run_statewise(folder, "smooth --lag 1 -m model.json data.csv");
    CHECK(result.status == 2);
    CHECK(result.out == "");
    CHECK(result.err ==
          "statewise: error: model.json: initial.diffuse: smooth --lag needs a proper initial covariance for every "
          "state (the exact diffuse smoother works on the whole log); give the states an initial covariance "
          "instead of \"diffuse\", or run smooth without --lag\n");
  }

  TEST_CASE("smooth --lag refuses a negative lag") {
    ScratchFolder folder;
    const CommandResult result = run_statewise(folder, smooth_arguments("cold-room", "--lag -1"));
    CHECK(result.status == 2);
    CHECK(result.out == "");
  }

  TEST_CASE("smooth --lag 2 streams: each row comes out once two more rows have gone in") {
    // Through pipes: the header at once, then row r after row r+2 is written, the last two at the
    // end of the input; the whole text equals that of the same command on the log as a file.
    ScratchFolder folder;
    const std::string model = kExamples + "cold-room/model.json";
    std::vector<std::string> rows = lines_of(statewise::test::read_text_file(kExamples + "cold-room/data.csv"));
    rows.resize(9);  // the header and eight rows
    folder.write("head.csv", [&] {
      std::string text;
      for (const std::string& row : rows) text += row + "\n";
      return text;
    }());
    const CommandResult expected = run_statewise(folder, "smooth --lag 2 -m '" + model + "' head.csv");
    REQUIRE(expected.status == 0);
    const std::vector<std::string> expected_lines = lines_of(expected.out);
    REQUIRE(expected_lines.size() == 9);

    struct sigaction ignore {}, previous {};
    ignore.sa_handler = SIG_IGN;
    ::sigaction(SIGPIPE, &ignore, &previous);  // a program that died must fail the test, not end it
    {
      PipedStatewise program(folder.path(""), {"smooth", "--lag", "2", "-m", model});
      REQUIRE(program.write(rows[0] + "\n"));
      CHECK(program.read_line() == expected_lines[0]);  // the header, before any row
      REQUIRE(program.write(rows[1] + "\n" + rows[2] + "\n"));
      for (std::size_t r = 3; r < rows.size(); ++r) {
        REQUIRE(program.write(rows[r] + "\n"));
        INFO("after writing row " << r);
        CHECK(program.read_line() == expected_lines[r - 2]);  // row r-2, two rows later
      }
      program.close_input();
      CHECK(program.read_line() == expected_lines[7]);
      CHECK(program.read_line() == expected_lines[8]);
      CHECK(program.read_line() == "<end>");
      CHECK(program.wait() == 0);
    }
    ::sigaction(SIGPIPE, &previous, nullptr);
  }
}
