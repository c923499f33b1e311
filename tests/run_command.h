#pragma once
// Runs a shell command line and captures what it prints, for tests of the statewise program itself.

#include <sys/wait.h>

#include <cstdio>
#include <fstream>
#include <sstream>
#include <string>

namespace statewise::test {

/// What a command printed and how it ended.
struct CommandResult {
  int status = -1;     ///< exit status (0-255), or -1 when it did not exit normally
  std::string output;  ///< standard output (with standard error too when the command line adds 2>&1)
};

/// Runs `command_line` with /bin/sh.
inline CommandResult run_command(const std::string& command_line) {
  CommandResult result;
  FILE* pipe = popen(command_line.c_str(), "r");
  if (pipe == nullptr) return result;
  char buffer[4096];
  std::size_t count = 0;
  while ((count = std::fread(buffer, 1, sizeof buffer, pipe)) > 0) result.output.append(buffer, count);
  const int status = pclose(pipe);
  if (status != -1 && WIFEXITED(status)) result.status = WEXITSTATUS(status);
  return result;
}

/// The statewise program under test, quoted for the shell, followed by `arguments`.
inline std::string statewise_command(const std::string& arguments) {
  return std::string("'") + STATEWISE_BINARY + "' " + arguments;
}

/// The whole content of a file ("" when it cannot be read).
inline std::string read_text_file(const std::string& path) {
  std::ifstream file(path, std::ios::binary);
  std::ostringstream text;
  text << file.rdbuf();
  return text.str();
}

}  // namespace statewise::test
