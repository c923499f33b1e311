#include "statewise/csv.h"

#include <doctest/doctest.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <future>
#include <string>
#include <thread>

#include "input_error.h"

using statewise::CsvOptions;
using statewise::CsvReader;
using statewise::InputError;

using statewise::testing::input_error_of;

namespace {

CsvReader from_text(std::string text, const CsvOptions& options = {}) {
  return CsvReader::from_string(std::move(text), "log.csv", options);
}

// Reads every record of `text` (for errors that show up while reading).
void read_all(std::string text, const CsvOptions& options = {}) {
  auto reader = from_text(std::move(text), options);
  while (reader.next()) {
  }
}

// A file in the temporary directory holding `text`, removed at the end of the scope.
class TempFile {
 public:
  explicit TempFile(const std::string& text) {
    const char* dir = std::getenv("TMPDIR");
    path_ = std::string(dir != nullptr ? dir : "/tmp") + "/statewise_csv_test_XXXXXX";
    const int fd = ::mkstemp(path_.data());
    REQUIRE(fd >= 0);
    std::size_t written = 0;
    while (written < text.size()) {
      const ssize_t count = ::write(fd, text.data() + written, text.size() - written);
      REQUIRE(count > 0);
      written += static_cast<std::size_t>(count);
    }
    ::close(fd);
  }
  ~TempFile() { std::remove(path_.c_str()); }
  TempFile(const TempFile&) = delete;
  TempFile& operator=(const TempFile&) = delete;
  const std::string& path() const { return path_; }

 private:
  std::string path_;
};

void write_all(int fd, std::string_view text) {
  while (!text.empty()) {
    const ssize_t count = ::write(fd, text.data(), text.size());
    if (count <= 0) return;
    text.remove_prefix(static_cast<std::size_t>(count));
  }
}

}  // namespace

TEST_CASE("csv: reads a header and numeric records") {
  auto reader = from_text("time,temp,pressure\n0,20.5,1013\n1,21,1012.5\n");
  CHECK(reader.header() == std::vector<std::string>{"time", "temp", "pressure"});
  REQUIRE(reader.next());
  CHECK(reader.line() == 2);
  CHECK(reader.field_count() == 3);
  CHECK(reader.field(1) == "20.5");
  CHECK(reader.number(1) == 20.5);
  REQUIRE(reader.next());
  CHECK(reader.line() == 3);
  CHECK(reader.number(2) == 1012.5);
  CHECK_FALSE(reader.next());
  CHECK_FALSE(reader.next());
}

TEST_CASE("csv: quoted fields hold delimiters, line breaks and doubled quotes") {
  auto reader =
      from_text("id,note,value\n1,\"a, b\",2\n2,\"two\nlines\",3\n3,\"say \"\"hi\"\"\",4\n4,\"\",5\n");
  REQUIRE(reader.next());
  CHECK(reader.field(1) == "a, b");
  CHECK(reader.number(2) == 2.0);
  REQUIRE(reader.next());
  CHECK(reader.line() == 3);
  CHECK(reader.field(1) == "two\nlines");
  CHECK(reader.column(2) == 8);  // the field after the quoted line break starts on line 4
  CHECK(reader.location(2).line == 4);
  REQUIRE(reader.next());
  CHECK(reader.line() == 5);  // line numbers count the line break inside quotes
  CHECK(reader.field(1) == "say \"hi\"");
  CHECK(reader.field(0) == "3");
  REQUIRE(reader.next());
  CHECK(reader.field(1) == "");
  CHECK(reader.is_missing(1));
  CHECK_FALSE(reader.next());
}

TEST_CASE("csv: several escaped fields in one record") {
  auto reader = from_text("a,b,c\n\"x\"\"1\",\"\"\"\",\"y\"\"\"\"z\"\n");
  REQUIRE(reader.next());
  CHECK(reader.field(0) == "x\"1");
  CHECK(reader.field(1) == "\"");
  CHECK(reader.field(2) == "y\"\"z");
}

