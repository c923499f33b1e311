#include "statewise/csv.h"

#include <fast_float/fast_float.h>
#include <fcntl.h>
#include <unistd.h>

#include <array>
#include <cassert>
#include <cerrno>
#include <cmath>
#include <cstring>
#include <limits>
#include <system_error>
#include <unordered_map>
#include <utility>

namespace statewise {

namespace {

constexpr std::size_t kChunkBytes = std::size_t{64} * 1024;  // first buffer size and usual read size
// A record (one logical line, quoted line breaks included) may not be longer than this, and may not
// hold more fields than kMaxFields, so that garbage input cannot make the reader allocate without bound.
constexpr std::size_t kMaxRecordBytes = std::size_t{64} * 1024 * 1024;
constexpr std::size_t kMaxFields = 1'000'000;
constexpr std::size_t kNoColumn = std::numeric_limits<std::size_t>::max();
constexpr std::size_t kMaxQuotedTextInMessage = 60;  // longer cell texts are shortened in messages

// Where the scan of a pending record stopped, so that it can resume when more bytes arrive.
enum class ScanState : unsigned char {
  kFieldStart,  // at the first byte of a field
  kUnquoted,    // inside an unquoted field
  kQuoted,      // inside a quoted field
  kAfterQuote,  // just past a '"' inside a quoted field: a doubled quote or the closing one
};

enum class ScanResult : unsigned char { kRecord, kNeedData, kEnd };

// One field of the current record. Offsets are relative to the record's first byte so that they stay
// valid when the pending record is moved to the front of the buffer.
struct FieldSpan {
  std::size_t raw = 0;    // first byte of the field (the opening quote when quoted)
  std::size_t begin = 0;  // text, quotes removed: in the record, or in the scratch buffer
  std::size_t end = 0;
  bool quoted = false;
  bool escaped = false;     // holds doubled quotes; its text is unescaped into the scratch buffer
  bool in_scratch = false;  // begin/end index the scratch buffer
};

bool is_space(char c) { return c == ' ' || c == '\t'; }

std::string_view trim(std::string_view text) {
  std::size_t first = 0;
  std::size_t last = text.size();
  while (first < last && is_space(text[first])) ++first;
  while (last > first && is_space(text[last - 1])) --last;
  return text.substr(first, last - first);
}

std::string describe_char(char c) {
  if (c == '\t') return "tab";
  if (c == '\r') return "carriage return";
  if (c == ' ') return "space";
  const auto byte = static_cast<unsigned char>(c);
  if (byte > 0x20 && byte < 0x7f) return std::string("'") + c + "'";
  static constexpr char kHex[] = "0123456789ABCDEF";
  return std::string("byte 0x") + kHex[byte >> 4] + kHex[byte & 0xf];
}

// The cell text in quotes for a message, shortened when long.
std::string quote_for_message(std::string_view text) {
  // Appended piece by piece: `"\"" + std::string(...)` trips GCC 12's false -Wrestrict warning.
  std::string quoted(1, '"');
  if (text.size() > kMaxQuotedTextInMessage) {
    quoted += text.substr(0, kMaxQuotedTextInMessage - 3);
    quoted += "...";
  } else {
    quoted += text;
  }
  quoted += '"';
  return quoted;
}

bool is_builtin_missing(std::string_view text) {
  switch (text.size()) {
    case 0:
      return true;
    case 2:
      return text == "NA";
    case 3:
      return text == "NaN" || text == "nan";
    case 4:
      return text == "null";
    default:
      return false;
  }
}

// Hash allowing lookups by string_view in a map keyed by std::string.
struct NameHash {
  using is_transparent = void;
  std::size_t operator()(std::string_view name) const noexcept { return std::hash<std::string_view>{}(name); }
};

}  // namespace

struct CsvReader::Impl {
  // Input.
  int fd_ = -1;  // -1 when reading from a string
  bool owns_fd_ = false;
  bool eof_ = false;
  std::string display_name_;
  char delimiter_ = ',';
  std::vector<std::string> extra_missing_;  // options.missing_tokens, trimmed

