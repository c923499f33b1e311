// The README's test command and .ci/run must not drift apart: CI runs exactly what the README tells
// a new user to run.

#include <doctest/doctest.h>

#include <fstream>
#include <sstream>
#include <string>
#include <vector>

namespace {
std::string read_file(const std::string& path) {
  std::ifstream file(path);
  std::ostringstream text;
  text << file.rdbuf();
  return text.str();
}

// The lines inside ```sh fences, in order.
std::vector<std::string> shell_blocks(const std::string& markdown) {
  std::vector<std::string> blocks;
  std::istringstream lines(markdown);
  std::string line, block;
  bool inside = false;
  while (std::getline(lines, line)) {
    if (!inside && line == "```sh") {
      inside = true;
      block.clear();
    } else if (inside && line == "```") {
      inside = false;
      blocks.push_back(block);
    } else if (inside) {
      block += line;
    }
  }
  return blocks;
}
}  // namespace

TEST_CASE("the README's two set-up commands come first and CI runs the test command verbatim") {
  const std::string readme = read_file(std::string(STATEWISE_SOURCE_DIR) + "/README.md");
  const std::vector<std::string> blocks = shell_blocks(readme);
  REQUIRE(blocks.size() >= 2);
  CHECK(blocks[0].find("statewise smooth") != std::string::npos);
  CHECK(blocks[1].find("ctest") != std::string::npos);
  const std::string ci = read_file(std::string(STATEWISE_SOURCE_DIR) + "/.ci/run");
  CHECK_MESSAGE(ci.find("\n" + blocks[1] + "\n") != std::string::npos,
                ".ci/run must contain the README's test command as one line: " << blocks[1]);
}
