// Data safety of the statewise program's output files (src/cli/output_file.h; the guarantees are
// listed in docs/outputs.md, "What happens to existing files"): a run killed by a signal removes its
// temporary file, a write beyond a file-size limit fails with exit status 4 and keeps the old
// output. Runs the built binary (STATEWISE_BINARY).

#include <doctest/doctest.h>
#include <fcntl.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <filesystem>
#include <string>
#include <thread>

#include "cli_run.h"

namespace {

namespace fs = std::filesystem;
using statewise::testing::ScratchFolder;

const std::string kModel = R"({"version": 1, "observations": ["a"], "A": 1, "C": 1, "Q": 0.01, "R": 0.1})";

// The names in `folder` that start with ".out.csv.tmp-": OutputFile's temporaries for out.csv.
int temporaries_in(const ScratchFolder& folder) {
  int count = 0;
  for (const auto& entry : fs::directory_iterator(folder.path("")))
    if (entry.path().filename().string().rfind(".out.csv.tmp-", 0) == 0) ++count;
  return count;
}

// Starts `statewise filter -m model.json - -o out.csv` in `folder` reading standard input from a
// pipe that stays open, so the run waits for rows with its temporary file in place. Returns the
// child's pid; `feed` receives the pipe's writing end.
pid_t start_waiting_filter(const ScratchFolder& folder, int& feed) {
  int ends[2];
  REQUIRE(pipe(ends) == 0);
  const std::string model = folder.path("model.json");
  const std::string output = folder.path("out.csv");
  const pid_t child = fork();
  REQUIRE(child >= 0);
  if (child == 0) {
    dup2(ends[0], STDIN_FILENO);
    close(ends[0]);
    close(ends[1]);
    const int null = open("/dev/null", O_WRONLY);
    dup2(null, STDERR_FILENO);
    execl(STATEWISE_BINARY, STATEWISE_BINARY, "filter", "-m", model.c_str(), "-", "-o", output.c_str(),
          static_cast<char*>(nullptr));
    _exit(127);
  }
  close(ends[0]);
  feed = ends[1];
  return child;
}

void interrupted_run_leaves_old_output(int signal_number) {
  ScratchFolder folder;
  folder.write("model.json", kModel);
  folder.write("out.csv", "old estimates\n");
  int feed = -1;
  const pid_t child = start_waiting_filter(folder, feed);
  const std::string rows = "a\n1\n2\n";
  REQUIRE(write(feed, rows.data(), rows.size()) == static_cast<ssize_t>(rows.size()));
  // Wait (up to 60 s: sanitizer builds start slowly) until the temporary file exists.
  for (int k = 0; k < 600 && temporaries_in(folder) == 0; ++k) std::this_thread::sleep_for(std::chrono::milliseconds(100));
  REQUIRE(temporaries_in(folder) == 1);
  REQUIRE(kill(child, signal_number) == 0);
  int status = 0;
  REQUIRE(waitpid(child, &status, 0) == child);
  close(feed);
  // It dies of the very signal (POSIX: a handler that re-raises after cleaning up), with the
  // temporary removed and the old output untouched.
  CHECK(WIFSIGNALED(status));
  CHECK(WTERMSIG(status) == signal_number);
  CHECK(temporaries_in(folder) == 0);
  CHECK(folder.read("out.csv") == "old estimates\n");
}

}  // namespace

TEST_CASE("output file: SIGTERM during a run removes the temporary and keeps the old output") {
  interrupted_run_leaves_old_output(SIGTERM);
}

TEST_CASE("output file: SIGINT (Ctrl-C) during a run removes the temporary and keeps the old output") {
  interrupted_run_leaves_old_output(SIGINT);
}

TEST_CASE("output file: a write beyond the file-size limit fails with status 4 and keeps the old output") {
  ScratchFolder folder;
  folder.write("model.json", kModel);
  folder.write("out.csv", "old estimates\n");
  std::string log = "a\n";
  for (int k = 0; k < 2000; ++k) log += std::to_string(k) + "\n";  // about 100 KB of estimates
  folder.write("log.csv", log);
  // ulimit -f counts 512-byte blocks (POSIX sh): 16 = 8 KiB. With SIGXFSZ ignored a write past the
  // limit fails with EFBIG (setrlimit(2), RLIMIT_FSIZE); statewise also ignores the signal itself.
  const std::string command = "cd '" + folder.path("") + "' && (ulimit -f 16 && trap '' XFSZ && exec '" STATEWISE_BINARY
                              "' filter -m model.json log.csv -o out.csv) > /dev/null 2> .stderr";
  const int raw = std::system(command.c_str());
  REQUIRE(WIFEXITED(raw));
  CHECK(WEXITSTATUS(raw) == 4);  // kExitOutputFailure, src/cli/exit_codes.h
  // EFBIG's text from the C library (glibc strerror).
  CHECK(folder.read(".stderr") == "statewise: error: out.csv: cannot write: File too large\n");
  CHECK(folder.read("out.csv") == "old estimates\n");
  CHECK(temporaries_in(folder) == 0);
}

TEST_CASE("output file: a refused --report naming the input leaves -o untouched") {
  ScratchFolder folder;
  folder.write("model.json", kModel);
  folder.write("log.csv", "a\n1\n2\n");
  folder.write("out.csv", "old estimates\n");
  const auto result = statewise::testing::run_statewise(folder, "filter -m model.json log.csv -o out.csv --report log.csv");
  CHECK(result.status == 4);
  CHECK(result.err == "statewise: error: log.csv: is the input file; refusing to overwrite the log with its own "
                      "estimates\n");
  // Before the fix -o was already replaced when --report was refused.
  CHECK(folder.read("out.csv") == "old estimates\n");
  CHECK(folder.read("log.csv") == "a\n1\n2\n");
}
