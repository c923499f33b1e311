#include "cli/cli_definition.h"

#include <charconv>
#include <iostream>
#include <memory>
#include <sstream>

#include <nlohmann/json.hpp>

#include "statewise/error.h"
#include "statewise/version.h"

namespace statewise::cli {

namespace {

constexpr std::size_t kHelpWidth = 80;       // the help text fits an 80-column terminal
constexpr std::size_t kHelpNameColumn = 30;  // option names, then descriptions from this column

std::string join(const std::vector<std::string>& names, const std::string& separator, const std::string& last) {
  std::string text;
  for (std::size_t i = 0; i < names.size(); ++i) {
    if (i > 0) text += i + 1 == names.size() ? last : separator;
    text += names[i];
  }
  return text;
}

// Words of `text` joined into lines of at most `width` characters (a longer word gets its own line).
std::string wrap(const std::string& text, std::size_t width) {
  std::istringstream words(text);
  std::string word, line, out;
  while (words >> word) {
    if (!line.empty() && line.size() + 1 + word.size() > width) {
      out += line + '\n';
      line.clear();
    }
    line += (line.empty() ? "" : " ") + word;
  }
  return out + line;
}

bool is_builtin_flag(const CLI::Option* option) {
  for (const auto& name : option->get_lnames())
    if (name == "help" || name == "help-all" || name == "version") return true;
  return false;
}

bool is_visible(const CLI::Option* option) { return !option->get_group().empty(); }
bool is_visible(const CLI::App* command) { return !command->get_group().empty(); }

bool takes_value(const CLI::Option* option) { return option->get_items_expected_max() != 0; }

// The default as the help shows it, or empty when the option has none. Options that collect a list
// show "[]" for an empty one; that is "none" too.
std::string default_text(const CLI::Option* option) {
  std::string text = option->get_default_str();
  if (text == "[]" || text == "\"\"") text.clear();
  return text;
}

// CLI11 writes the type followed by each check's description, separated by ':' ("TEXT:{csv,tsv}",
// "INT:INT in [0 - 17]"). A description in braces is a set of allowed values (CLI::IsMember, one_of).
std::string value_name(const CLI::Option* option) {
  const std::string type = option->get_type_name();
  return type.substr(0, type.find(':'));
}

std::vector<std::string> checks(const CLI::Option* option) {
  std::vector<std::string> parts;
  const std::string type = option->get_type_name();
  std::size_t start = type.find(':');
  while (start != std::string::npos) {
    // A set may itself hold ':', so a part that opens a brace runs to its closing brace.
    std::size_t end = type[start + 1] == '{' ? type.find('}', start + 1) : type.find(':', start + 1);
    if (end != std::string::npos && type[start + 1] == '{') ++end;
    parts.push_back(type.substr(start + 1, end == std::string::npos ? std::string::npos : end - start - 1));
    start = end == std::string::npos ? end : type.find(':', end);
  }
  return parts;
}

std::vector<std::string> choices(const CLI::Option* option) {
  for (const auto& part : checks(option)) {
    if (part.size() < 2 || part.front() != '{' || part.back() != '}') continue;
    std::vector<std::string> values;
    std::istringstream items(part.substr(1, part.size() - 2));
    std::string item;
    while (std::getline(items, item, ',')) values.push_back(item);
    return values;
  }
  return {};
}

bool repeatable(const CLI::Option* option) { return option->get_items_expected_max() > 1; }

// The help's annotation of an option: "[required]", "[default: x]" or "[default: none]".
std::string annotation(const CLI::Option* option) {
  if (option->get_required()) return "[required]";
  if (!takes_value(option)) return is_builtin_flag(option) ? "" : "[default: off]";
  const std::string text = default_text(option);
  return "[default: " + (text.empty() ? std::string("none") : text) + "]";
}

// CLI11's help with one change: the default (or "required") is part of every option's description,
// so that no option leaves the reader guessing, and descriptions wrap at 80 columns.
class HelpFormatter : public CLI::Formatter {
 public:
  HelpFormatter() { column_width(kHelpNameColumn); }

  std::string make_option_opts(const CLI::Option* option) const override {
    if (!takes_value(option)) return {};
    // A set of allowed values says more than its type: `--format {csv,tsv,jsonl}`.
    const std::vector<std::string> allowed = choices(option);
    std::string text = " " + (allowed.empty() ? option->get_type_name() : "{" + join(allowed, ",", ",") + "}");
    if (option->get_expected_max() == CLI::detail::expected_max_vector_size)
      text += " ...";
    else if (option->get_expected_min() > 1)
      text += " x " + std::to_string(option->get_expected());
    // As CLI11 shows them: an environment variable, and options needed or excluded.
    if (!option->get_envname().empty()) text += " (Env:" + option->get_envname() + ")";
    if (!option->get_needs().empty()) {
      text += " Needs:";
      for (const CLI::Option* other : option->get_needs()) text += " " + other->get_name();
    }
    if (!option->get_excludes().empty()) {
      text += " Excludes:";
      for (const CLI::Option* other : option->get_excludes()) text += " " + other->get_name();
    }
    return text;
  }

