#pragma once
// The progress line of long runs: rows read, rows per second and, when the input's size is known,
// the percentage read, rewritten in place with '\r' on standard error. Shown only when standard error
// is a terminal, --quiet is not given and the run has lasted about a second; cleared at the end.

#include <chrono>
#include <cstddef>
#include <cstdint>
#include <string>

namespace statewise::cli {

class ProgressLine {
 public:
  /// `input_path` ("-" = standard input) gives the size for the percentage when it is a regular file.
  ProgressLine(const std::string& input_path, bool quiet);
  ProgressLine(const ProgressLine&) = delete;
  ProgressLine& operator=(const ProgressLine&) = delete;
  /// Clears the line if one was shown.
  ~ProgressLine() { finish(); }

  /// Reports `rows` processed and `bytes` of input read; cheap when nothing is shown.
  void update(std::uint64_t rows, std::uint64_t bytes) {
    if (enabled_) refresh(rows, bytes);
  }
  /// Clears the line (idempotent).
  void finish();

 private:
  void refresh(std::uint64_t rows, std::uint64_t bytes);
  bool enabled_ = false;
  bool shown_ = false;
  std::uint64_t size_ = 0;  // bytes of a regular input file; 0 = unknown
  std::size_t width_ = 0;   // length of the text last written
  std::chrono::steady_clock::time_point start_, next_;
};

}  // namespace statewise::cli
