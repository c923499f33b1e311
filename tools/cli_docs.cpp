// Generates the manual page and the bash and zsh completions of statewise from the program's own
// command-line definition (`statewise --print-cli-definition`, JSON), so that every command and
// option the program has appears in them, with its description and default, and nothing else.
// The man page's prose comes from a hand-written roff template whose lines @SYNOPSIS@,
// @GLOBAL_OPTIONS@ and @COMMANDS@ are replaced with generated text.
//
// Usage: statewise_cli_docs --program PATH --template FILE --date YYYY-MM-DD
//                           --man OUT --bash OUT --zsh OUT
// Runs at build time (see tools/CMakeLists.txt); exits 1 with a message on any failure.

#include <cstdio>
#include <fstream>
#include <iostream>
#include <map>
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

namespace {

using nlohmann::json;

struct Failure : std::runtime_error {
  using std::runtime_error::runtime_error;
};

std::string read_file(const std::string& path) {
  std::ifstream file(path, std::ios::binary);
  if (!file) throw Failure(path + ": cannot open");
  std::ostringstream text;
  text << file.rdbuf();
  return text.str();
}

void write_file(const std::string& path, const std::string& text) {
  std::ofstream file(path, std::ios::binary | std::ios::trunc);
  file << text;
  file.close();
  if (!file) throw Failure(path + ": cannot write");
}

std::string shell_quote(const std::string& text) {
  std::string out = "'";
  for (const char c : text) out += c == '\'' ? std::string("'\\''") : std::string(1, c);
  return out + "'";
}

json read_definition(const std::string& program) {
  const std::string command = shell_quote(program) + " --print-cli-definition";
  FILE* pipe = popen(command.c_str(), "r");
  if (pipe == nullptr) throw Failure("cannot run " + program);
  std::string text;
  char buffer[4096];
  std::size_t count = 0;
  while ((count = std::fread(buffer, 1, sizeof buffer, pipe)) > 0) text.append(buffer, count);
  if (pclose(pipe) != 0) throw Failure(command + " failed");
  return json::parse(text);
}

// ---- the definition, as the generators see it ----

std::string str(const json& object, const char* key) {
  return object.contains(key) && object[key].is_string() ? object[key].get<std::string>() : std::string();
}

bool flag(const json& object, const char* key) { return object.contains(key) && object[key].get<bool>(); }

std::vector<std::string> strings(const json& object, const char* key) {
  std::vector<std::string> out;
  if (object.contains(key))
    for (const auto& item : object[key]) out.push_back(item.get<std::string>());
  return out;
}

bool is_positional(const json& option) { return str(option, "kind") == "positional"; }
bool takes_value(const json& option) { return str(option, "kind") != "flag"; }

// What a value is completed with: a fixed set of choices, file names, folder names, or nothing
// (numbers, tokens, single characters).
enum class ValueCompletion { choices, files, folders, none };

ValueCompletion completion_of(const json& option) {
  if (!strings(option, "choices").empty()) return ValueCompletion::choices;
  const std::string name = str(option, "value_name");
  if (name == "DIR" || name == "FOLDER") return ValueCompletion::folders;
  if (name == "FILE" || name == "PATH" || name == "TEXT" || name.empty()) return ValueCompletion::files;
  return ValueCompletion::none;
}

std::string join(const std::vector<std::string>& items, const std::string& separator) {
  std::string out;
  for (std::size_t i = 0; i < items.size(); ++i) out += (i > 0 ? separator : "") + items[i];
  return out;
}

std::string sentence(std::string text) {
  while (!text.empty() && text.back() == ' ') text.pop_back();
  if (!text.empty() && text.back() != '.') text += '.';
  return text;
}

// ---- roff ----

// Text for a roff line: backslashes and hyphen-minus signs escaped (so that options copied from the
// rendered page are typed with ASCII hyphens), and a leading '.' or '\'' neutralized.
std::string roff(const std::string& text) {
  std::string out;
  for (const char c : text) {
    if (c == '\\')
      out += "\\e";
    else if (c == '-')
      out += "\\-";
    else
      out += c;
  }
  if (!out.empty() && (out[0] == '.' || out[0] == '\'')) out = "\\&" + out;
  return out;
}

std::string roff_bold(const std::string& text) { return "\\fB" + roff(text) + "\\fR"; }
std::string roff_italic(const std::string& text) { return "\\fI" + roff(text) + "\\fR"; }

// "-m, --model FILE" in roff.
// An option with a set of allowed values shows the set in place of its type, as the help does.
std::string roff_value_name(const json& option) {
  const std::vector<std::string> allowed = strings(option, "choices");
  return allowed.empty() ? roff_italic(str(option, "value_name")) : "{" + roff(join(allowed, ",")) + "}";
}

std::string roff_option_tag(const json& option) {
  if (is_positional(option)) return roff_italic(str(option, "name"));
  std::vector<std::string> names;
  for (const auto& name : strings(option, "names")) names.push_back(roff_bold(name));
  std::string tag = join(names, ", ");
  if (takes_value(option)) tag += " " + roff_value_name(option);
  return tag;
}

// The description of an option followed by its allowed values and its default.
std::string roff_option_body(const json& option) {
  std::string body = roff(sentence(str(option, "description")));
  const std::vector<std::string> allowed = strings(option, "choices");
  if (!allowed.empty()) {
    std::vector<std::string> bold;
    for (const auto& value : allowed) bold.push_back(roff_bold(value));
    body += "\nOne of " + join(bold, ", ") + ".";
  }
  for (const auto& check : strings(option, "checks")) body += "\nAllowed: " + roff(check) + ".";
  if (flag(option, "repeatable")) body += "\nMay be given more than once.";
  if (flag(option, "required")) {
    body += "\nRequired.";
  } else if (takes_value(option)) {
    const json& value = option["default"];
    body += value.is_string() ? "\nDefault: " + roff_bold(value.get<std::string>()) + "." : std::string("\nDefault: none.");
  }
  return body;
}

std::string roff_options(const json& options) {
  std::string out;
  for (const auto& option : options) out += ".TP\n" + roff_option_tag(option) + "\n" + roff_option_body(option) + "\n";
  return out;
}

// "statewise smooth -m FILE [OPTIONS] [input]" for the synopsis and the section title.
std::string roff_usage(const std::string& program, const json& command) {
  std::string out = roff_bold(program + " " + str(command, "name"));
  for (const auto& option : command["options"])
    if (!is_positional(option) && flag(option, "required"))
      out += " " + roff_bold(strings(option, "names").front()) + " " + roff_italic(str(option, "value_name"));
  out += " [" + roff_italic("OPTIONS") + "]";
  for (const auto& option : command["options"]) {
    if (!is_positional(option)) continue;
    std::string name = roff_italic(str(option, "name")) + (flag(option, "repeatable") ? " ..." : "");
    out += " " + (flag(option, "required") ? name : "[" + name + "]");
  }
  return out;
}

void collect_commands(const json& command, const std::string& prefix, std::vector<std::pair<std::string, json>>& out) {
  for (const auto& sub : command["commands"]) {
    out.emplace_back(prefix, sub);
    collect_commands(sub, prefix + " " + str(sub, "name"), out);
  }
}

std::string replace_line(const std::string& text, const std::string& marker, const std::string& replacement) {
  const std::string line = marker + "\n";
  const std::size_t at = text.find(line);
  if (at == std::string::npos) throw Failure("the man page template has no line " + marker);
  return text.substr(0, at) + replacement + text.substr(at + line.size());
}

std::string replace_all(std::string text, const std::string& from, const std::string& to) {
  for (std::size_t at = text.find(from); at != std::string::npos; at = text.find(from, at + to.size()))
    text.replace(at, from.size(), to);
  return text;
}

std::string man_page(const json& definition, const std::string& template_text, const std::string& date) {
  const std::string program = str(definition, "program");
  std::vector<std::pair<std::string, json>> commands;
  collect_commands(definition, program, commands);

  std::string synopsis;
  for (const auto& [prefix, command] : commands) {
    json named = command;
    named["name"] = prefix.substr(program.size()).empty() ? str(command, "name")
                                                          : prefix.substr(program.size() + 1) + " " + str(command, "name");
    synopsis += roff_usage(program, named) + "\n.br\n";
  }
  for (const auto& option : definition["options"])
    synopsis += roff_bold(program) + " " + roff_bold(strings(option, "names").back()) + "\n.br\n";

  std::string sections;
  for (const auto& [prefix, command] : commands) {
    json named = command;
    named["name"] = (prefix + " " + str(command, "name")).substr(program.size() + 1);
    sections += ".SS \"" + roff_usage(program, named) + "\"\n" + roff(sentence(str(command, "description"))) + "\n";
    const std::string footer = str(command, "footer");
    if (!footer.empty()) sections += ".PP\n" + roff(footer) + "\n";
    sections += roff_options(command["options"]);
  }

  // The template's leading comment is about editing the template; the page says where it came from.
  std::string page = template_text;
  while (page.rfind(".\\\"", 0) == 0) page.erase(0, page.find('\n') + 1);
  page = ".\\\" Generated by tools/cli_docs.cpp from docs/man/statewise.1.in and `" + program +
         " --print-cli-definition`;\n.\\\" do not edit.\n" + page;
  page = replace_all(page, "@VERSION@", str(definition, "version"));
  page = replace_all(page, "@DATE@", date);
  page = replace_line(page, "@SYNOPSIS@", synopsis);
  page = replace_line(page, "@GLOBAL_OPTIONS@", roff_options(definition["options"]));
  page = replace_line(page, "@COMMANDS@", sections);
  return page;
}

// ---- bash ----

std::string bash_words(const std::vector<std::string>& words) { return shell_quote(join(words, " ")); }

// The shell code that completes a value: from a set, file names, folder names, or nothing.
std::string bash_action(const std::string& function, const json& option) {
  switch (completion_of(option)) {
    case ValueCompletion::choices:
      return function + "_choices " + bash_words(strings(option, "choices"));
    case ValueCompletion::files:
      return function + "_files";
    case ValueCompletion::folders:
      return function + "_folders";
    case ValueCompletion::none:
      return ":";
  }
  return ":";
}

std::string bash_completion(const json& definition) {
  const std::string program = str(definition, "program");
  const std::string function = "_" + program;
  std::vector<std::string> command_names;
  for (const auto& command : definition["commands"]) command_names.push_back(str(command, "name"));

  // Case branches keyed by "COMMAND WORD" (COMMAND empty for the program's own options).
  std::string option_words, value_cases, takes_value_cases, positional_cases;
  auto add_command = [&](const std::string& name, const json& command) {
    std::vector<std::string> words;
    int position = 0;
    std::string repeatable_positional;
    for (const auto& option : command["options"]) {
      if (is_positional(option)) {
        if (flag(option, "repeatable"))
          repeatable_positional = "        " + shell_quote(name + " ") + "*) " + bash_action(function, option) + " ;;\n";
        else
          positional_cases += "        " + shell_quote(name + " " + std::to_string(position++)) + ") " +
                              bash_action(function, option) + " ;;\n";
        continue;
      }
      for (const auto& word : strings(option, "names")) {
        words.push_back(word);
        if (!takes_value(option)) continue;
        value_cases += "        " + shell_quote(name + " " + word) + ") " + bash_action(function, option) + " ;;\n";
        takes_value_cases += "        " + shell_quote(name + " " + word) + ") return 0 ;;\n";
      }
    }
    positional_cases += repeatable_positional;
    option_words += "        " + shell_quote(name) + ") echo " + bash_words(words) + " ;;\n";
  };
  add_command("", definition);
  for (const auto& command : definition["commands"]) add_command(str(command, "name"), command);

  std::ostringstream out;
  out << "# bash completion for " << program << "                             -*- shell-script -*-\n"
      << "# Generated from `" << program << " --print-cli-definition` by tools/cli_docs.cpp; do not edit.\n\n"
      << "# Completion actions; they read $cur from " << function << ".\n"
      << function << "_choices() { mapfile -t COMPREPLY < <(compgen -W \"$1\" -- \"$cur\"); }\n"
      << function << "_files() { compopt -o filenames 2>/dev/null; mapfile -t COMPREPLY < <(compgen -f -- \"$cur\"); }\n"
      << function << "_folders() { compopt -o filenames 2>/dev/null; mapfile -t COMPREPLY < <(compgen -d -- \"$cur\"); }\n\n"
      << "# The option words of a command (\"\" for the program itself).\n"
      << function << "_options() {\n    case $1 in\n" << option_words << "    esac\n}\n\n"
      << "# Succeeds when option $2 of command $1 takes a value.\n"
      << function << "_takes_value() {\n    case \"$1 $2\" in\n" << takes_value_cases << "    esac\n    return 1\n}\n\n"
      << "# Completes the value of option $2 of command $1.\n"
      << function << "_value() {\n    case \"$1 $2\" in\n" << value_cases << "    esac\n}\n\n"
      << "# Completes positional number $2 (from 0) of command $1.\n"
      << function << "_positional() {\n    case \"$1 $2\" in\n" << positional_cases << "    esac\n}\n\n"
      << function << "() {\n"
      << "    local cur prev command='' word skip=0 positionals=0 i\n"
      << "    COMPREPLY=()\n"
      << "    cur=${COMP_WORDS[COMP_CWORD]}\n"
      << "    prev=${COMP_WORDS[COMP_CWORD-1]}\n"
      << "    # With '=' among COMP_WORDBREAKS (the default), \"--format=js\" arrives as \"--format\" \"=\" \"js\".\n"
      << "    if [[ $cur == = ]]; then\n"
      << "        cur=''\n"
      << "    elif [[ $prev == = ]] && ((COMP_CWORD >= 2)); then\n"
      << "        prev=${COMP_WORDS[COMP_CWORD-2]}\n"
      << "    fi\n\n"
      << "    # The command is the first word that names one. Count the positionals after it, skipping\n"
      << "    # the values of options that take one.\n"
      << "    for ((i = 1; i < COMP_CWORD; i++)); do\n"
      << "        word=${COMP_WORDS[i]}\n"
      << "        if ((skip > 0)); then skip=$((skip - 1)); continue; fi\n"
      << "        if [[ $word == -* ]]; then\n"
      << "            if " << function << "_takes_value \"$command\" \"$word\"; then\n"
      << "                if [[ ${COMP_WORDS[i+1]} == = ]]; then skip=2; else skip=1; fi\n"
      << "            fi\n"
      << "        elif [[ -z $command ]]; then\n"
      << "            case $word in\n"
      << "                " << join([&] {
           std::vector<std::string> quoted;
           for (const auto& name : command_names) quoted.push_back(shell_quote(name));
           return quoted;
         }(), "|")
      << ") command=$word ;;\n"
      << "            esac\n"
      << "        else\n"
      << "            positionals=$((positionals + 1))\n"
      << "        fi\n"
      << "    done\n\n"
      << "    if [[ $prev == -* ]] && " << function << "_takes_value \"$command\" \"$prev\"; then\n"
      << "        " << function << "_value \"$command\" \"$prev\"\n"
      << "    elif [[ $cur == -* ]]; then\n"
      << "        " << function << "_choices \"$(" << function << "_options \"$command\")\"\n"
      << "    elif [[ -z $command ]]; then\n"
      << "        " << function << "_choices " << bash_words(command_names) << "\n"
      << "    else\n"
      << "        " << function << "_positional \"$command\" \"$positionals\"\n"
      << "    fi\n"
      << "    return 0\n"
      << "}\n\n"
      << "complete -F " << function << " " << program << "\n";
  return out.str();
}

// ---- zsh ----

// Text inside a single-quoted _arguments spec: quotes closed and reopened, and the characters that
// _arguments gives a meaning escaped.
std::string zsh_spec_text(const std::string& text, bool escape_colon) {
  std::string out;
  for (const char c : text) {
    if (c == '\'')
      out += "'\\''";
    else if (c == '[' || c == ']' || c == '\\' || (escape_colon && c == ':'))
      out += std::string("\\") + c;
    else
      out += c;
  }
  return out;
}

std::string zsh_action(const json& option) {
  switch (completion_of(option)) {
    case ValueCompletion::choices: {
      std::string out = "(";
      for (const auto& value : strings(option, "choices")) out += (out.size() > 1 ? " " : "") + zsh_spec_text(value, true);
      return out + ")";
    }
    case ValueCompletion::files:
      return "_files";
    case ValueCompletion::folders:
      return "_files -/";
    case ValueCompletion::none:
      return " ";
  }
  return " ";
}

// _arguments specs, one per line, for the options of one command.
std::string zsh_specs(const json& options, const std::string& indent, bool ends_with_more) {
  std::vector<std::string> specs;
  int position = 0;
  for (const auto& option : options) {
    const std::string description = "[" + zsh_spec_text(str(option, "description"), false) + "]";
    if (is_positional(option)) {
      const std::string message = zsh_spec_text(str(option, "name"), true);
      const std::string where = flag(option, "repeatable") ? "*" : std::to_string(++position);
      specs.push_back("'" + where + ":" + message + ":" + zsh_action(option) + "'");
      continue;
    }
    const std::vector<std::string> names = strings(option, "names");
    const bool help_or_version = str(option, "kind") == "flag" &&
                                 (names.back() == "--help" || names.back() == "--version");
    // Options that exclude this one (given once), or '*' for an option that may repeat.
    std::string exclusions;
    if (help_or_version)
      exclusions = "(- : *)";  // nothing else makes sense after --help or --version
    else if (flag(option, "repeatable"))
      exclusions = "*";
    else if (names.size() > 1)
      exclusions = "(" + join(names, " ") + ")";
    std::vector<std::string> forms;
    for (const auto& name : names) {
      std::string form = name;
      if (takes_value(option)) form += name.rfind("--", 0) == 0 ? "=" : "+";
      forms.push_back(form);
    }
    std::string rest = description;
    if (takes_value(option)) rest += ":" + zsh_spec_text(str(option, "value_name"), true) + ":" + zsh_action(option);
    // Several names share one spec through brace expansion, which must stay outside the quotes:
    // '(-m --model)'{-m+,--model=}'[...]:FILE:_files'. One name is one quoted word.
    std::string spec = forms.size() > 1 ? (exclusions.empty() ? "" : "'" + exclusions + "'") + "{" + join(forms, ",") +
                                              "}'" + rest + "'"
                                        : "'" + exclusions + forms.front() + rest + "'";
    specs.push_back(spec);
  }
  std::string out;
  for (std::size_t i = 0; i < specs.size(); ++i)
    out += indent + specs[i] + (i + 1 < specs.size() || ends_with_more ? " \\\n" : "");
  return out;
}

std::string zsh_completion(const json& definition) {
  const std::string program = str(definition, "program");
  std::ostringstream out;
  out << "#compdef " << program << "\n"
      << "# zsh completion for " << program << ".\n"
      << "# Generated from `" << program << " --print-cli-definition` by tools/cli_docs.cpp; do not edit.\n\n"
      << "_" << program << "() {\n"
      << "  local curcontext=\"$curcontext\" state state_descr line ret=1\n"
      << "  typeset -A opt_args\n\n"
      << "  _arguments -C \\\n"
      << zsh_specs(definition["options"], "    ", true) << "    '1:command:->command' \\\n"
      << "    '*::argument:->argument' && ret=0\n\n"
      << "  case $state in\n"
      << "    command)\n"
      << "      local -a commands\n"
      << "      commands=(\n";
  for (const auto& command : definition["commands"])
    out << "        '" << zsh_spec_text(str(command, "name"), true) << ":"
        << zsh_spec_text(str(command, "description"), false) << "'\n";
  out << "      )\n"
      << "      _describe -t commands '" << program << " command' commands && ret=0\n"
      << "      ;;\n"
      << "    argument)\n"
      << "      curcontext=${curcontext%:*:*}:" << program << "-$words[1]:\n"
      << "      case $words[1] in\n";
  for (const auto& command : definition["commands"]) {
    out << "        " << zsh_spec_text(str(command, "name"), false) << ")\n"
        << "          _arguments \\\n"
        << zsh_specs(command["options"], "            ", false) << " && ret=0\n"
        << "          ;;\n";
  }
  out << "      esac\n"
      << "      ;;\n"
      << "  esac\n"
      << "  return ret\n"
      << "}\n\n"
      << "_" << program << " \"$@\"\n";
  return out.str();
}

}  // namespace

int main(int argc, char** argv) {
  try {
    std::map<std::string, std::string> arguments;
    for (int i = 1; i + 1 < argc; i += 2) arguments[argv[i]] = argv[i + 1];
    for (const char* required : {"--program", "--template", "--date", "--man", "--bash", "--zsh"})
      if (!arguments.count(required)) throw Failure(std::string("missing ") + required);
    const json definition = read_definition(arguments["--program"]);
    write_file(arguments["--man"], man_page(definition, read_file(arguments["--template"]), arguments["--date"]));
    write_file(arguments["--bash"], bash_completion(definition));
    write_file(arguments["--zsh"], zsh_completion(definition));
    return 0;
  } catch (const std::exception& e) {
    std::cerr << "statewise_cli_docs: " << e.what() << '\n';
    return 1;
  }
}