  // Bytes not yet consumed. buf[end] is always '\0': a sentinel that stops the scanning loops, which then
  // tell the end of the data from a NUL byte in it by position.
  std::string buf_;
  std::size_t end_ = 0;
  std::size_t base_ = 0;  // stream offset of buf[0]

  // The pending record: where it starts, and where and in which state its scan stopped.
  std::size_t parse_begin_ = 0;
  std::size_t scan_ = 0;  // relative to parse_begin
  ScanState state_ = ScanState::kFieldStart;
  std::size_t field_raw_ = 0;  // start of the field being scanned, relative to parse_begin
  bool field_escaped_ = false;
  std::size_t quoted_newlines_ = 0;
  std::size_t next_line_ = 1;  // line on which the pending record starts

  // The current record (valid until the next scan starts).
  std::size_t record_begin_ = 0;
  std::size_t record_line_ = 0;
  std::vector<FieldSpan> fields_;
  std::string scratch_;  // unescaped text of fields that held doubled quotes

  // Header.
  std::vector<std::string> header_;
  std::unordered_map<std::string, std::size_t, NameHash, std::equal_to<>> column_of_;
  std::size_t header_line_ = 1;

  // Bytes that end the tight loops: for unquoted fields the delimiter, LF and NUL; for quoted fields
  // the quote, LF (counted for line numbers) and NUL.
  std::array<bool, 256> unquoted_stop_{};
  std::array<bool, 256> quoted_stop_{};

  Impl(std::string name, const CsvOptions& options)
      : display_name_(std::move(name)), delimiter_(options.delimiter) {
    if (delimiter_ == '"' || delimiter_ == '\n' || delimiter_ == '\r' || delimiter_ == '\0') {
      SourceLocation where;
      where.file = display_name_;
      raise_input_error(where, "the delimiter cannot be " + describe_char(delimiter_) +
                                   "; expected a character such as ',' ';' or a tab");
    }
    for (const auto& token : options.missing_tokens) extra_missing_.emplace_back(trim(token));
    for (char c : {delimiter_, '\n', '\0'}) unquoted_stop_[static_cast<unsigned char>(c)] = true;
    for (char c : {'"', '\n', '\0'}) quoted_stop_[static_cast<unsigned char>(c)] = true;
  }

  ~Impl() {
    if (owns_fd_ && fd_ >= 0) ::close(fd_);
  }
  Impl(const Impl&) = delete;
  Impl& operator=(const Impl&) = delete;

  // Location of byte `offset` of the record starting at buffer offset `start` on line `line`.
  SourceLocation locate(std::size_t start, std::size_t line, std::size_t offset) const {
    const char* record = buf_.data() + start;
    std::size_t line_start = 0;
    for (std::size_t k = 0; k < offset; ++k) {
      if (record[k] == '\n') {
        ++line;
        line_start = k + 1;
      }
    }
    SourceLocation where;
    where.file = display_name_;
    where.line = line;
    where.column = offset - line_start + 1;
    return where;
  }

  SourceLocation locate_pending(const char* p) const {
    return locate(parse_begin_, next_line_, static_cast<std::size_t>(p - (buf_.data() + parse_begin_)));
  }

  SourceLocation line_only(std::size_t line) const {
    SourceLocation where;
    where.file = display_name_;
    where.line = line;
    return where;
  }

  [[noreturn]] void raise_nul(const char* p) const {
    // A file saved as UTF-16 without a byte-order mark shows NUL in every other byte of ASCII text.
    const auto* bytes = reinterpret_cast<const unsigned char*>(buf_.data());
    if (base_ == 0 && next_line_ == 1 && end_ >= 4 && ((bytes[0] == 0) != (bytes[1] == 0)) &&
        ((bytes[2] == 0) == (bytes[0] == 0)) && ((bytes[3] == 0) == (bytes[1] == 0))) {
      raise_input_error(locate_pending(p), "looks like UTF-16 (NUL in every other byte); save it as UTF-8");
    }
    raise_input_error(locate_pending(p), "binary data (NUL byte); expected UTF-8 text");
  }

