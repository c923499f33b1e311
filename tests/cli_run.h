#pragma once
// Running the statewise binary from tests: a scratch folder for input files, the command's exit
// status, standard output and standard error, and a reader for the CSV tables it writes.

#include <doctest/doctest.h>
#include <sys/wait.h>

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

namespace statewise::testing {

// A fresh folder under the temporary directory, removed with everything in it at the end of the scope.
class ScratchFolder {
 public:
  ScratchFolder() {
    const char* base = std::getenv("TMPDIR");
    std::string pattern = std::string(base != nullptr ? base : "/tmp") + "/statewise_test_XXXXXX";
    REQUIRE(::mkdtemp(pattern.data()) != nullptr);
    path_ = pattern;
  }
  ~ScratchFolder() {
    std::error_code ignored;
    std::filesystem::remove_all(path_, ignored);
  }
  ScratchFolder(const ScratchFolder&) = delete;
  ScratchFolder& operator=(const ScratchFolder&) = delete;

  // Writes `text` to `name` in the folder and returns its path.
  std::string write(const std::string& name, const std::string& text) const {
    const std::string file = path(name);
    std::ofstream out(file, std::ios::binary);
    out << text;
    REQUIRE(out.good());
    return file;
  }
  std::string path(const std::string& name) const { return path_ + "/" + name; }
  std::string read(const std::string& name) const {
    std::ifstream in(path(name), std::ios::binary);
    std::ostringstream text;
    text << in.rdbuf();
    return text.str();
  }

 private:
  std::string path_;
};

struct CommandResult {
  int status = -1;  // exit status
  std::string out;  // standard output
  std::string err;  // standard error
};

// Runs `statewise ARGUMENTS` (a shell word list; quote as needed) inside `folder`, with
// `environment` (e.g. "X=1 ") before it and standard input from `input` (a name in the folder, or
// /dev/null).
inline CommandResult run_statewise_with(const ScratchFolder& folder, const std::string& environment,
                                        const std::string& arguments, const std::string& input = "/dev/null") {
  const std::string command = "cd '" + folder.path("") + "' && " + environment + "'" STATEWISE_BINARY "' " +
                              arguments + " > .stdout 2> .stderr < " + input;
  const int raw = std::system(command.c_str());
  CommandResult result;
  result.status = WIFEXITED(raw) ? WEXITSTATUS(raw) : -1;
  result.out = folder.read(".stdout");
  result.err = folder.read(".stderr");
  return result;
}

// Runs `statewise ARGUMENTS` (a shell word list; quote as needed) inside `folder`.
inline CommandResult run_statewise(const ScratchFolder& folder, const std::string& arguments) {
  return run_statewise_with(folder, "", arguments);
}

// A CSV table as statewise writes it (no quoted fields in these tests).
struct Table {
  std::vector<std::string> header;
  std::vector<std::vector<std::string>> rows;

  std::size_t column(const std::string& name) const {
    for (std::size_t i = 0; i < header.size(); ++i)
      if (header[i] == name) return i;
    FAIL("no column " << name);
    return 0;
  }
  // The cell of row r in the named column as a number (NaN when empty).
  double number(std::size_t r, const std::string& name) const {
    const std::string& cell = rows.at(r).at(column(name));
    return cell.empty() ? std::nan("") : std::stod(cell);
  }
  const std::string& text(std::size_t r, const std::string& name) const {
    return rows.at(r).at(column(name));
  }
};

inline std::vector<std::string> split_fields(const std::string& line) {
  std::vector<std::string> fields;
  std::string field;
  std::istringstream in(line);
  while (std::getline(in, field, ',')) fields.push_back(field);
  if (!line.empty() && line.back() == ',') fields.emplace_back();
  return fields;
}

inline Table parse_table(const std::string& text) {
  Table table;
  std::istringstream lines(text);
  std::string line;
  if (std::getline(lines, line)) table.header = split_fields(line);
  while (std::getline(lines, line))
    if (!line.empty()) table.rows.push_back(split_fields(line));
  return table;
}

}  // namespace statewise::testing
