#pragma once
// The parts of the command-line definition that every command shares, and the finishing touches
// applied once all commands are defined: help that shows every option's default, `statewise help
// COMMAND`, and the hidden `--print-cli-definition` flag that prints the whole definition as JSON.
// The man page and the shell completions are generated from that JSON at build time
// (tools/cli_docs.cpp), so commands and options added anywhere appear in them automatically.

#include <string>
#include <vector>

#include <CLI/CLI.hpp>

namespace statewise::cli {

/// A check that the value is one of `names`. Its description is the set `{a,b,c}` (as CLI::IsMember
/// writes it), which is how the help, the man page and the completions learn the choices; a wrong
/// value gets `expected one of a, b, c, got "x"; did you mean "y"?`.
CLI::Validator one_of(std::vector<std::string> names);

/// A check that the value is a whole number of at least `minimum` that a 64-bit integer holds. CLI11
/// would otherwise turn a longer number into the largest one and report that instead of what was
/// typed. No description: the help is unchanged.
CLI::Validator whole_number(long long minimum);

/// Adds `--format csv|tsv|jsonl` (default csv) to a command that writes rows through TableLayout.
void add_format_option(CLI::App& command, std::string& format);

/// Finishes the definition; call once, after the last command is added: gives every option a
/// default in its help (`[default: x]`, `[default: none]` or `[required]`), wraps help text, adds the
/// `help [COMMAND]` command and the hidden `--print-cli-definition` flag. Both print and end the
/// parse by throwing CLI::Success (exit status 0).
void complete_cli(CLI::App& app);

/// The definition of `app` and its visible commands as JSON text: names, descriptions, and for every
/// visible option its names, value name, choices, default, whether it is required or repeatable.
std::string cli_definition_json(const CLI::App& app);

}  // namespace statewise::cli
