#pragma once
// Writing command output safely. A regular file (or a new one) is written to a temporary file in the
// same folder and renamed over the target only when the command succeeds, so a failed run leaves an
// existing file intact and no partial file behind. Standard output ("-") and files that are not
// regular (a device such as /dev/null, a named pipe) are written directly and never replaced.
// A run ended by SIGINT, SIGTERM, SIGHUP or SIGQUIT removes its temporary files before it dies of
// the signal.

#include <cstdint>
#include <string>
#include <string_view>

namespace statewise::cli {

/// Raised when output cannot be written; the message names the file and the system's reason.
struct OutputError {
  std::string message;
};

class OutputFile {
 public:
  /// Opens `path` ("-" = standard output) for writing. `input_path` (may be empty; "-" stands for the
  /// regular file standard input reads, if any) is refused as a target so that a log is never
  /// overwritten by its own estimates.
  /// With `append`, a regular file (created when missing) is written in place after its current end
  /// instead of being replaced; commit() then syncs it. Standard output and other non-regular files
  /// are refused for appending (OutputError).
  OutputFile(std::string path, const std::string& input_path = "", bool append = false);
  OutputFile(const OutputFile&) = delete;
  OutputFile& operator=(const OutputFile&) = delete;
  /// Removes the temporary file when commit() was not reached.
  ~OutputFile();

  /// Appends text to the buffer and writes it out once the buffer is large.
  void write(std::string_view text);
  /// Takes the caller's buffer (appended to, then cleared), writing when large.
  void write_buffer(std::string& buffer);
  /// Writes out everything buffered now (for streaming).
  void flush();
  /// Writes out the rest, syncs, and puts the file in place. Only after this does the target change.
  void commit();
  /// Appending: bytes in the file including what is still buffered.
  std::uint64_t length() const { return length_ + buffer_.size(); }
  /// Appending: cuts the file back to `length` bytes (and syncs that) before anything is written.
  void truncate_to(std::uint64_t length);
  /// True when output goes to a terminal or a pipe (then rows are flushed as they are made).
  bool interactive() const { return interactive_; }
  /// The path as the user gave it.
  const std::string& path() const { return path_; }

 private:
  void write_all(const char* data, std::size_t size);
  std::string path_;
  std::string temporary_path_;
  std::string buffer_;
  int descriptor_ = -1;
  int temporary_slot_ = -1;  // slot of temporary_path_ in the list a signal cleans up
  bool owns_descriptor_ = false;
  bool committed_ = false;
  bool interactive_ = false;
  bool append_ = false;
  std::uint64_t length_ = 0;  // appending: bytes written to the file so far
};

/// Raises OutputError when `path` (an output target; "" and "-" are never refused) is the file
/// `input_path` names (see OutputFile). Commands call it for every target before writing any, so
/// that a refused --report cannot come after -o was already replaced.
void refuse_input_as_target(const std::string& path, const std::string& input_path);

/// Writes a whole small file (a JSON report, a model) through OutputFile: replaced only on success.
void write_whole_file(const std::string& path, std::string_view text, const std::string& input_path = "");

}  // namespace statewise::cli
