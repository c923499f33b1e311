// docs/library.md shows the embedding examples in full; its listings must be the files that the
// install test builds and runs (tests/install_test.sh), so the documented code is known to work.

#include <doctest/doctest.h>

#include <string>
#include <vector>

#include "markdown_blocks.h"
#include "run_command.h"

using statewise::test::fenced_blocks;
using statewise::test::read_text_file;

TEST_CASE("library docs: the listings in docs/library.md are examples/embed's sources, verbatim") {
  const std::vector<std::string> blocks = fenced_blocks(read_text_file(std::string(STATEWISE_SOURCE_DIR) + "/docs/library.md"), "cpp");
  REQUIRE(blocks.size() == 2);
  CHECK(blocks[0] == read_text_file(std::string(STATEWISE_SOURCE_DIR) + "/examples/embed/logger.cpp"));
  CHECK(blocks[1] == read_text_file(std::string(STATEWISE_SOURCE_DIR) + "/examples/embed/batch.cpp"));
}