  void add_field(std::size_t raw, std::size_t begin, std::size_t stop, bool quoted, bool escaped) {
    if (fields_.size() == kMaxFields) {
      raise_input_error(line_only(next_line_), "record has more than " + std::to_string(kMaxFields) +
                                                   " fields; expected at most " + std::to_string(kMaxFields));
    }
    fields_.push_back(FieldSpan{raw, begin, stop, quoted, escaped, false});
  }

  // Scans the pending record from where the previous call stopped. Returns kRecord when a whole record
  // is in `fields`, kNeedData when the buffer ran out first (only before the end of input), kEnd when
  // the input holds no further record.
  ScanResult scan_record() {
    const char* const start = buf_.data() + parse_begin_;
    const char* const stop = buf_.data() + end_;
    const char* p = start + scan_;
    const auto offset = [start](const char* q) { return static_cast<std::size_t>(q - start); };
    ScanState st = state_;
    const auto need_data = [&](ScanState resume_state, const char* resume_at) {
      state_ = resume_state;
      scan_ = offset(resume_at);
      return ScanResult::kNeedData;
    };

    for (;;) {
      switch (st) {
        case ScanState::kFieldStart:
          if (p == stop && !eof_) return need_data(ScanState::kFieldStart, p);
          field_raw_ = offset(p);
          if (*p == '"') {
            ++p;
            field_escaped_ = false;
            st = ScanState::kQuoted;
            continue;
          }
          [[fallthrough]];

        case ScanState::kUnquoted: {
          while (!unquoted_stop_[static_cast<unsigned char>(*p)]) ++p;
          const char c = *p;
          if (c == delimiter_) {
            add_field(field_raw_, field_raw_, offset(p), false, false);
            ++p;
            st = ScanState::kFieldStart;
            continue;
          }
          if (c == '\n') {
            std::size_t text_end = offset(p);
            if (text_end > field_raw_ && p[-1] == '\r') --text_end;  // CRLF
            add_field(field_raw_, field_raw_, text_end, false, false);
            return finish_record(p + 1, true);
          }
          if (p != stop) raise_nul(p);
          if (!eof_) return need_data(ScanState::kUnquoted, p);
          if (p == start) return ScanResult::kEnd;
          // The last record lacks a line break.
          std::size_t text_end = offset(p);
          if (text_end > field_raw_ && p[-1] == '\r') --text_end;
          add_field(field_raw_, field_raw_, text_end, false, false);
          return finish_record(p, false);
        }

        case ScanState::kQuoted:
          for (;;) {
            while (!quoted_stop_[static_cast<unsigned char>(*p)]) ++p;
            if (*p == '"') break;
            if (*p == '\n') {
              ++quoted_newlines_;
              ++p;
              continue;
            }
            if (p != stop) raise_nul(p);
            if (!eof_) return need_data(ScanState::kQuoted, p);
            raise_input_error(
                locate_pending(start + field_raw_),
                "quoted field never closed; expected a closing '\"' before the end of the input");
          }
          ++p;
          st = ScanState::kAfterQuote;
          [[fallthrough]];

        case ScanState::kAfterQuote: {
          const char c = *p;
          if (c == '"') {  // a doubled quote stands for one quote
            field_escaped_ = true;
            ++p;
            st = ScanState::kQuoted;
            continue;
          }
          const std::size_t text_end = offset(p) - 1;
          if (c == delimiter_) {
            add_field(field_raw_, field_raw_ + 1, text_end, true, field_escaped_);
            ++p;
            st = ScanState::kFieldStart;
            continue;
          }
          if (c == '\n') {
            add_field(field_raw_, field_raw_ + 1, text_end, true, field_escaped_);
            return finish_record(p + 1, true);
          }
          if (c == '\r' && p + 1 == stop && !eof_) return need_data(ScanState::kAfterQuote, p);
          if (c == '\r' && (p[1] == '\n' || p + 1 == stop)) {
            add_field(field_raw_, field_raw_ + 1, text_end, true, field_escaped_);
            return p + 1 == stop ? finish_record(p + 1, false) : finish_record(p + 2, true);
          }
          if (p == stop) {
            if (!eof_) return need_data(ScanState::kAfterQuote, p);
            add_field(field_raw_, field_raw_ + 1, text_end, true, field_escaped_);
            return finish_record(p, false);
          }
          if (c == '\0') raise_nul(p);
          const std::string expected = delimiter_ == '\t' ? "a tab" : std::string("'") + delimiter_ + "'";
          raise_input_error(locate_pending(p), "unexpected " + describe_char(c) +
                                                   " after a closing quote; expected " + expected +
                                                   " or the end of the line");
        }
      }
    }
  }

