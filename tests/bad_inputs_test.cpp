// The bad-input corpus (tests/bad-inputs/, layout in its README.md): every case runs through the
// built statewise program in a scratch copy of its folder, under a time limit, and must end with the
// expected exit status (src/cli/exit_codes.h), print the expected words on standard error, not be
// killed by a signal, not hang, and leave the folder exactly as it was (no output file, no
// temporary file, no input changed). Cases named good-* are sanity checks of inputs that must work.

#include <doctest/doctest.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "cli_run.h"
#include "run_command.h"

namespace {

namespace fs = std::filesystem;
using statewise::testing::ScratchFolder;

const fs::path kCorpus = fs::path(STATEWISE_SOURCE_DIR) / "tests" / "bad-inputs";
// Seconds a case may run; a hang fails. Generous because the sanitizer build is several times slower.
constexpr int kTimeLimitSeconds = 120;
// The control files of a case; everything else in its folder is an input file.
const std::vector<std::string> kControlFiles = {"args", "status", "words", "generate", "README.md"};

std::string read_file(const fs::path& path) { return statewise::test::read_text_file(path.string()); }

// The lines of a control file, without their line ends.
std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> lines;
  for (std::size_t start = 0; start < text.size();) {
    const std::size_t end = std::min(text.find('\n', start), text.size());
    lines.push_back(text.substr(start, end - start));
    start = end + 1;
  }
  return lines;
}

std::string replace_all(std::string text, const std::string& from, const std::string& to) {
  for (std::size_t at = text.find(from); at != std::string::npos; at = text.find(from, at + to.size()))
    text.replace(at, from.size(), to);
  return text;
}

// The escapes of a `generate` line's text: \n \r \t \\ and \xHH (any byte, NUL included).
std::string unescape(const std::string& text) {
  std::string bytes;
  for (std::size_t i = 0; i < text.size(); ++i) {
    if (text[i] != '\\' || i + 1 == text.size()) {
      bytes += text[i];
      continue;
    }
    const char next = text[++i];
    if (next == 'n') bytes += '\n';
    else if (next == 'r') bytes += '\r';
    else if (next == 't') bytes += '\t';
    else if (next == 'x' && i + 2 < text.size()) {
      bytes += static_cast<char>(std::stoi(text.substr(i + 1, 2), nullptr, 16));
      i += 2;
    } else bytes += next;
  }
  return bytes;
}

// Appends to the files named by the `generate` lines `NAME COUNT TEXT`: TEXT (escaped) COUNT times.
void generate_files(const std::string& spec, const ScratchFolder& folder) {
  for (const std::string& line : lines_of(spec)) {
    if (line.empty() || line[0] == '#') continue;
    const std::size_t first = line.find(' ');
    const std::size_t second = line.find(' ', first + 1);
    REQUIRE_MESSAGE(second != std::string::npos, "generate line needs NAME COUNT TEXT: " << line);
    const std::string name = line.substr(0, first);
    const long count = std::stol(line.substr(first + 1, second - first - 1));
    const std::string piece = unescape(line.substr(second + 1));
    std::ofstream out(folder.path(name), std::ios::binary | std::ios::app);
    for (long k = 0; k < count; ++k) out.write(piece.data(), static_cast<std::streamsize>(piece.size()));
    REQUIRE(out.good());
  }
}

std::string shell_quote(const std::string& word) { return "'" + replace_all(word, "'", "'\\''") + "'"; }

// Every file under the folder with its content: what a failed run must leave unchanged.
std::map<std::string, std::string> snapshot(const std::string& folder) {
  std::map<std::string, std::string> files;
  for (const auto& entry : fs::recursive_directory_iterator(folder))
    files[entry.path().string()] = entry.is_regular_file() ? read_file(entry.path()) : std::string("<folder>");
  return files;
}

struct Outcome {
  int status = -1;  // exit status, or 128 + signal when killed
  std::string out, err;
};

Outcome run_case(const fs::path& case_folder, const ScratchFolder& work, const ScratchFolder& logs) {
  std::string command = "cd " + shell_quote(work.path("")) + " && ";
#if !defined(STATEWISE_SANITIZED)
  // Bounded memory: 4 GiB of address space (not under AddressSanitizer, which reserves terabytes).
  command += "ulimit -v 4194304 && ";
#endif
  command += "exec timeout -k 5 " + std::to_string(kTimeLimitSeconds) + " " + shell_quote(STATEWISE_BINARY);
  for (const std::string& argument : lines_of(read_file(case_folder / "args")))
    command += " " + shell_quote(replace_all(argument, "{case}", work.path("").substr(0, work.path("").size() - 1)));
  command += " > " + shell_quote(logs.path("stdout")) + " 2> " + shell_quote(logs.path("stderr")) + " < /dev/null";
  const int raw = std::system(command.c_str());
  Outcome outcome;
  outcome.status = WIFEXITED(raw) ? WEXITSTATUS(raw) : 128 + (WIFSIGNALED(raw) ? WTERMSIG(raw) : 0);
  outcome.out = logs.read("stdout");
  outcome.err = logs.read("stderr");
  return outcome;
}

}  // namespace

TEST_CASE("bad inputs: every case of the corpus fails cleanly with its status and words") {
  std::vector<fs::path> cases;
  for (const auto& entry : fs::directory_iterator(kCorpus))
    if (entry.is_directory()) cases.push_back(entry.path());
  std::sort(cases.begin(), cases.end());
  // The corpus must not shrink unnoticed (at least 40 cases, tests/bad-inputs/README.md).
  CHECK(cases.size() >= 40);
  for (const fs::path& case_folder : cases) {
    const std::string name = case_folder.filename().string();
    CAPTURE(name);
    const bool good = name.rfind("good-", 0) == 0;
    ScratchFolder work, logs;
    for (const auto& entry : fs::directory_iterator(case_folder)) {
      const std::string file = entry.path().filename().string();
      if (std::find(kControlFiles.begin(), kControlFiles.end(), file) == kControlFiles.end())
        fs::copy(entry.path(), work.path(file), fs::copy_options::recursive);
    }
    if (fs::exists(case_folder / "generate")) generate_files(read_file(case_folder / "generate"), work);
    const auto before = snapshot(work.path(""));

    const Outcome outcome = run_case(case_folder, work, logs);
    CAPTURE(outcome.err);
    const int expected = std::stoi(read_file(case_folder / "status"));
    // 124 is timeout's status for a hang, 128 + n a signal (a crash, or the time limit's KILL).
    CHECK_MESSAGE(outcome.status != 124, "hang: no exit within " << kTimeLimitSeconds << " s");
    CHECK_MESSAGE(outcome.status < 124, "killed by signal " << outcome.status - 128);
    CHECK(outcome.status == expected);
    const std::string& said = good ? outcome.out : outcome.err;
    for (const std::string& words : lines_of(read_file(case_folder / "words")))
      if (!words.empty()) CHECK_MESSAGE(said.find(words) != std::string::npos, "missing words: " << words);
    if (!good) {
      CHECK(outcome.status != 0);
      // Nothing written, nothing left behind, no input changed.
      CHECK(snapshot(work.path("")) == before);
    }
  }
}
