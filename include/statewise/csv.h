#pragma once
/// \file csv.h
/// A streaming reader for delimited text logs (RFC 4180 quoting). It reads a file or standard input
/// in chunks with read(2), so it works on pipes and returns each record as soon as its line is
/// complete (for `tail -f | statewise filter`), and keeps memory bounded by the longest record.

#include <cstddef>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "statewise/error.h"

namespace statewise {

/// How to read a delimited log.
struct CsvOptions {
  char delimiter = ',';  ///< field separator; '\t' for TSV
  /// Cell texts that mean "no value", in addition to the built-in ones
  /// (empty, NA, NaN, nan, null); e.g. a sensor's "-999" sentinel. Compared after trimming spaces.
  std::vector<std::string> missing_tokens;
};

/// Reads a header row, then one record at a time. Not copyable; movable.
///
/// Rules: the first record is the header (column names, unique, non-empty). Fields may be quoted
/// with '"' (a doubled quote inside stands for one quote; quoted fields may hold delimiters and line
/// breaks). LF and CRLF line ends are both accepted. A UTF-8 byte-order mark before the header is
/// skipped. Blank lines are skipped. A record with fewer fields than the header is an error naming
/// the line; a record with exactly one more field whose last field is empty (a trailing delimiter)
/// is accepted, as is a header with a trailing delimiter; other extra fields are an error.
/// A '"' inside an unquoted field is kept as text. Limits, so that garbage input cannot allocate
/// without bound: a record may be at most 64 MiB long and hold at most 1,000,000 fields.
class CsvReader {
 public:
  /// Opens `path` ("-" means standard input) and reads the header. `display_name` is used in
  /// messages (defaults to the path, "<stdin>" for "-"). Raises InputError for a file that cannot be
  /// opened, an empty file, or a bad header.
  static CsvReader open(const std::string& path, const CsvOptions& options);
  /// Reads from a file descriptor the caller owns (not closed by the reader).
  static CsvReader from_descriptor(int fd, std::string display_name, const CsvOptions& options);
  /// Reads from text held in memory (for tests and embedding).
  static CsvReader from_string(std::string text, std::string display_name, const CsvOptions& options);

  CsvReader(CsvReader&&) noexcept;
  CsvReader& operator=(CsvReader&&) noexcept;
  ~CsvReader();

  /// Column names from the header row, in file order.
  const std::vector<std::string>& header() const;
  /// Index of the named column; raises InputError "no column "x" in the header; did you mean ..."
  /// naming the file and line 1.
  std::size_t column_index(std::string_view name) const;
  /// Index of the named column, or -1 (as std::size_t max) when absent.
  std::size_t find_column(std::string_view name) const;

  /// Advances to the next record. Returns false at the end of input. Blocks on a pipe until a
  /// whole record is available.
  bool next();
  /// Number of fields in the current record (equal to header().size()).
  std::size_t field_count() const;
  /// Text of field i of the current record, quotes removed; valid until the next call to next().
  std::string_view field(std::size_t i) const;
  /// True when field i is a missing-value token.
  bool is_missing(std::size_t i) const;
  /// Field i as a number: NaN when it is a missing token; raises InputError
  /// "file:line:column: cannot read "x" in column "c" as a number" otherwise when unparsable.
  /// Infinite values and out-of-range numbers (1e999) are errors too.
  double number(std::size_t i) const;
  /// 1-based line where the current record starts.
  std::size_t line() const;
  /// 1-based column (byte offset in the line + 1) where field i of the current record starts.
  std::size_t column(std::size_t i) const;
  /// Location of field i of the current record, for error messages.
  SourceLocation location(std::size_t i) const;
  /// Name used for the input in messages.
  const std::string& display_name() const;
  /// Bytes consumed so far (for progress reporting).
  std::size_t bytes_read() const;
  /// True when input already read holds the end of another line, so that next() can go on without
  /// waiting for more input (a streaming writer flushes its output only when this is false).
  bool line_buffered() const;

 private:
  struct Impl;
  explicit CsvReader(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace statewise