  // Makes the scanned record current; `next` is one past its last byte (line break included).
  ScanResult finish_record(const char* next, bool ended_by_newline) {
    const auto length = static_cast<std::size_t>(next - (buf_.data() + parse_begin_));
    if (length > kMaxRecordBytes) raise_record_too_long();
    record_begin_ = parse_begin_;
    record_line_ = next_line_;
    next_line_ += quoted_newlines_ + (ended_by_newline ? 1 : 0);
    parse_begin_ += length;
    scan_ = 0;
    state_ = ScanState::kFieldStart;
    quoted_newlines_ = 0;
    return ScanResult::kRecord;
  }

  [[noreturn]] void raise_record_too_long() const {
    raise_input_error(line_only(next_line_),
                      "record is longer than 64 MiB; expected a line break sooner (is this a text log?)");
  }

  // Reads more input after the pending record, moving it to the front of the buffer first and growing
  // the buffer only when the record fills it. Sets eof at the end of input.
  void refill() {
    if (fd_ < 0) {
      eof_ = true;
      return;
    }
    if (parse_begin_ > 0) {
      const std::size_t keep = end_ - parse_begin_;
      std::memmove(buf_.data(), buf_.data() + parse_begin_, keep);
      base_ += parse_begin_;
      end_ = keep;
      parse_begin_ = 0;
    }
    if (end_ == buf_.size()) {
      if (buf_.size() >= kMaxRecordBytes) raise_record_too_long();
      buf_.resize(std::min(buf_.size() * 2, kMaxRecordBytes));
    }
    ssize_t count = 0;
    do {
      count = ::read(fd_, buf_.data() + end_, buf_.size() - end_);
    } while (count < 0 && errno == EINTR);
    if (count < 0) {
      const int error = errno;
      SourceLocation where;
      where.file = display_name_;
      raise_input_error(where, "cannot read (" + std::system_category().message(error) + ")");
    }
    if (count == 0) eof_ = true;
    end_ += static_cast<std::size_t>(count);
    if (end_ < buf_.size()) buf_[end_] = '\0';
  }

  // Reads the next non-blank record into `fields`; false at the end of input.
  bool read_record() {
    fields_.clear();
    scratch_.clear();
    for (;;) {
      switch (scan_record()) {
        case ScanResult::kNeedData:
          refill();
          break;
        case ScanResult::kEnd:
          return false;
        case ScanResult::kRecord:
          if (fields_.size() == 1 && !fields_[0].quoted && fields_[0].begin == fields_[0].end) {
            fields_.clear();  // a blank line
            break;
          }
          unescape_fields();
          return true;
      }
    }
  }

  void unescape_fields() {
    const char* record = buf_.data() + record_begin_;
    for (auto& field : fields_) {
      if (!field.escaped) continue;
      const std::size_t begin = scratch_.size();
      for (std::size_t k = field.begin; k < field.end; ++k) {
        scratch_.push_back(record[k]);
        if (record[k] == '"') ++k;  // skip the second quote of the pair
      }
      field.begin = begin;
      field.end = scratch_.size();
      field.in_scratch = true;
    }
  }

  std::string_view text(std::size_t i) const {
    const FieldSpan& field = fields_[i];
    const char* base_ptr = field.in_scratch ? scratch_.data() : buf_.data() + record_begin_;
    return {base_ptr + field.begin, field.end - field.begin};
  }

