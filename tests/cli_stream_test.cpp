// `statewise filter` as a live stream and its progress line: the program runs with its standard input
// and output (or standard error) connected to this test through pipes or a pseudo-terminal, and the
// test checks what arrives before it sends more. Source of the expectations: the rules in
// docs/cli.md ("Live streaming", "Progress line"), and, for the rows, the same rows filtered from a
// file in one run.

#include <doctest/doctest.h>
#include <fcntl.h>
#include <poll.h>
#include <pty.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <fstream>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "cli_run.h"

namespace {

using statewise::testing::ScratchFolder;

std::string model_text() {
  std::ifstream in(STATEWISE_SOURCE_DIR "/examples/cold-room/model.json");
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

std::vector<std::string> log_lines(std::size_t rows) {
  std::ifstream in(STATEWISE_SOURCE_DIR "/examples/cold-room/data.csv");
  std::vector<std::string> lines;
  std::string line;
  while (lines.size() < rows + 1 && std::getline(in, line)) lines.push_back(line + "\n");
  return lines;
}

void write_text(int descriptor, const std::string& text) {
  std::size_t done = 0;
  while (done < text.size()) {
    const ssize_t written = ::write(descriptor, text.data() + done, text.size() - done);
    REQUIRE(written > 0);
    done += static_cast<std::size_t>(written);
  }
}

// Reads from `descriptor` into `text` until it holds `lines` line breaks, for at most 10 s (so that a
// program that holds rows back fails the test instead of hanging it). False on timeout or end.
bool read_lines(int descriptor, std::string& text, std::size_t lines) {
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(10);
  auto count = [&] { return static_cast<std::size_t>(std::count(text.begin(), text.end(), '\n')); };
  while (count() < lines) {
    const auto left =
        std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now()).count();
    if (left <= 0) return false;
    pollfd watch{descriptor, POLLIN, 0};
    if (poll(&watch, 1, static_cast<int>(left)) <= 0) return false;
    char buffer[4096];
    const ssize_t got = ::read(descriptor, buffer, sizeof buffer);
    if (got <= 0) return false;
    text.append(buffer, static_cast<std::size_t>(got));
  }
  return true;
}

// Starts `statewise filter -m model.json - ARGS` in `folder` with standard input from `input`, standard
// output to `output` and standard error to `error` (descriptors of this process; -1 = /dev/null).
pid_t start_filter(const ScratchFolder& folder, int input, int output, int error, std::vector<std::string> args) {
  const pid_t child = fork();
  REQUIRE(child >= 0);
  if (child == 0) {
    if (chdir(folder.path("").c_str()) != 0) _exit(120);
    const int null = open("/dev/null", O_RDWR);
    dup2(input, STDIN_FILENO);
    dup2(output >= 0 ? output : null, STDOUT_FILENO);
    dup2(error >= 0 ? error : null, STDERR_FILENO);
    // Only the three standard descriptors: a copy of a pipe's writing end would keep its input open.
    for (int descriptor = 3; descriptor < 1024; ++descriptor) close(descriptor);
    std::vector<std::string> all = {STATEWISE_BINARY, "filter", "-m", "model.json", "-"};
    all.insert(all.end(), args.begin(), args.end());
    std::vector<char*> argv;
    for (std::string& arg : all) argv.push_back(arg.data());
    argv.push_back(nullptr);
    execv(STATEWISE_BINARY, argv.data());
    _exit(121);
  }
  return child;
}

int wait_for(pid_t child) {
  int status = 0;
  REQUIRE(waitpid(child, &status, 0) == child);
  return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

// Feeds `lines` (header first) into `descriptor` over about 1.4 s, so that the run lasts longer than
// the second after which the progress line appears, then closes it.
void trickle(int descriptor, const std::vector<std::string>& lines) {
  for (std::size_t i = 0; i < lines.size(); ++i) {
    write_text(descriptor, lines[i]);
    std::this_thread::sleep_for(std::chrono::milliseconds(1400) / lines.size());
  }
  close(descriptor);
}

}  // namespace

TEST_CASE("filter on pipes writes each estimate row before the next row comes in") {
  ScratchFolder folder;
  folder.write("model.json", model_text());
  const std::vector<std::string> lines = log_lines(6);
  // Reference: the same rows filtered from a file in one run.
  std::string whole;
  for (const std::string& line : lines) whole += line;
  folder.write("log.csv", whole);
  REQUIRE(statewise::testing::run_statewise(folder, "filter -m model.json log.csv -o expected.csv").status == 0);
  const std::string expected = folder.read("expected.csv");

  int to_child[2], from_child[2];
  REQUIRE(pipe(to_child) == 0);
  REQUIRE(pipe(from_child) == 0);
  const pid_t child = start_filter(folder, to_child[0], from_child[1], -1, {});
  close(to_child[0]);
  close(from_child[1]);
  std::string received;
  write_text(to_child[1], lines[0]);
  for (std::size_t row = 1; row < lines.size(); ++row) {
    write_text(to_child[1], lines[row]);
    // The header and this row's estimates arrive while the program waits for the next row.
    CHECK_MESSAGE(read_lines(from_child[0], received, row + 1), "row " << row << " did not come back within 10 s");
  }
  close(to_child[1]);
  char rest[256];
  while (::read(from_child[0], rest, sizeof rest) > 0) {
  }
  close(from_child[0]);
  CHECK(wait_for(child) == 0);
  CHECK(received == expected);
}

TEST_CASE("the progress line on a terminal and silence elsewhere") {
  ScratchFolder folder;
  folder.write("model.json", model_text());
  const std::vector<std::string> lines = log_lines(70);

  for (const bool quiet : {false, true}) {
    CAPTURE(quiet);
    int terminal = -1, terminal_side = -1;
    REQUIRE(openpty(&terminal, &terminal_side, nullptr, nullptr, nullptr) == 0);
    int to_child[2];
    REQUIRE(pipe(to_child) == 0);
    std::vector<std::string> args = {"-o", "out.csv"};
    if (quiet) args.push_back("--quiet");
    const pid_t child = start_filter(folder, to_child[0], -1, terminal_side, args);
    close(to_child[0]);
    close(terminal_side);
    trickle(to_child[1], lines);
    CHECK(wait_for(child) == 0);
    std::string shown;
    char buffer[4096];
    for (;;) {  // the child has ended: read what it left on the terminal (EIO at the end)
      pollfd watch{terminal, POLLIN, 0};
      if (poll(&watch, 1, 100) <= 0) break;
      const ssize_t got = ::read(terminal, buffer, sizeof buffer);
      if (got <= 0) break;
      shown.append(buffer, static_cast<std::size_t>(got));
    }
    close(terminal);
    if (quiet) {
      CHECK(shown.empty());
    } else {
      // "\rstatewise: N rows, R rows/s" (no percentage: the size of a pipe's input is unknown), then
      // the line blanked out and the cursor back at its start.
      REQUIRE(shown.rfind("\rstatewise: ", 0) == 0);
      CHECK(shown.find(" rows, ") != std::string::npos);
      CHECK(shown.find(" rows/s") != std::string::npos);
      CHECK(shown.find('%') == std::string::npos);
      CHECK(shown.find('\n') == std::string::npos);
      const std::size_t last = shown.rfind("\rstatewise: ");
      std::string text = shown.substr(last + 1, shown.find('\r', last + 1) - last - 1);
      const std::size_t width = text.find_last_not_of(' ') + 1;  // without the blanking of a longer line
      CHECK(shown.substr(shown.size() - width - 2) == "\r" + std::string(width, ' ') + "\r");
    }
  }

  // Standard error a file: nothing on it either.
  int to_child[2];
  REQUIRE(pipe(to_child) == 0);
  const int error_file = open(folder.path("err.txt").c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
  REQUIRE(error_file >= 0);
  const pid_t child = start_filter(folder, to_child[0], -1, error_file, {"-o", "out.csv"});
  close(to_child[0]);
  close(error_file);
  trickle(to_child[1], lines);
  CHECK(wait_for(child) == 0);
  CHECK(folder.read("err.txt").empty());
}
