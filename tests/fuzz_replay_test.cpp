// Replays the fuzz seed corpus and every input a fuzz run found a problem with
// (tests/fuzz/corpus/<name>/ and tests/fuzz/regressions/<name>/, docs/hardening.md) through the fuzz
// entry functions, so the normal build guards each fix. An input passes when the parser either
// accepts it with the entry function's invariants holding or raises InputError; any other exception
// fails the test. Under STATEWISE_SANITIZE=ON, AddressSanitizer and UBSan also check each run.

#include <doctest/doctest.h>

#include <algorithm>
#include <cstdint>
#include <exception>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include "fuzz/fuzz_targets.h"

namespace {

namespace fs = std::filesystem;

std::vector<fs::path> files_in(const fs::path& folder) {
  std::vector<fs::path> files;
  if (fs::is_directory(folder))
    for (const auto& entry : fs::directory_iterator(folder))
      if (entry.is_regular_file()) files.push_back(entry.path());
  return files;
}

// Feeds every seed and regression of `target`; returns how many seeds there were.
std::size_t replay(const statewise::fuzz::FuzzTarget& target) {
  const fs::path root = fs::path(STATEWISE_SOURCE_DIR) / "tests" / "fuzz";
  const std::vector<fs::path> seeds = files_in(root / "corpus" / target.name);
  std::vector<fs::path> inputs = seeds;
  for (const fs::path& regression : files_in(root / "regressions" / target.name)) inputs.push_back(regression);
  for (const fs::path& input : inputs) {
    std::ifstream stream(input, std::ios::binary);
    const std::string bytes{std::istreambuf_iterator<char>(stream), std::istreambuf_iterator<char>()};
    INFO("input " << input.string());
    try {
      target.entry(reinterpret_cast<const std::uint8_t*>(bytes.data()), bytes.size());
    } catch (const std::exception& e) {
      FAIL("escaped the fuzz entry function: " << e.what());
    }
  }
  return seeds.size();
}

}  // namespace

TEST_CASE("fuzz replay: seeds and regressions of every target raise nothing but InputError") {
  // tools/fuzz and CMake find a target by its main tests/fuzz/fuzz_<name>.cpp; the seed folder must
  // not be empty, as a replay of nothing would pass whatever the parser does.
  const fs::path root = fs::path(STATEWISE_SOURCE_DIR) / "tests" / "fuzz";
  std::vector<std::string> listed;
  for (const auto& target : statewise::fuzz::fuzz_targets()) listed.push_back("fuzz_" + std::string(target.name));
  for (const fs::path& main : files_in(root)) {
    const std::string stem = main.stem().string();
    if (main.extension() == ".cpp" && stem != "fuzz_targets")
      CHECK_MESSAGE(std::find(listed.begin(), listed.end(), stem) != listed.end(),
                    stem << ".cpp has no entry in fuzz_targets()");
  }
  for (const auto& target : statewise::fuzz::fuzz_targets()) {
    INFO("target " << target.name);
    CHECK(fs::is_regular_file(root / ("fuzz_" + std::string(target.name) + ".cpp")));
    CHECK(replay(target) > 0);
  }
}
