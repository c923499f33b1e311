#include "cli/cli_definition.h"

#include "statewise/error.h"

namespace statewise::cli {

namespace {

std::string join(const std::vector<std::string>& names, const std::string& separator, const std::string& last) {
  std::string text;
  for (std::size_t i = 0; i < names.size(); ++i) {
    if (i > 0) text += i + 1 == names.size() ? last : separator;
    text += names[i];
  }
  return text;
}

}  // namespace

CLI::Validator one_of(std::vector<std::string> names) {
  std::string set = "{" + join(names, ",", ",") + "}";
  return CLI::Validator(
      [names](std::string& value) -> std::string {
        for (const auto& name : names)
          if (value == name) return {};
        return "expected one of " + join(names, ", ", " or ") + ", got \"" + value + "\"" + did_you_mean(value, names);
      },
      set, "one of");
}

void add_format_option(CLI::App& command, std::string& format) {
  command
      .add_option("--format", format,
                  "Output format: csv, tsv (tab-separated) or jsonl (JSON Lines, one object per row); "
                  "the same columns in each")
      ->capture_default_str()
      ->check(one_of({"csv", "tsv", "jsonl"}));
}

}  // namespace statewise::cli
