#include "cli/output_file.h"

#include <cerrno>
#include <csignal>
#include <cstring>
#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include "statewise/error.h"

namespace statewise::cli {

namespace {
constexpr std::size_t kFlushThreshold = 1 << 20;

std::string system_reason() { return std::strerror(errno); }

std::string folder_of(const std::string& path) {
  const std::size_t slash = path.rfind('/');
  if (slash == std::string::npos) return ".";
  if (slash == 0) return "/";
  return path.substr(0, slash);
}

std::string base_name_of(const std::string& path) {
  const std::size_t slash = path.rfind('/');
  return slash == std::string::npos ? path : path.substr(slash + 1);
}

// Temporaries to remove when a signal ends the run (Ctrl-C, kill): preformatted paths in fixed
// slots, because a signal handler may only call async-signal-safe functions such as unlink(2)
// (POSIX.1-2017, System Interfaces 2.4.3). A slot is in use while its flag is set; the path is
// written before the flag is set and the flag cleared before the slot is reused.
constexpr int kTemporarySlots = 8;
constexpr std::size_t kTemporaryPathSize = 4096;
char temporary_paths[kTemporarySlots][kTemporaryPathSize];
volatile std::sig_atomic_t temporary_in_use[kTemporarySlots];
constexpr int kCleanupSignals[] = {SIGINT, SIGTERM, SIGHUP, SIGQUIT};

extern "C" void remove_temporaries_and_reraise(int signal_number) {
  for (int slot = 0; slot < kTemporarySlots; ++slot)
    if (temporary_in_use[slot] != 0) unlink(temporary_paths[slot]);
  // Die of the same signal, so the caller (a shell, a supervisor) sees how the run ended.
  struct sigaction default_action {};
  default_action.sa_handler = SIG_DFL;
  sigemptyset(&default_action.sa_mask);
  sigaction(signal_number, &default_action, nullptr);
  raise(signal_number);
}

void install_cleanup_handler() {
  static bool installed = false;
  if (installed) return;
  installed = true;
  for (const int signal_number : kCleanupSignals) {
    struct sigaction previous {};
    sigaction(signal_number, nullptr, &previous);
    if (previous.sa_handler == SIG_IGN) continue;  // ignored by whoever started us (nohup): keep it so
    struct sigaction action {};
    action.sa_handler = remove_temporaries_and_reraise;
    sigemptyset(&action.sa_mask);
    for (const int other : kCleanupSignals) sigaddset(&action.sa_mask, other);
    sigaction(signal_number, &action, nullptr);
  }
}

// Returns the slot now holding `path`, or -1 when all are taken or it is too long (then a signal
// leaves that temporary behind, as before; the run itself is unaffected).
int register_temporary(const std::string& path) {
  install_cleanup_handler();
  if (path.size() >= kTemporaryPathSize) return -1;
  for (int slot = 0; slot < kTemporarySlots; ++slot) {
    if (temporary_in_use[slot] != 0) continue;
    std::memcpy(temporary_paths[slot], path.c_str(), path.size() + 1);
    temporary_in_use[slot] = 1;
    return slot;
  }
  return -1;
}

void unregister_temporary(int slot) {
  if (slot >= 0) temporary_in_use[slot] = 0;
}
}  // namespace

void refuse_input_as_target(const std::string& path, const std::string& input_path) {
  if (path.empty() || path == "-" || input_path.empty()) return;
  struct stat target {};
  if (stat(path.c_str(), &target) != 0) return;
  // With "-" the log is whatever standard input reads; a regular file there is protected too
  // (`statewise filter -o log.csv < log.csv`). A terminal or pipe is not a log file.
  struct stat input {};
  const bool input_known = input_path == "-" ? fstat(STDIN_FILENO, &input) == 0 && S_ISREG(input.st_mode)
                                             : stat(input_path.c_str(), &input) == 0;
  if (input_known && input.st_dev == target.st_dev && input.st_ino == target.st_ino)
    throw OutputError{path + ": is the input file; refusing to overwrite the log with its own estimates"};
}

OutputFile::OutputFile(std::string path, const std::string& input_path, bool append)
    : path_(std::move(path)), append_(append) {
  if (append_ && (path_ == "-" || path_.empty()))
    raise_input_error({"--append", 0, 0, ""}, "needs -o FILE (a regular file); standard output cannot be appended to");
  if (path_ == "-" || path_.empty()) {
    descriptor_ = STDOUT_FILENO;
    struct stat info {};
    interactive_ = fstat(descriptor_, &info) == 0 && (S_ISFIFO(info.st_mode) || S_ISCHR(info.st_mode) || S_ISSOCK(info.st_mode));
    return;
  }
  refuse_input_as_target(path_, input_path);
  struct stat target {};
  const bool exists = stat(path_.c_str(), &target) == 0;
  if (append_) {
    if (exists && !S_ISREG(target.st_mode))
      throw OutputError{path_ + ": --append needs a regular file, and this is not one"};
    descriptor_ = open(path_.c_str(), O_WRONLY | O_CREAT | O_CLOEXEC, 0666);
    if (descriptor_ < 0) throw OutputError{path_ + ": cannot open for appending: " + system_reason()};
    owns_descriptor_ = true;
    const off_t end = lseek(descriptor_, 0, SEEK_END);
    if (end < 0) throw OutputError{path_ + ": cannot open for appending: " + system_reason()};
    length_ = static_cast<std::uint64_t>(end);
    return;
  }
  if (exists && !S_ISREG(target.st_mode)) {
    // A device or a pipe: write to it directly, never replace it.
    descriptor_ = open(path_.c_str(), O_WRONLY | O_CLOEXEC);
    if (descriptor_ < 0) throw OutputError{path_ + ": cannot open for writing: " + system_reason()};
    owns_descriptor_ = true;
    interactive_ = S_ISFIFO(target.st_mode) || S_ISCHR(target.st_mode);
    return;
  }
  std::string pattern = folder_of(path_) + "/." + base_name_of(path_) + ".tmp-XXXXXX";
  descriptor_ = mkostemp(pattern.data(), O_CLOEXEC);
  if (descriptor_ < 0) throw OutputError{path_ + ": cannot create a temporary file beside it: " + system_reason()};
  owns_descriptor_ = true;
  temporary_path_ = pattern;
  temporary_slot_ = register_temporary(temporary_path_);
  // Give the new file the permissions an ordinary new file would get, or keep the old file's.
  mode_t mode = 0666;
  if (exists) {
    mode = target.st_mode & 07777;
  } else {
    const mode_t mask = umask(0);
    umask(mask);
    mode &= ~mask;
  }
  fchmod(descriptor_, mode);
}

OutputFile::~OutputFile() {
  if (owns_descriptor_ && descriptor_ >= 0) close(descriptor_);
  if (!committed_ && !temporary_path_.empty()) unlink(temporary_path_.c_str());
  unregister_temporary(temporary_slot_);
}

void OutputFile::write_all(const char* data, std::size_t size) {
  while (size > 0) {
    const ssize_t written = ::write(descriptor_, data, size);
    if (written < 0) {
      if (errno == EINTR) continue;
      throw OutputError{(path_ == "-" ? std::string("standard output") : path_) + ": cannot write: " + system_reason()};
    }
    data += written;
    size -= static_cast<std::size_t>(written);
    length_ += static_cast<std::uint64_t>(written);
  }
}

void OutputFile::write(std::string_view text) {
  buffer_.append(text);
  if (buffer_.size() >= kFlushThreshold) flush();
}

void OutputFile::write_buffer(std::string& buffer) {
  if (buffer_.empty() && buffer.size() >= kFlushThreshold) {
    write_all(buffer.data(), buffer.size());
  } else {
    buffer_ += buffer;
    if (buffer_.size() >= kFlushThreshold) flush();
  }
  buffer.clear();
}

void OutputFile::flush() {
  if (buffer_.empty()) return;
  write_all(buffer_.data(), buffer_.size());
  buffer_.clear();
}

void OutputFile::truncate_to(std::uint64_t length) {
  flush();
  if (ftruncate(descriptor_, static_cast<off_t>(length)) != 0 || fsync(descriptor_) != 0 ||
      lseek(descriptor_, 0, SEEK_END) < 0)
    throw OutputError{path_ + ": cannot cut back to " + std::to_string(length) + " bytes: " + system_reason()};
  length_ = length;
}

void OutputFile::commit() {
  flush();
  if (append_) {
    if (fsync(descriptor_) != 0) throw OutputError{path_ + ": cannot write: " + system_reason()};
    committed_ = true;
    return;
  }
  if (temporary_path_.empty()) return;
  if (fsync(descriptor_) != 0) throw OutputError{path_ + ": cannot write: " + system_reason()};
  if (close(descriptor_) != 0) {
    descriptor_ = -1;
    throw OutputError{path_ + ": cannot write: " + system_reason()};
  }
  descriptor_ = -1;
  if (rename(temporary_path_.c_str(), path_.c_str()) != 0)
    throw OutputError{path_ + ": cannot put the output in place: " + system_reason()};
  committed_ = true;
  // The temporary's name now is the output's: a later signal must not remove it.
  unregister_temporary(temporary_slot_);
  temporary_slot_ = -1;
  // Make the rename durable too.
  const int folder = open(folder_of(path_).c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (folder >= 0) {
    fsync(folder);
    close(folder);
  }
}

void write_whole_file(const std::string& path, std::string_view text, const std::string& input_path) {
  OutputFile file(path, input_path);
  file.write(text);
  file.commit();
}

}  // namespace statewise::cli
