// The generated bash completion, run by bash itself: the completion function is called the way
// bash calls it (COMP_WORDS, COMP_CWORD) and its COMPREPLY is compared with the commands and
// options the program's --help lists.

#include <doctest/doctest.h>

#include <unistd.h>

#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "cli_listing.h"

using namespace statewise::test;

namespace {

// COMPREPLY, sorted, after completing the command line `words` (the last word is the one being
// completed), run in `folder`.
std::vector<std::string> complete(const std::vector<std::string>& words, const std::string& folder = ".") {
  std::string array;
  for (const auto& word : words) array += " \"" + word + "\"";
  const std::string script = "cd \"" + folder + "\" && source \"" + STATEWISE_BASH_COMPLETION + "\" && COMP_WORDS=(" +
                             array + ") && COMP_CWORD=" + std::to_string(words.size() - 1) +
                             " && _statewise && printf \"%s\\n\" \"${COMPREPLY[@]}\"";
  const CommandResult result = run_command("bash --norc --noprofile -c '" + script + "'");
  REQUIRE(result.status == 0);
  std::vector<std::string> lines;
  std::istringstream stream(result.output);
  std::string line;
  while (std::getline(stream, line))
    if (!line.empty()) lines.push_back(line);
  std::sort(lines.begin(), lines.end());
  return lines;
}

std::vector<std::string> sorted(std::vector<std::string> items) {
  std::sort(items.begin(), items.end());
  return items;
}

}  // namespace

TEST_CASE("completion: bash completes the command names, and only those") {
  CHECK(complete({"statewise", ""}) == sorted(listed_commands()));
  CHECK(complete({"statewise", "sm"}) == std::vector<std::string>{"smooth"});
  CHECK(complete({"statewise", "help", ""}) == sorted(listed_commands()));
}

TEST_CASE("completion: bash offers exactly the options each command's --help lists") {
  CHECK(complete({"statewise", "-"}) == sorted(listed_option_names("")));
  for (const std::string& command : listed_commands()) {
    INFO("command: " << command);
    CHECK(complete({"statewise", command, "-"}) == sorted(listed_option_names(command)));
    // Also after other options and their values, including a value that starts with '-'.
    if (command != "help")
      CHECK(complete({"statewise", command, "--missing", "-999", "-"}) == sorted(listed_option_names(command)));
  }
}

TEST_CASE("completion: bash completes --format's values, also after '='") {
  const std::vector<std::string> formats = {"csv", "jsonl", "tsv"};
  CHECK(complete({"statewise", "filter", "--format", ""}) == formats);
  CHECK(complete({"statewise", "smooth", "--format", "j"}) == std::vector<std::string>{"jsonl"});
  CHECK(complete({"statewise", "smooth", "--format", "="}) == formats);
  CHECK(complete({"statewise", "smooth", "--format", "=", "t"}) == std::vector<std::string>{"tsv"});
  CHECK(complete({"statewise", "smooth", "--digits", ""}).empty());
}

TEST_CASE("completion: bash completes file names for files and for the input log") {
  const std::filesystem::path folder = std::filesystem::temp_directory_path() / ("statewise-completion-test-" + std::to_string(getpid()));
  std::filesystem::remove_all(folder);
  std::filesystem::create_directories(folder);
  for (const char* name : {"model.json", "log.csv"}) std::ofstream(folder / name) << "x\n";
  CHECK(complete({"statewise", "smooth", "-m", "mo"}, folder.string()) == std::vector<std::string>{"model.json"});
  CHECK(complete({"statewise", "smooth", "-m", "model.json", "l"}, folder.string()) ==
        std::vector<std::string>{"log.csv"});
  // The input is the only positional: after it, nothing more is offered.
  CHECK(complete({"statewise", "smooth", "log.csv", "m"}, folder.string()).empty());
  std::filesystem::remove_all(folder);
}