TEST_CASE("csv: CRLF line ends") {
  auto reader = from_text("a,b\r\n1,2\r\n\"3\",\"4\"\r\n5,6");
  CHECK(reader.header() == std::vector<std::string>{"a", "b"});
  REQUIRE(reader.next());
  CHECK(reader.field(1) == "2");
  REQUIRE(reader.next());
  CHECK(reader.field(0) == "3");
  CHECK(reader.field(1) == "4");
  REQUIRE(reader.next());
  CHECK(reader.line() == 4);
  CHECK(reader.field(1) == "6");
  CHECK_FALSE(reader.next());
}

TEST_CASE("csv: the last record may lack a line break") {
  auto reader = from_text("a,b\n1,2");
  REQUIRE(reader.next());
  CHECK(reader.field(1) == "2");
  CHECK_FALSE(reader.next());
  auto quoted = from_text("a,b\n1,\"2\"");
  REQUIRE(quoted.next());
  CHECK(quoted.field(1) == "2");
  CHECK_FALSE(quoted.next());
}

TEST_CASE("csv: blank lines are skipped") {
  auto reader = from_text("\na,b\n\n1,2\r\n\r\n\n3,4\n\n");
  CHECK(reader.header().size() == 2);
  REQUIRE(reader.next());
  CHECK(reader.line() == 4);
  REQUIRE(reader.next());
  CHECK(reader.line() == 7);
  CHECK(reader.field(0) == "3");
  CHECK_FALSE(reader.next());
}

TEST_CASE("csv: trailing delimiter on the header and the records") {
  auto reader = from_text("a,b,\n1,2,\n3,4\n5,6, \n");
  CHECK(reader.header() == std::vector<std::string>{"a", "b"});
  for (int record = 0; record < 3; ++record) {
    REQUIRE(reader.next());
    CHECK(reader.field_count() == 2);
  }
  CHECK(reader.field(0) == "5");
  CHECK_FALSE(reader.next());
  // Without one on the header, a record may still carry one.
  auto plain = from_text("a,b\n1,2,\n");
  REQUIRE(plain.next());
  CHECK(plain.field_count() == 2);
}

TEST_CASE("csv: missing-value tokens") {
  auto reader = from_text("a\n\nNA\nNaN\nnan\nnull\n  NA \n\"\"\n-999\n0\n");
  // The empty line is blank and skipped; a quoted empty cell is an empty field.
  for (const char* token : {"NA", "NaN", "nan", "null", "  NA ", ""}) {
    REQUIRE(reader.next());
    CHECK(reader.field(0) == token);
    CHECK(reader.is_missing(0));
    CHECK(std::isnan(reader.number(0)));
  }
  REQUIRE(reader.next());
  CHECK_FALSE(reader.is_missing(0));
  CHECK(reader.number(0) == -999.0);
  REQUIRE(reader.next());
  CHECK(reader.number(0) == 0.0);

  auto empty_cells = from_text("a,b\n,1\n 2 , \t\n");
  REQUIRE(empty_cells.next());
  CHECK(empty_cells.is_missing(0));
  CHECK(std::isnan(empty_cells.number(0)));
  REQUIRE(empty_cells.next());
  CHECK(empty_cells.number(0) == 2.0);
  CHECK(std::isnan(empty_cells.number(1)));
}

TEST_CASE("csv: a custom missing-value token") {
  CsvOptions options;
  options.missing_tokens = {"-999", " n/a "};
  auto reader = from_text("a,b\n-999,1\n -999 ,n/a\n-999.0,NA\n", options);
  REQUIRE(reader.next());
  CHECK(reader.is_missing(0));
  CHECK(std::isnan(reader.number(0)));
  CHECK(reader.number(1) == 1.0);
  REQUIRE(reader.next());
  CHECK(std::isnan(reader.number(0)));
  CHECK(std::isnan(reader.number(1)));
  REQUIRE(reader.next());
  CHECK(reader.number(0) == -999.0);  // tokens compare as text, not as numbers
  CHECK(std::isnan(reader.number(1)));
}

TEST_CASE("csv: numbers") {
  auto reader = from_text("x\n1e-3\n 2.5 \n+3\n-4.25\n\t7\t\n.5\n1E+2\n\"8\"\n");
  for (double expected : {1e-3, 2.5, 3.0, -4.25, 7.0, 0.5, 100.0, 8.0}) {
    REQUIRE(reader.next());
    CHECK(reader.number(0) == expected);
  }
  CHECK_FALSE(reader.next());
}

