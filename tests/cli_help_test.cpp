// The statewise program's version, help and definition, checked by running it. The lists of commands
// and options are read from the program's own --help output, so the checks cover commands added
// later without being edited.

#include <doctest/doctest.h>

#include <regex>
#include <set>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "cli_listing.h"

using namespace statewise::test;

namespace {

// The option names in a help text's Options section, each as written there ("-m,--model").
std::vector<std::string> listed_options(const std::string& help) {
  std::vector<std::string> names;
  for (const auto& entry : help_entries(help, "Options:")) names.push_back(first_word(entry));
  return names;
}

std::string project_version() {
  const std::string cmake = read_text_file(std::string(STATEWISE_SOURCE_DIR) + "/CMakeLists.txt");
  std::smatch match;
  REQUIRE(std::regex_search(cmake, match, std::regex(R"(project\(statewise VERSION ([0-9]+\.[0-9]+\.[0-9]+))")));
  return match[1];
}

}  // namespace

TEST_CASE("cli: --version prints the version of project() in CMakeLists.txt and exits 0") {
  const CommandResult result = run_command(statewise_command("--version"));
  CHECK(result.status == 0);
  CHECK(result.output == "statewise " + project_version() + "\n");
}

TEST_CASE("cli: the help lists the commands, including help itself") {
  const std::vector<std::string> listed = listed_commands();
  const std::set<std::string> commands(listed.begin(), listed.end());
  for (const std::string expected : {"filter", "smooth", "help"}) CHECK(commands.count(expected) == 1);
}

TEST_CASE("cli: help COMMAND prints exactly what COMMAND --help prints") {
  for (const std::string& command : listed_commands()) {
    INFO("command: " << command);
    const CommandResult by_help = run_command(statewise_command("help " + command));
    const CommandResult by_flag = run_command(statewise_command(command + " --help"));
    CHECK(by_help.status == 0);
    CHECK(by_flag.status == 0);
    CHECK(by_help.output == by_flag.output);
    CHECK(by_help.output.find("Usage: statewise " + command) != std::string::npos);
  }
  const CommandResult top = run_command(statewise_command("help"));
  CHECK(top.status == 0);
  CHECK(top.output == run_command(statewise_command("--help")).output);
}

TEST_CASE("cli: every option and positional of every command states its default or that it is required") {
  for (const std::string& command : listed_commands()) {
    const std::string help = run_command(statewise_command(command + " --help")).output;
    std::vector<std::string> entries = help_entries(help, "Options:");
    const std::vector<std::string> positionals = help_entries(help, "Positionals:");
    entries.insert(entries.end(), positionals.begin(), positionals.end());
    CHECK(!entries.empty());
    for (const std::string& entry : entries) {
      if (first_word(entry) == "-h,--help") continue;
      INFO("statewise " << command << ": " << entry);
      const bool stated = entry.find("[default: ") != std::string::npos || entry.find("[required]") != std::string::npos;
      CHECK(stated);
    }
  }
}

TEST_CASE("cli: the filter and smooth options show their documented defaults") {
  for (const std::string command : {"filter", "smooth"}) {
    const std::string help = run_command(statewise_command(command + " --help")).output;
    INFO(help);
    CHECK(std::regex_search(help, std::regex(R"(-m,--model FILE +Model file [^\n]*\[required\])")));
    CHECK(std::regex_search(help, std::regex(R"(--format \{csv,tsv,jsonl\}[^\[]*\[default: csv\])")));
    CHECK(std::regex_search(help, std::regex(R"(--report FILE[^\[]*\[default: none\])")));
    CHECK(std::regex_search(help, std::regex(R"(--digits INT[^\[]*\[0 - 17\][^\[]*\[default: 0\])")));
  }
}

TEST_CASE("cli: help with an unknown command exits 2 and names the commands") {
  const CommandResult result = run_command(statewise_command("help smoth 2>&1"));
  CHECK(result.status == 2);
  CHECK(result.output.rfind("statewise: error: command: expected one of filter, smooth", 0) == 0);
  CHECK(result.output.find("got \"smoth\"; did you mean \"smooth\"?") != std::string::npos);
}

TEST_CASE("cli: a wrong --format value exits 2 with a did-you-mean hint") {
  const CommandResult result = run_command(statewise_command("smooth -m model.json --format json 2>&1"));
  CHECK(result.status == 2);
  CHECK(result.output ==
        "statewise: error: --format: expected one of csv, tsv or jsonl, got \"json\"; did you mean \"jsonl\"?; "
        "see 'statewise --help'\n");
}

TEST_CASE("cli: --print-cli-definition describes exactly the commands and options the help shows") {
  const CommandResult result = run_command(statewise_command("--print-cli-definition"));
  REQUIRE(result.status == 0);
  const auto definition = nlohmann::json::parse(result.output);
  CHECK(definition["program"] == "statewise");
  CHECK(definition["version"] == project_version());
  std::vector<std::string> defined;
  for (const auto& command : definition["commands"]) defined.push_back(command["name"]);
  CHECK(defined == listed_commands());
  for (const auto& command : definition["commands"]) {
    const std::string name = command["name"];
    INFO("command: " << name);
    const std::string help = run_command(statewise_command(name + " --help")).output;
    std::vector<std::string> from_definition;
    for (const auto& option : command["options"]) {
      if (option["kind"] == "positional") continue;
      std::string names;
      for (const auto& n : option["names"]) names += (names.empty() ? "" : ",") + n.get<std::string>();
      from_definition.push_back(names);
      // A value-taking option's default in the definition is the one the help shows.
      if (option["kind"] == "option" && !option["required"].get<bool>()) {
        const std::string shown =
            option["default"].is_null() ? "[default: none]" : "[default: " + option["default"].get<std::string>() + "]";
        for (const auto& entry : help_entries(help, "Options:"))
          if (first_word(entry) == names) CHECK(entry.find(shown) != std::string::npos);
      }
    }
    CHECK(from_definition == listed_options(help));
  }
}

TEST_CASE("cli: --print-cli-definition is hidden from the help") {
  CHECK(run_command(statewise_command("--help")).output.find("print-cli-definition") == std::string::npos);
}

TEST_CASE("cli: debian/changelog's newest entry carries the version of project() in CMakeLists.txt") {
  // The version is defined in CMakeLists.txt; the Debian changelog has to repeat it, so check it.
  const std::string changelog = read_text_file(std::string(STATEWISE_SOURCE_DIR) + "/debian/changelog");
  CHECK(changelog.rfind("statewise (" + project_version() + ") ", 0) == 0);
}