  std::string make_option_desc(const CLI::Option* option) const override {
    const std::string note = annotation(option);
    return wrap(option->get_description() + (note.empty() ? "" : " " + note), kHelpWidth - kHelpNameColumn);
  }
};

// Applies the formatter and records defaults in `command` and its subcommands.
void complete_command(CLI::App& command, const std::shared_ptr<HelpFormatter>& formatter) {
  command.formatter(formatter);
  for (CLI::Option* option : command.get_options()) {
    // An option added with a variable knows its initial value; record it as the default unless the
    // definition set a default text of its own.
    if (takes_value(option) && option->get_default_str().empty()) option->capture_default_str();
  }
  for (CLI::App* sub : command.get_subcommands([](CLI::App*) { return true; })) complete_command(*sub, formatter);
}

std::vector<const CLI::App*> visible_commands(const CLI::App& app) {
  return app.get_subcommands([](const CLI::App* command) { return is_visible(command); });
}

nlohmann::ordered_json option_json(const CLI::Option* option) {
  nlohmann::ordered_json out;
  const bool positional = !option->nonpositional();
  out["kind"] = positional ? "positional" : takes_value(option) ? "option" : "flag";
  if (positional) {
    out["name"] = option->get_name(true);
  } else {
    out["names"] = nlohmann::ordered_json::array();
    for (const auto& s : option->get_snames()) out["names"].push_back("-" + s);
    for (const auto& l : option->get_lnames()) out["names"].push_back("--" + l);
  }
  out["description"] = option->get_description();
  if (takes_value(option)) {
    out["value_name"] = value_name(option);
    const std::vector<std::string> allowed = choices(option);
    if (!allowed.empty()) out["choices"] = allowed;
    std::vector<std::string> other;
    for (const auto& part : checks(option))
      if (part.empty() || part.front() != '{') other.push_back(part);
    if (!other.empty()) out["checks"] = other;
    const std::string text = default_text(option);
    out["default"] = text.empty() ? nlohmann::ordered_json() : nlohmann::ordered_json(text);
  }
  out["required"] = option->get_required();
  out["repeatable"] = repeatable(option);
  return out;
}

nlohmann::ordered_json command_json(const CLI::App& command) {
  nlohmann::ordered_json out;
  out["name"] = command.get_name();
  out["description"] = command.get_description();
  const std::string footer = command.get_footer();
  if (!footer.empty()) out["footer"] = footer;
  out["options"] = nlohmann::ordered_json::array();
  for (const CLI::Option* option : command.get_options([](const CLI::Option* o) { return is_visible(o); }))
    out["options"].push_back(option_json(option));
  out["commands"] = nlohmann::ordered_json::array();
  for (const CLI::App* sub : visible_commands(command)) out["commands"].push_back(command_json(*sub));
  return out;
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

CLI::Validator whole_number(long long minimum) {
  return CLI::Validator(
      [minimum](std::string& value) -> std::string {
        long long number = 0;
        const char* end = value.data() + value.size();
        const auto [stop, error] = std::from_chars(value.data(), end, number);
        if (error == std::errc::result_out_of_range)
          return "expected a whole number, got " + value + ", which is far too large";
        if (error != std::errc() || stop != end) return "expected a whole number, got \"" + value + "\"";
        if (number < minimum)
          return "expected a whole number of at least " + std::to_string(minimum) + ", got " + value;
        return {};
      },
      "");
}

void add_format_option(CLI::App& command, std::string& format) {
  command
      .add_option("--format", format,
                  "Output format: csv, tsv (tab-separated) or jsonl (JSON Lines, one object per row); "
                  "the same columns in each")
      ->capture_default_str()
      ->check(one_of({"csv", "tsv", "jsonl"}));
}

void complete_cli(CLI::App& app) {
  // `statewise help [COMMAND]`: the same text as `statewise COMMAND --help`.
  auto target = std::make_shared<std::string>();
  CLI::App* help = app.add_subcommand("help", "Describe a command and its options (the same as COMMAND --help)");
  std::vector<std::string> names;
  for (const CLI::App* sub : visible_commands(app)) names.push_back(sub->get_name());
  help->add_option("command", *target, "The command to describe; without one, list the commands")
      ->check(one_of(names));
  help->callback([&app, target]() {
    const CLI::App* command = target->empty() ? &app : app.get_subcommand(*target);
    const std::string usage = target->empty() ? app.get_name() : app.get_name() + " " + *target;
    std::cout << command->get_formatter()->make_help(command, usage, CLI::AppFormatMode::Normal);
    throw CLI::Success();
  });

  app.add_flag_callback(
         "--print-cli-definition",
         [&app]() {
           std::cout << cli_definition_json(app);
           throw CLI::Success();
         },
         "Print the command-line definition as JSON (for the man page and completions)")
      ->group("");

  complete_command(app, std::make_shared<HelpFormatter>());
}

std::string cli_definition_json(const CLI::App& app) {
  nlohmann::ordered_json out;
  out["program"] = app.get_name();
  out["version"] = STATEWISE_VERSION;
  const nlohmann::ordered_json top = command_json(app);
  for (auto it = top.begin(); it != top.end(); ++it)
    if (it.key() != "name") out[it.key()] = it.value();
  return out.dump(2) + "\n";
}

}  // namespace statewise::cli