TEST_CASE("csv: unparsable cells name the place and the column") {
  CsvOptions options;
  options.delimiter = ';';
  auto reader = from_text("time;temp\n1;20\n2;  12,5\n", options);
  REQUIRE(reader.next());
  REQUIRE(reader.next());
  CHECK(input_error_of([&] { (void)reader.number(1); }) ==
        "log.csv:3:3: cannot read \"12,5\" in column \"temp\" as a number");

  auto cells = from_text("a,b,c,d,e,f,g\n12abc,abc,++1,+-1,+,1.2.3,-\n");
  REQUIRE(cells.next());
  for (std::size_t i = 0; i < cells.field_count(); ++i) {
    CHECK_THROWS_AS((void)cells.number(i), InputError);
  }
  CHECK(input_error_of([&] { (void)cells.number(1); }) ==
        "log.csv:2:7: cannot read \"abc\" in column \"b\" as a number");
}

TEST_CASE("csv: infinite and out-of-range numbers are rejected") {
  auto reader = from_text("v\ninf\n-Infinity\n1e999\n-1e400\nNAN\n1e-400\n");
  REQUIRE(reader.next());
  CHECK(input_error_of([&] { (void)reader.number(0); }) ==
        "log.csv:2:1: cannot read \"inf\" in column \"v\" as a number; expected a finite number");
  REQUIRE(reader.next());
  CHECK_THROWS_AS((void)reader.number(0), InputError);
  REQUIRE(reader.next());
  CHECK(input_error_of([&] { (void)reader.number(0); }) ==
        "log.csv:4:1: cannot read \"1e999\" in column \"v\" as a number; it is out of range (magnitude above "
        "1.8e308)");
  REQUIRE(reader.next());
  CHECK_THROWS_AS((void)reader.number(0), InputError);
  REQUIRE(reader.next());
  CHECK(input_error_of([&] { (void)reader.number(0); }) ==
        "log.csv:6:1: cannot read \"NAN\" in column \"v\" as a number; write a missing value as an empty "
        "cell, NA, "
        "NaN, nan or null");
  REQUIRE(reader.next());
  CHECK(reader.number(0) == 0.0);  // underflow rounds to zero, as in strtod
}

TEST_CASE("csv: tab-delimited") {
  CsvOptions options;
  options.delimiter = '\t';
  auto reader = from_text("time\ttemp, C\n0\t1.5\n1\t\"a\tb\"\n", options);
  CHECK(reader.header() == std::vector<std::string>{"time", "temp, C"});
  REQUIRE(reader.next());
  CHECK(reader.number(1) == 1.5);
  REQUIRE(reader.next());
  CHECK(reader.field(1) == "a\tb");
}

TEST_CASE("csv: header names are trimmed and looked up") {
  auto reader = from_text(" time , temp\t,\"pressure\"\n1,2,3\n");
  CHECK(reader.header() == std::vector<std::string>{"time", "temp", "pressure"});
  CHECK(reader.column_index("temp") == 1);
  CHECK(reader.find_column("pressure") == 2);
  CHECK(reader.find_column("humidity") == static_cast<std::size_t>(-1));
}

TEST_CASE("csv: an unknown column gets a did-you-mean hint") {
  auto reader = from_text("time,temperature,pressure\n1,2,3\n");
  CHECK(input_error_of([&] { (void)reader.column_index("temprature"); }) ==
        "log.csv:1: no column \"temprature\" in the header; did you mean \"temperature\"?");
  CHECK(input_error_of([&] { (void)reader.column_index("x"); }) ==
        "log.csv:1: no column \"x\" in the header; the columns are \"time\", \"temperature\", \"pressure\"");
}

TEST_CASE("csv: header-only file has no records") {
  auto reader = from_text("a,b\n");
  CHECK(reader.header().size() == 2);
  CHECK_FALSE(reader.next());
  auto without_newline = from_text("a,b");
  CHECK(without_newline.header().size() == 2);
  CHECK_FALSE(without_newline.next());
}

TEST_CASE("csv: an empty file is an error") {
  CHECK(input_error_of([] { from_text(""); }) == "log.csv: empty file; expected a header row");
  CHECK(input_error_of([] { from_text("\n\r\n\n"); }) == "log.csv: empty file; expected a header row");
  CHECK(input_error_of([] { from_text("\xEF\xBB\xBF"); }) == "log.csv: empty file; expected a header row");
}

