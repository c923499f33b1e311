// The README's test command and .ci/run must not drift apart: CI runs exactly what the README tells
// a new user to run.

#include <doctest/doctest.h>

#include <cstddef>
#include <string>
#include <vector>

#include "markdown_blocks.h"
#include "run_command.h"

using statewise::test::fenced_blocks;
using statewise::test::read_text_file;

TEST_CASE("the README's two set-up commands come first and CI runs the test command verbatim") {
  const std::string readme = read_text_file(std::string(STATEWISE_SOURCE_DIR) + "/README.md");
  std::vector<std::string> blocks = fenced_blocks(readme, "sh");
  REQUIRE(blocks.size() >= 2);
  // Each set-up command is one line (so that it can be pasted whole); drop its newline.
  for (std::size_t i = 0; i < 2; ++i) {
    CHECK(blocks[i].find('\n') == blocks[i].size() - 1);
    blocks[i].pop_back();
  }
  CHECK(blocks[0].find("statewise smooth") != std::string::npos);
  CHECK(blocks[1].find("ctest") != std::string::npos);
  const std::string ci = read_text_file(std::string(STATEWISE_SOURCE_DIR) + "/.ci/run");
  CHECK_MESSAGE(ci.find("\n" + blocks[1] + "\n") != std::string::npos,
                ".ci/run must contain the README's test command as one line: " << blocks[1]);
}
