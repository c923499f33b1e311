#pragma once
/// \file error.h
/// Errors for bad input. Every problem with a CSV log, a model file or an option is raised as one
/// InputError through raise_input_error(), with a message that points at the place:
/// `file:line:column: what is wrong; expected X, got Y` for text files, `file: key: ...` for JSON keys.
/// Numerical trouble is not an exception: it is returned in results with a status.

#include <cstddef>
#include <stdexcept>
#include <string>
#include <string_view>
#include <vector>

namespace statewise {

/// Where a problem was found. Fill in what is known: a file alone, a file with a 1-based line and
/// column, or a file with a JSON key path such as `A[1][0]` or `initial.covariance`.
struct SourceLocation {
  std::string file;         ///< file name as the user gave it ("-" or "<stdin>" for standard input)
  std::size_t line = 0;     ///< 1-based line, 0 when not applicable
  std::size_t column = 0;   ///< 1-based column (byte), 0 when not applicable
  std::string key;          ///< JSON key path, empty when not applicable
};

/// Bad input: a CSV log, a model file, a state file or an option that cannot be used as given.
/// what() is the complete one-line message, location first.
class InputError : public std::runtime_error {
 public:
  InputError(SourceLocation location, const std::string& message);
  /// Where the problem is.
  const SourceLocation& location() const noexcept { return location_; }
  /// The message without the location prefix.
  const std::string& detail() const noexcept { return detail_; }

 private:
  SourceLocation location_;
  std::string detail_;
};

/// Formats a location as the message prefix: `file:line:column`, `file:line`, `file: key` or `file`.
std::string format_location(const SourceLocation& location);

/// The one way bad input is reported: throws InputError(location, message).
[[noreturn]] void raise_input_error(const SourceLocation& location, std::string_view message);

/// The candidate closest to `word` by edit distance, for "did you mean" hints; empty when none is
/// close enough (more than a third of the word's letters would have to change). A candidate that
/// differs from `word` in case only is always close enough.
std::string closest_match(std::string_view word, const std::vector<std::string>& candidates);

/// `; did you mean "x"?` when a close candidate exists, else an empty string.
std::string did_you_mean(std::string_view word, const std::vector<std::string>& candidates);

}  // namespace statewise