  SourceLocation field_location(std::size_t i) const {
    return locate(record_begin_, record_line_, fields_[i].raw);
  }

  bool missing(std::string_view cell) const {
    cell = trim(cell);
    if (is_builtin_missing(cell)) return true;
    for (const auto& token : extra_missing_) {
      if (cell == token) return true;
    }
    return false;
  }

  // Skips a UTF-8 byte-order mark and rejects UTF-16, then reads and checks the header.
  void start() {
    if (fd_ >= 0) {
      buf_.resize(kChunkBytes);
      buf_[0] = '\0';
      // Wait for three bytes to look for a byte-order mark, but not past a line break: on a live pipe
      // a one-letter header may be all there is for now.
      while (end_ < 3 && !eof_ && std::memchr(buf_.data(), '\n', end_) == nullptr) refill();
    }
    const auto* bytes = reinterpret_cast<const unsigned char*>(buf_.data());
    if (end_ >= 2 && ((bytes[0] == 0xff && bytes[1] == 0xfe) || (bytes[0] == 0xfe && bytes[1] == 0xff))) {
      raise_input_error(locate(0, 1, 0), std::string("looks like UTF-16 (byte-order mark ") +
                                             (bytes[0] == 0xff ? "FF FE" : "FE FF") + "); save it as UTF-8");
    }
    if (end_ >= 3 && bytes[0] == 0xef && bytes[1] == 0xbb && bytes[2] == 0xbf) parse_begin_ = 3;

    if (!read_record()) {
      SourceLocation where;
      where.file = display_name_;
      raise_input_error(where, "empty file; expected a header row");
    }
    header_line_ = record_line_;
    std::size_t count = fields_.size();
    if (count >= 2 && trim(text(count - 1)).empty()) --count;  // a trailing delimiter
    header_.reserve(count);
    for (std::size_t i = 0; i < count; ++i) {
      std::string name(trim(text(i)));
      if (name.empty()) {
        raise_input_error(field_location(i), "column " + std::to_string(i + 1) +
                                                 " of the header is empty; expected a column name");
      }
      const auto [it, inserted] = column_of_.emplace(name, i);
      if (!inserted) {
        raise_input_error(field_location(i), "column " + std::to_string(i + 1) + " of the header repeats \"" +
                                                 name + "\" (column " + std::to_string(it->second + 1) +
                                                 "); expected unique names");
      }
      header_.push_back(std::move(name));
    }
  }

