// The generated manual page lists every command and every option the program really has, as its
// own --help output reports them, and carries the project's version.

#include <doctest/doctest.h>

#include <regex>
#include <string>

#include "cli_listing.h"

using namespace statewise::test;

namespace {

// Text as the man page's roff writes it: hyphen-minus signs escaped.
std::string roff(const std::string& text) {
  std::string out;
  for (const char c : text) out += c == '-' ? std::string("\\-") : std::string(1, c);
  return out;
}

// The page's section about one command: from its .SS heading to the next heading.
std::string command_section(const std::string& page, const std::string& command) {
  const std::size_t start = page.find(".SS \"\\fBstatewise " + roff(command) + "\\fR");
  if (start == std::string::npos) return {};
  std::size_t end = page.find("\n.S", start + 1);
  return page.substr(start, end == std::string::npos ? std::string::npos : end - start);
}

}  // namespace

TEST_CASE("man page: it has a section for every command, listing every option and positional") {
  const std::string page = read_text_file(STATEWISE_MAN_PAGE);
  REQUIRE(!page.empty());
  for (const std::string& command : listed_commands()) {
    INFO("command: " << command);
    const std::string section = command_section(page, command);
    REQUIRE(!section.empty());
    CHECK(page.find("\\fBstatewise " + roff(command) + "\\fR") < page.find(".SH DESCRIPTION"));  // in the synopsis
    for (const std::string& name : listed_option_names(command)) {
      INFO("option: " << name);
      CHECK(section.find(".TP\n") != std::string::npos);
      CHECK(section.find("\\fB" + roff(name) + "\\fR") != std::string::npos);
    }
    for (const std::string& name : listed_positionals(command)) {
      INFO("positional: " << name);
      CHECK(section.find(".TP\n\\fI" + roff(name) + "\\fR\n") != std::string::npos);
    }
  }
}

TEST_CASE("man page: the program's own options are listed, and the version is the program's") {
  const std::string page = read_text_file(STATEWISE_MAN_PAGE);
  for (const std::string& name : listed_option_names("")) CHECK(page.find("\\fB" + roff(name) + "\\fR") != std::string::npos);
  const std::string version = run_command(statewise_command("--version")).output;  // "statewise X.Y.Z\n"
  CHECK(page.find(".TH STATEWISE 1 \"") != std::string::npos);
  CHECK(page.find("\"" + version.substr(0, version.size() - 1) + "\" \"User Commands\"") != std::string::npos);
}

TEST_CASE("man page: every option's default is stated as the help states it") {
  const std::string page = read_text_file(STATEWISE_MAN_PAGE);
  const std::string filter = command_section(page, "filter");
  CHECK(filter.find("\\fB\\-\\-format\\fR {csv,tsv,jsonl}\n") != std::string::npos);
  CHECK(filter.find("Default: \\fBcsv\\fR.") != std::string::npos);
  CHECK(filter.find("\\fB\\-m\\fR, \\fB\\-\\-model\\fR \\fIFILE\\fR\nModel file") != std::string::npos);
  CHECK(std::regex_search(filter, std::regex(R"(\\-\\-model\\fR \\fIFILE\\fR\n[^\n]*\nRequired\.)")));
  CHECK(std::regex_search(filter, std::regex(R"(\\-\\-report\\fR \\fIFILE\\fR\n[^\n]*\nDefault: none\.)")));
}

TEST_CASE("man page: no placeholder of the template is left") {
  const std::string page = read_text_file(STATEWISE_MAN_PAGE);
  CHECK(page.find('@') == std::string::npos);
}