TEST_CASE("csv: bad header names") {
  CHECK(input_error_of([] { from_text("time,temp,temp\n"); }) ==
        "log.csv:1:11: column 3 of the header repeats \"temp\" (column 2); expected unique names");
  CHECK(input_error_of([] { from_text("time,,temp\n"); }) ==
        "log.csv:1:6: column 2 of the header is empty; expected a column name");
  CHECK(input_error_of([] { from_text("a,b, ,\n"); }) ==
        "log.csv:1:5: column 3 of the header is empty; expected a column name");
  CHECK_THROWS_AS(from_text(",\n"), InputError);
}

TEST_CASE("csv: a UTF-8 byte-order mark is skipped") {
  auto reader = from_text("\xEF\xBB\xBFtime,temp\n1,2\n");
  CHECK(reader.header() == std::vector<std::string>{"time", "temp"});
  CHECK(reader.column_index("time") == 0);
  REQUIRE(reader.next());
  CHECK(reader.column(1) == 3);
}

TEST_CASE("csv: UTF-16 is detected") {
  const std::string little_endian("\xFF\xFEt\0i\0m\0e\0\n\0", 12);
  CHECK(input_error_of([&] { from_text(little_endian); }) ==
        "log.csv:1:1: looks like UTF-16 (byte-order mark FF FE); save it as UTF-8");
  const std::string big_endian("\xFE\xFF\0t\0i\0m\0e\0\n", 12);
  CHECK(input_error_of([&] { from_text(big_endian); }) ==
        "log.csv:1:1: looks like UTF-16 (byte-order mark FE FF); save it as UTF-8");
  const std::string without_mark("t\0i\0m\0e\0\n\0", 10);
  CHECK(input_error_of([&] { from_text(without_mark); }) ==
        "log.csv:1:2: looks like UTF-16 (NUL in every other byte); save it as UTF-8");
}

TEST_CASE("csv: a NUL byte is binary data") {
  CHECK(input_error_of([] { read_all(std::string("a,b\n1,2\n3,x\0y\n", 14)); }) ==
        "log.csv:3:4: binary data (NUL byte); expected UTF-8 text");
  CHECK(input_error_of([] { read_all(std::string("a,b\n1,\"x\0\"\n", 11)); }) ==
        "log.csv:2:5: binary data (NUL byte); expected UTF-8 text");
  CHECK(input_error_of([] { read_all(std::string("a,b\n1,\"x\"\0\n", 11)); }) ==
        "log.csv:2:6: binary data (NUL byte); expected UTF-8 text");
}

TEST_CASE("csv: wrong field counts") {
  CHECK(input_error_of([] { read_all("a,b,c,d\n1,2,3,4\n1,2,3\n"); }) ==
        "log.csv:3: expected 4 fields as in the header, got 3");
  CHECK(input_error_of([] { read_all("a,b,c,d\n1,2,3,4,5,6\n"); }) ==
        "log.csv:2:9: expected 4 fields as in the header, got 6");
  CHECK(input_error_of([] { read_all("a,b\n1,2,3\n"); }) ==
        "log.csv:2:5: expected 2 fields as in the header, got 3");
  CHECK(input_error_of([] { read_all("a\n1,\n1,,\n"); }) ==
        "log.csv:3:3: expected 1 field as in the header, got 3");
}

TEST_CASE("csv: an unterminated quote names where it opened") {
  CHECK(input_error_of([] { read_all("a,b\n1,2\n3,\"open\n4,5\n"); }) ==
        "log.csv:3:3: quoted field never closed; expected a closing '\"' before the end of the input");
}

TEST_CASE("csv: text after a closing quote") {
  CHECK(input_error_of([] { read_all("a,b\n1,\"2\"x\n"); }) ==
        "log.csv:2:6: unexpected 'x' after a closing quote; expected ',' or the end of the line");
  CHECK(input_error_of([] { read_all("a,b\n1,\"2\" \n"); }) ==
        "log.csv:2:6: unexpected space after a closing quote; expected ',' or the end of the line");
  CHECK(input_error_of([] { read_all("a,b\n1,\"2\"\rx\n"); }) ==
        "log.csv:2:6: unexpected carriage return after a closing quote; expected ',' or the end of the line");
  CsvOptions tabs;
  tabs.delimiter = '\t';
  CHECK(input_error_of([&] { read_all("a\tb\n\"1\";2\n", tabs); }) ==
        "log.csv:2:4: unexpected ';' after a closing quote; expected a tab or the end of the line");
}

