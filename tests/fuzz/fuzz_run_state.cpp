// libFuzzer main for the run_state target (tests/fuzz/fuzz_targets.h); built with STATEWISE_FUZZ=ON.

#include <cstddef>
#include <cstdint>

#include "fuzz/fuzz_targets.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  statewise::fuzz::fuzz_run_state(data, size);
  return 0;
}
