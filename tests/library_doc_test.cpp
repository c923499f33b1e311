// docs/library.md shows the embedding examples in full; its listings must be the files that the
// install test builds and runs (tests/install_test.sh), so the documented code is known to work.

#include <doctest/doctest.h>

#include <sstream>
#include <string>
#include <vector>

#include "run_command.h"

using statewise::test::read_text_file;

namespace {

// The contents of the ```cpp fences of a markdown text.
std::vector<std::string> cpp_blocks(const std::string& markdown) {
  std::vector<std::string> blocks;
  std::istringstream lines(markdown);
  std::string line, block;
  bool inside = false;
  while (std::getline(lines, line)) {
    if (!inside && line == "```cpp") {
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

}  // namespace

TEST_CASE("library docs: the listings in docs/library.md are examples/embed's sources, verbatim") {
  const std::vector<std::string> blocks = cpp_blocks(read_text_file(std::string(STATEWISE_SOURCE_DIR) + "/docs/library.md"));
  REQUIRE(blocks.size() == 2);
  CHECK(blocks[0] == read_text_file(std::string(STATEWISE_SOURCE_DIR) + "/examples/embed/logger.cpp"));
  CHECK(blocks[1] == read_text_file(std::string(STATEWISE_SOURCE_DIR) + "/examples/embed/batch.cpp"));
}