  void check_field_count() {
    const std::size_t expected = header_.size();
    if (fields_.size() == expected) return;
    if (fields_.size() == expected + 1 && trim(text(expected)).empty()) {
      fields_.pop_back();  // a trailing delimiter
      return;
    }
    const std::string message = "expected " + std::to_string(expected) + " field" +
                                (expected == 1 ? "" : "s") + " as in the header, got " +
                                std::to_string(fields_.size());
    if (fields_.size() < expected) raise_input_error(line_only(record_line_), message);
    raise_input_error(field_location(expected), message);
  }
};

CsvReader::CsvReader(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
CsvReader::CsvReader(CsvReader&&) noexcept = default;
CsvReader& CsvReader::operator=(CsvReader&&) noexcept = default;
CsvReader::~CsvReader() = default;

CsvReader CsvReader::open(const std::string& path, const CsvOptions& options) {
  if (path == "-") return from_descriptor(STDIN_FILENO, "<stdin>", options);
  auto impl = std::make_unique<Impl>(path, options);
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) {
    const int error = errno;
    SourceLocation where;
    where.file = path;
    raise_input_error(where, "cannot open (" + std::system_category().message(error) + ")");
  }
  impl->fd_ = fd;
  impl->owns_fd_ = true;
  impl->start();
  return CsvReader(std::move(impl));
}

CsvReader CsvReader::from_descriptor(int fd, std::string display_name, const CsvOptions& options) {
  auto impl = std::make_unique<Impl>(std::move(display_name), options);
  impl->fd_ = fd;
  impl->start();
  return CsvReader(std::move(impl));
}

CsvReader CsvReader::from_string(std::string text, std::string display_name, const CsvOptions& options) {
  auto impl = std::make_unique<Impl>(std::move(display_name), options);
  impl->buf_ = std::move(text);  // std::string keeps a '\0' after its last byte: the sentinel
  impl->end_ = impl->buf_.size();
  impl->eof_ = true;
  impl->start();
  return CsvReader(std::move(impl));
}

const std::vector<std::string>& CsvReader::header() const { return impl_->header_; }

std::size_t CsvReader::find_column(std::string_view name) const {
  const auto it = impl_->column_of_.find(name);
  return it == impl_->column_of_.end() ? kNoColumn : it->second;
}

std::size_t CsvReader::column_index(std::string_view name) const {
  const std::size_t index = find_column(name);
  if (index != kNoColumn) return index;
  std::string hint = did_you_mean(name, impl_->header_);
  if (hint.empty()) {
    constexpr std::size_t kListed = 8;
    hint = "; the columns are ";
    const auto& names = impl_->header_;
    for (std::size_t i = 0; i < names.size() && i < kListed; ++i)
      hint += (i > 0 ? ", \"" : "\"") + names[i] + "\"";
    if (names.size() > kListed) hint += ", ...";
  }
  raise_input_error(impl_->line_only(impl_->header_line_),
                    "no column " + quote_for_message(name) + " in the header" + hint);
}

bool CsvReader::next() {
  if (!impl_->read_record()) return false;
  impl_->check_field_count();
  return true;
}

std::size_t CsvReader::field_count() const { return impl_->fields_.size(); }

std::string_view CsvReader::field(std::size_t i) const {
  assert(i < impl_->fields_.size());
  return impl_->text(i);
}

bool CsvReader::is_missing(std::size_t i) const {
  assert(i < impl_->fields_.size());
  return impl_->missing(impl_->text(i));
}

double CsvReader::number(std::size_t i) const {
  assert(i < impl_->fields_.size());
  const std::string_view text = trim(impl_->text(i));
  // Missing tokens first: a sentinel such as "-999" would otherwise read as a number.
  if (impl_->missing(text)) return std::numeric_limits<double>::quiet_NaN();
  const char* first = text.data();
  const char* const last = first + text.size();
  // fast_float, like from_chars, takes no leading '+'; allow one, but not "+-1" or "++1".
  bool sign_ok = true;
  if (first != last && *first == '+') {
    ++first;
    sign_ok = first != last && *first != '-' && *first != '+';
  }
  double value = 0.0;
  const auto result = fast_float::from_chars(first, last, value);
  const bool parsed = sign_ok && result.ec == std::errc() && result.ptr == last;
  if (parsed && std::isfinite(value)) return value;

  std::string message = "cannot read " + quote_for_message(text) + " in column \"" +
                        (i < impl_->header_.size() ? impl_->header_[i] : std::to_string(i + 1)) +
                        "\" as a number";
  if (parsed && std::isinf(value)) {
    const char lead = *first == '-' ? (first + 1 != last ? first[1] : '\0') : *first;
    if (lead == 'i' || lead == 'I') {
      message += "; expected a finite number";
    } else {
      message += "; it is out of range (magnitude above 1.8e308)";
    }
  } else if (parsed) {
    message += "; write a missing value as an empty cell, NA, NaN, nan or null";
  }
  raise_input_error(location(i), message);
}

std::size_t CsvReader::line() const { return impl_->record_line_; }

std::size_t CsvReader::column(std::size_t i) const { return location(i).column; }

SourceLocation CsvReader::location(std::size_t i) const {
  assert(i < impl_->fields_.size());
  return impl_->field_location(i);
}

const std::string& CsvReader::display_name() const { return impl_->display_name_; }

std::size_t CsvReader::bytes_read() const { return impl_->base_ + impl_->parse_begin_; }

bool CsvReader::line_buffered() const {
  const Impl& impl = *impl_;
  return impl.parse_begin_ < impl.end_ &&
         std::memchr(impl.buf_.data() + impl.parse_begin_, '\n', impl.end_ - impl.parse_begin_) != nullptr;
}

}  // namespace statewise
