#include "cli/progress.h"

#include <cstdio>
#include <sys/stat.h>
#include <unistd.h>

namespace statewise::cli {

namespace {
// The line appears once a run has lasted this long, and is rewritten at most this often.
constexpr std::chrono::milliseconds kFirstShow{1000};
constexpr std::chrono::milliseconds kRefresh{250};

void write_error(const std::string& text) {
  const char* data = text.data();
  std::size_t size = text.size();
  while (size > 0) {
    const ssize_t written = ::write(STDERR_FILENO, data, size);
    if (written <= 0) return;  // the line is a courtesy: never fail the run over it
    data += written;
    size -= static_cast<std::size_t>(written);
  }
}
}  // namespace

ProgressLine::ProgressLine(const std::string& input_path, bool quiet) {
  enabled_ = !quiet && isatty(STDERR_FILENO) == 1;
  if (!enabled_) return;
  struct stat info {};
  const bool known = input_path == "-" ? fstat(STDIN_FILENO, &info) == 0 : stat(input_path.c_str(), &info) == 0;
  if (known && S_ISREG(info.st_mode)) size_ = static_cast<std::uint64_t>(info.st_size);
  start_ = std::chrono::steady_clock::now();
  next_ = start_ + kFirstShow;
}

void ProgressLine::refresh(std::uint64_t rows, std::uint64_t bytes) {
  const auto now = std::chrono::steady_clock::now();
  if (now < next_) return;
  next_ = now + kRefresh;
  const double seconds = std::chrono::duration<double>(now - start_).count();
  char text[160];
  int length = std::snprintf(text, sizeof text, "statewise: %llu rows, %.0f rows/s",
                             static_cast<unsigned long long>(rows), static_cast<double>(rows) / seconds);
  if (size_ > 0 && length > 0)
    length += std::snprintf(text + length, sizeof text - static_cast<std::size_t>(length), ", %.0f%%",
                            100.0 * static_cast<double>(bytes) / static_cast<double>(size_));
  std::string line = "\r" + std::string(text, static_cast<std::size_t>(length > 0 ? length : 0));
  const std::size_t width = line.size() - 1;
  if (width < width_) line.append(width_ - width, ' ');  // blank out the rest of a longer old line
  width_ = width;
  write_error(line);
  shown_ = true;
}

void ProgressLine::finish() {
  if (!shown_) return;
  write_error("\r" + std::string(width_, ' ') + "\r");
  shown_ = false;
}

}  // namespace statewise::cli
