#include "statewise/error.h"

#include <algorithm>
#include <cctype>
#include <numeric>

namespace statewise {

std::string format_location(const SourceLocation& location) {
  std::string prefix = location.file.empty() ? std::string("<input>") : location.file;
  if (location.line > 0) {
    // Appended piece by piece: `":" + std::to_string(...)` trips a known false positive of
    // GCC 12's -Wrestrict at -O2, which -Werror turns into a build failure.
    prefix += ':';
    prefix += std::to_string(location.line);
    if (location.column > 0) {
      prefix += ':';
      prefix += std::to_string(location.column);
    }
  } else if (!location.key.empty()) {
    prefix += ": ";
    prefix += location.key;
  }
  return prefix;
}

InputError::InputError(SourceLocation location, const std::string& message)
    : std::runtime_error(format_location(location) + ": " + message),
      location_(std::move(location)),
      detail_(message) {}

void raise_input_error(const SourceLocation& location, std::string_view message) {
  throw InputError(location, std::string(message));
}

namespace {
// Levenshtein distance with one rolling row.
std::size_t edit_distance(std::string_view a, std::string_view b) {
  std::vector<std::size_t> row(b.size() + 1);
  std::iota(row.begin(), row.end(), std::size_t{0});
  for (std::size_t i = 1; i <= a.size(); ++i) {
    std::size_t diagonal = row[0];
    row[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j) {
      const std::size_t above = row[j];
      const std::size_t substitution = diagonal + (a[i - 1] == b[j - 1] ? 0 : 1);
      row[j] = std::min({above + 1, row[j - 1] + 1, substitution});
      diagonal = above;
    }
  }
  return row[b.size()];
}
}  // namespace

std::string closest_match(std::string_view word, const std::vector<std::string>& candidates) {
  // A difference in case alone is always a near miss, however short the word ("q" for "Q").
  const auto same_ignoring_case = [word](const std::string& candidate) {
    return std::equal(word.begin(), word.end(), candidate.begin(), candidate.end(), [](char a, char b) {
      return std::tolower(static_cast<unsigned char>(a)) == std::tolower(static_cast<unsigned char>(b));
    });
  };
  for (const auto& candidate : candidates)
    if (same_ignoring_case(candidate)) return candidate;
  std::string best;
  std::size_t best_distance = word.size() / 3 + 1;  // more changes than this is not a near miss
  for (const auto& candidate : candidates) {
    const std::size_t distance = edit_distance(word, candidate);
    if (distance < best_distance) {
      best_distance = distance;
      best = candidate;
    }
  }
  return best;
}

std::string did_you_mean(std::string_view word, const std::vector<std::string>& candidates) {
  const std::string match = closest_match(word, candidates);
  return match.empty() ? std::string() : "; did you mean \"" + match + "\"?";
}

}  // namespace statewise
