// libFuzzer main for the model_file target (tests/fuzz/fuzz_targets.h); built with STATEWISE_FUZZ=ON.

#include <cstddef>
#include <cstdint>

#include "fuzz/fuzz_targets.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  statewise::fuzz::fuzz_model_file(data, size);
  return 0;
}