TEST_CASE("csv: a quote inside an unquoted field is kept as text") {
  auto reader = from_text("size,name\n5,24\" screen\n");
  REQUIRE(reader.next());
  CHECK(reader.field(1) == "24\" screen");
}

TEST_CASE("csv: a delimiter that cannot work is refused") {
  CsvOptions options;
  options.delimiter = '"';
  CHECK_THROWS_AS(from_text("a\n", options), InputError);
}

TEST_CASE("csv: too many fields in one record") {
  std::string text = "a\n";
  text.append(1'000'001, ',');
  text += "\n";
  CHECK(input_error_of([&] { read_all(text); }) ==
        "log.csv:2: record has more than 1000000 fields; expected at most 1000000");
}

TEST_CASE("csv: reads a file in chunks, with a record longer than a chunk") {
  // 64 KiB is the first buffer; this record spans several reads and makes the buffer grow.
  const std::string long_note(300'000, 'x');
  std::string text = "id,note,value\n";
  for (int i = 0; i < 5000; ++i) text += std::to_string(i) + ",short," + std::to_string(i) + ".5\n";
  text += "5000,\"" + long_note + "\n" + long_note + "\",1\n";
  for (int i = 5001; i < 10000; ++i)
    text += std::to_string(i) + ",\"q\"\"q\"," + std::to_string(i) + ".5\r\n";
  TempFile file(text);

  auto reader = CsvReader::open(file.path(), {});
  CHECK(reader.display_name() == file.path());
  std::size_t count = 0;
  while (reader.next()) {
    CHECK(reader.number(0) == static_cast<double>(count));
    if (count == 5000) {
      CHECK(reader.field(1) == long_note + "\n" + long_note);
      CHECK(reader.number(2) == 1.0);
    } else {
      CHECK(reader.number(2) == static_cast<double>(count) + 0.5);
    }
    if (count > 5000) {
      CHECK(reader.field(1) == "q\"q");
      CHECK(reader.line() == count + 3);  // header on line 1, the long record takes two lines
    }
    ++count;
  }
  CHECK(count == 10000);
  CHECK(reader.bytes_read() == text.size());
}

TEST_CASE("csv: a record longer than 64 MiB is refused") {
  std::string text = "a\n1\n";
  text.append(std::size_t{64} * 1024 * 1024 + 10, '7');
  text += "\n";
  const std::string expected =
      "log.csv:3: record is longer than 64 MiB; expected a line break sooner (is this a text log?)";
  {
    TempFile file(text);
    auto reader = CsvReader::open(file.path(), {});
    REQUIRE(reader.next());
    std::string message = input_error_of([&] { (void)reader.next(); });
    CHECK(message == file.path() + expected.substr(7));
  }
  CHECK(input_error_of([&] { read_all(std::move(text)); }) == expected);
}

TEST_CASE("csv: a file that cannot be opened") {
  CHECK(input_error_of([] { CsvReader::open("/nonexistent/statewise.csv", {}); }) ==
        "/nonexistent/statewise.csv: cannot open (No such file or directory)");
}

TEST_CASE("csv: bytes_read follows the records") {
  auto reader = from_text(
      "\xEF\xBB\xBF"
      "a\n1\n22\n");
  CHECK(reader.bytes_read() == 5);
  REQUIRE(reader.next());
  CHECK(reader.bytes_read() == 7);
  REQUIRE(reader.next());
  CHECK(reader.bytes_read() == 10);
}

TEST_CASE("csv: a record from a pipe is returned as soon as its line is complete") {
  int ends[2];
  REQUIRE(::pipe(ends) == 0);
  std::promise<void> first_record_read;
  auto first_record_future = first_record_read.get_future();
  bool writer_timed_out = false;
  std::thread writer([&] {
    write_all(ends[1], "time,temp\n0,2");
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
    write_all(ends[1], "0.5\n1,\"21");  // the first record ends; the second is half written
    // The reader must return the first record while this end stays open. If it waits for more,
    // give up after a while and close the pipe so that the test fails instead of hanging.
    writer_timed_out = first_record_future.wait_for(std::chrono::seconds(5)) != std::future_status::ready;
    write_all(ends[1], ".5\"\r");
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
    write_all(ends[1], "\n2,22\n");
    ::close(ends[1]);
  });

  {
    auto reader = CsvReader::from_descriptor(ends[0], "<stdin>", {});
    CHECK(reader.header() == std::vector<std::string>{"time", "temp"});
    REQUIRE(reader.next());
    CHECK(reader.number(1) == 20.5);
    first_record_read.set_value();
    REQUIRE(reader.next());
    CHECK(reader.number(1) == 21.5);
    REQUIRE(reader.next());
    CHECK(reader.number(1) == 22.0);
    CHECK_FALSE(reader.next());
  }
  writer.join();
  CHECK_FALSE(writer_timed_out);
  ::close(ends[0]);
}

TEST_CASE("csv: a one-letter header on a live pipe is read without waiting for more") {
  int ends[2];
  REQUIRE(::pipe(ends) == 0);
  std::promise<void> header_read;
  auto header_future = header_read.get_future();
  bool writer_timed_out = false;
  std::thread writer([&] {
    write_all(ends[1], "x\n");
    writer_timed_out = header_future.wait_for(std::chrono::seconds(5)) != std::future_status::ready;
    write_all(ends[1], "1\n");
    ::close(ends[1]);
  });
  {
    auto reader = CsvReader::from_descriptor(ends[0], "<stdin>", {});
    CHECK(reader.header() == std::vector<std::string>{"x"});
    header_read.set_value();
    REQUIRE(reader.next());
    CHECK(reader.number(0) == 1.0);
    CHECK_FALSE(reader.next());
  }
  writer.join();
  CHECK_FALSE(writer_timed_out);
  ::close(ends[0]);
}

TEST_CASE("csv: the reader can be moved") {
  auto reader = from_text("a\n1\n2\n");
  REQUIRE(reader.next());
  CsvReader moved = std::move(reader);
  CHECK(moved.number(0) == 1.0);
  REQUIRE(moved.next());
  CHECK(moved.number(0) == 2.0);
}

TEST_CASE("csv: input arriving one byte at a time reads like the same text in memory") {
  // Every byte boundary is a place where a scan must stop and resume: inside quotes, just after a
  // quote, between CR and LF, right after a delimiter.
  const std::string text =
      "\xEF\xBB\xBF"
      "t,note,v,\r\n\r\n1,\"a,\"\"b\"\"\",2.5,\r\n2,\"x\r\ny\",-3\r\n3,,\"4\"\r\n\n4,plain,5";
  std::vector<std::string> expected;
  std::vector<std::size_t> expected_lines;
  {
    auto reader = from_text(text);
    while (reader.next()) {
      expected_lines.push_back(reader.line());
      for (std::size_t i = 0; i < reader.field_count(); ++i) expected.emplace_back(reader.field(i));
    }
  }
  REQUIRE(expected.size() == 12);
  CHECK(expected[1] == "a,\"b\"");
  CHECK(expected[4] == "x\r\ny");

  int ends[2];
  REQUIRE(::pipe(ends) == 0);
  std::thread writer([&] {
    for (char c : text) {
      write_all(ends[1], std::string_view(&c, 1));
      std::this_thread::yield();
    }
    ::close(ends[1]);
  });
  std::vector<std::string> got;
  std::vector<std::size_t> got_lines;
  {
    auto reader = CsvReader::from_descriptor(ends[0], "<stdin>", {});
    CHECK(reader.header() == std::vector<std::string>{"t", "note", "v"});
    while (reader.next()) {
      got_lines.push_back(reader.line());
      for (std::size_t i = 0; i < reader.field_count(); ++i) got.emplace_back(reader.field(i));
    }
    CHECK(reader.bytes_read() == text.size());
  }
  writer.join();
  ::close(ends[0]);
  CHECK(got == expected);
  CHECK(got_lines == expected_lines);
  CHECK(got_lines == std::vector<std::size_t>{3, 4, 6, 8});
}
