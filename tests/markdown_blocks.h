#pragma once
// Reads the fenced code blocks of a markdown text, for the tests that keep documentation and the
// files it shows in step.

#include <sstream>
#include <string>
#include <vector>

namespace statewise::test {

/// The contents of the blocks fenced by "```<language>" and "```" in `markdown`, in order, each line
/// followed by a newline.
inline std::vector<std::string> fenced_blocks(const std::string& markdown, const std::string& language) {
  std::vector<std::string> blocks;
  std::istringstream lines(markdown);
  std::string line, block;
  bool inside = false;
  while (std::getline(lines, line)) {
    if (!inside && line == "```" + language) {
      inside = true;
      block.clear();
    } else if (inside && line == "```") {
      inside = false;
      blocks.push_back(block);
    } else if (inside) {
      block += line + "\n";
    }
  }
  return blocks;
}

}  // namespace statewise::test
