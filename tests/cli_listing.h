#pragma once
// What the statewise program itself says its commands and options are, read from its --help
// output (CLI11's layout), for tests that check generated documents against the real program.

#include <sstream>
#include <string>
#include <vector>

#include "run_command.h"

namespace statewise::test {

/// The entries of one section ("Options:", "Positionals:", "Subcommands:") of a help text: each
/// entry is its first line with its indented continuation lines appended.
inline std::vector<std::string> help_entries(const std::string& help, const std::string& section) {
  std::vector<std::string> entries;
  std::istringstream lines(help);
  std::string line;
  bool inside = false;
  while (std::getline(lines, line)) {
    if (line == section) {
      inside = true;
    } else if (inside && line.empty()) {
      if (!entries.empty()) break;
    } else if (inside && line.rfind("    ", 0) == 0 && !entries.empty()) {
      entries.back() += " " + line.substr(line.find_first_not_of(' '));
    } else if (inside && line.rfind("  ", 0) == 0) {
      entries.push_back(line.substr(2));
    } else if (inside) {
      break;
    }
  }
  return entries;
}

/// The first word of an entry: "-m,--model", "input", "filter".
inline std::string first_word(const std::string& text) { return text.substr(0, text.find(' ')); }

/// The commands `statewise --help` lists.
inline std::vector<std::string> listed_commands() {
  std::vector<std::string> commands;
  for (const auto& entry : help_entries(run_command(statewise_command("--help")).output, "Subcommands:"))
    commands.push_back(first_word(entry));
  return commands;
}

/// The option names of a command as `statewise COMMAND --help` lists them, one name each
/// ("-m", "--model", ...); "" lists the program's own options.
inline std::vector<std::string> listed_option_names(const std::string& command) {
  std::vector<std::string> names;
  const std::string help = run_command(statewise_command(command.empty() ? "--help" : command + " --help")).output;
  for (const auto& entry : help_entries(help, "Options:")) {
    std::istringstream parts(first_word(entry));
    std::string name;
    while (std::getline(parts, name, ',')) names.push_back(name);
  }
  return names;
}

/// The positional arguments of a command as its --help lists them ("input").
inline std::vector<std::string> listed_positionals(const std::string& command) {
  std::vector<std::string> names;
  for (const auto& entry : help_entries(run_command(statewise_command(command + " --help")).output, "Positionals:"))
    names.push_back(first_word(entry));
  return names;
}

}  // namespace statewise::test
