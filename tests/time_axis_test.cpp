// Reading, writing and ordering log times, and the timeline the estimator steps through.

#include "statewise/time_axis.h"

#include <doctest/doctest.h>

#include <cmath>
#include <string>
#include <vector>

#include "input_error.h"

using namespace statewise;

using statewise::testing::input_error_of;

namespace {

TimePoint time_of(const std::string& text) { return parse_time(text, {"log.csv", 2, 1, ""}, "time").time; }

std::string parse_error(const std::string& text) {
  return input_error_of([&] { parse_time(text, {"log.csv", 7, 1, ""}, "time"); });
}

// A one-state, one-channel, one-input model with a time column.
StateSpaceModel model_with_time(TimeDomain domain = TimeDomain::discrete, double step = 0.0) {
  StateSpaceModel model;
  model.state_names = {"x"};
  model.observation_names = {"y"};
  model.input_names = {"u"};
  model.A = Eigen::MatrixXd::Constant(1, 1, domain == TimeDomain::continuous ? -0.1 : 0.9);
  model.B = Eigen::MatrixXd::Constant(1, 1, 1.0);
  model.C = Eigen::MatrixXd::Identity(1, 1);
  model.Q = Eigen::MatrixXd::Identity(1, 1);
  model.R = Eigen::MatrixXd::Identity(1, 1);
  model.initial_mean = Eigen::VectorXd::Zero(1);
  model.initial_covariance = Eigen::MatrixXd::Identity(1, 1);
  model.time_column = "time";
  model.domain = domain;
  model.step = step;
  validate_model(model, "test");
  return model;
}

struct LogRow {
  std::string time;
  double value;
  double input;
};

// Runs rows (line numbers 2, 3, ...) through a timeline and collects what comes out.
std::vector<TimelineRow> run_timeline(const StateSpaceModel& model, const TimelineOptions& options,
                                      const std::vector<LogRow>& rows) {
  Timeline timeline(model, options, "log.csv");
  std::vector<TimelineRow> out;
  TimelineRow next;
  std::size_t line = 2;
  for (const LogRow& log_row : rows) {
    ObservationRow row;
    row.values = {log_row.value};
    row.inputs = {log_row.input};
    row.time_text = log_row.time;
    row.line = line++;
    row.time_column = 1;
    timeline.push(row);
    while (timeline.pop(next)) out.push_back(next);
  }
  timeline.finish();
  while (timeline.pop(next)) out.push_back(next);
  return out;
}

constexpr double kMissing = std::numeric_limits<double>::quiet_NaN();

}  // namespace

TEST_CASE("ISO 8601 date-times read as POSIX seconds") {
  // Reference: Python 3.11.2 (Debian) datetime.fromisoformat(text).timestamp(), which uses the same
  // proleptic Gregorian calendar and POSIX seconds (no leap seconds).
  CHECK(time_of("2026-11-02T08:30:00Z").seconds == 1793608200);
  CHECK(time_of("2026-11-02T10:30:00+02:00").seconds == 1793608200);
  CHECK(time_of("2026-11-02T10:30:00+0200").seconds == 1793608200);
  CHECK(time_of("2026-11-02T10:30:00+02").seconds == 1793608200);
  CHECK(time_of("2026-11-02 08:30Z").seconds == 1793608200);
  CHECK(time_of("2024-02-29T23:59:59-05:00").seconds == 1709269199);
  CHECK(time_of("1969-12-31T23:59:59Z").seconds == -1);
  CHECK(time_of("2000-01-01T00:00:00z").seconds == 946684800);
  CHECK(time_of("9999-12-31T23:59:59Z").seconds == 253402300799);
  CHECK(time_of("0001-01-01T00:00:00Z").seconds == -62135596800);
  // Fractional seconds, with a point or (ISO 8601-1:2019, 3.2.6) a comma.
  const TimePoint fractional = time_of(" 2026-11-02T08:30:00.25Z ");
  CHECK(fractional.seconds == 1793608200);
  CHECK(fractional.fraction == 0.25);
  CHECK(time_of("2026-11-02T08:30:00,5Z").fraction == 0.5);
}

TEST_CASE("numeric times read as seconds, split exactly into whole seconds and fraction") {
  // First principles: the decimal text is split at the point, so the fraction is the nearest double
  // to 0.123456 and no precision is lost to the size of the whole seconds.
  const TimePoint epoch = time_of("1700000000.123456");
  CHECK(epoch.seconds == 1700000000);
  CHECK(epoch.fraction == 0.123456);
  const TimePoint negative = time_of("-5.25");
  CHECK(negative.seconds == -6);
  CHECK(negative.fraction == 0.75);
  CHECK(time_of("+12").seconds == 12);
  CHECK(time_of("1.7e9").seconds == 1700000000);
  CHECK(time_of(".5").fraction == 0.5);
  // A gap of 0.1 s between epoch times is 0.1 to a few ulps; a double holding the epoch seconds
  // (resolution 2^-22 s near 1.7e9) would be off by about 2e-7.
  const double gap = seconds_between(time_of("1700000000.1"), time_of("1700000000.2"));
  CHECK(std::abs(gap - 0.1) < 1e-16);
}

TEST_CASE("a tiny negative number of seconds keeps its fraction below one") {
  // Found by fuzzing (tests/fuzz/regressions/time/): -1e-20 is floor -1 plus 1 - 1e-20, which rounds
  // to 1.0 in binary64 (half an ulp of 1 is 1.1e-16), a fraction outside [0, 1). The nearest instant
  // is 0 s.
  const TimePoint tiny = time_of("-1e-20");
  CHECK(tiny.seconds == 0);
  CHECK(tiny.fraction == 0.0);
  CHECK(format_time(tiny, TimeStyle{}) == "0");
}

TEST_CASE("ISO 8601 fractions are read to the nanosecond so that the last second of 9999 writes back") {
  // Found by fuzzing (tests/fuzz/regressions/time/): the tenth digit rounded the time up into year
  // 10000, which format_time writes with five year digits that no reader takes as ISO 8601.
  ParsedTime parsed;
  std::string problem;
  REQUIRE(try_parse_time("9999-12-31T23:59:59.9999999999Z", parsed, problem));
  CHECK(format_time(parsed.time, parsed.style) == "9999-12-31T23:59:59.999999999Z");
  // 253402300799 s is 9999-12-31T23:59:59Z (days_from_civil, H. Hinnant's date algorithms).
  CHECK(parsed.time.seconds == 253402300799);
  CHECK(parsed.time.fraction == 0.999999999);
}

TEST_CASE("times that cannot be read are errors with the exact words") {
  // Specification: docs/model-format.md, section "Time"; ISO 8601-1:2019 ranges (months 01-12, hours
  // 00-23, minutes and seconds 00-59; leap seconds are refused because POSIX time cannot hold them).
  CHECK(
      parse_error("noon") ==
      "log.csv:7:1: cannot read \"noon\" in column \"time\" as a time; expected seconds (a number) or an ISO "
      "8601 date-time such as 2026-11-02T08:30:00Z");
  CHECK(parse_error("12:30") ==
        "log.csv:7:1: cannot read \"12:30\" in column \"time\" as a time; expected seconds (a number) or an "
        "ISO "
        "8601 date-time such as 2026-11-02T08:30:00Z");
  CHECK(parse_error("") ==
        "log.csv:7:1: the time is missing in column \"time\"; expected a time on every row");
  CHECK(parse_error("2026-11-02T08:30:00") ==
        "log.csv:7:1: cannot read \"2026-11-02T08:30:00\" in column \"time\" as a time: it has no time zone; "
        "expected Z or an offset such as +02:00 after the time of day");
  CHECK(parse_error("2026-13-02T08:30:00Z") ==
        "log.csv:7:1: cannot read \"2026-13-02T08:30:00Z\" in column \"time\" as a time: month 13 does not "
        "exist; expected 01 to 12");
  CHECK(
      parse_error("2023-02-29T08:30:00Z") ==
      "log.csv:7:1: cannot read \"2023-02-29T08:30:00Z\" in column \"time\" as a time: day 29 does not exist "
      "in 2023-02; expected 01 to 28");
  CHECK(parse_error("2026-11-02T24:00:00Z") ==
        "log.csv:7:1: cannot read \"2026-11-02T24:00:00Z\" in column \"time\" as a time: hour 24 is out of "
        "range; expected 00 to 23");
  CHECK(parse_error("2026-11-02T08:60:00Z") ==
        "log.csv:7:1: cannot read \"2026-11-02T08:60:00Z\" in column \"time\" as a time: minute 60 is out of "
        "range; expected 00 to 59");
  CHECK(parse_error("2016-12-31T23:59:60Z") ==
        "log.csv:7:1: cannot read \"2016-12-31T23:59:60Z\" in column \"time\" as a time: second 60 is out of "
        "range (leap seconds are not supported); expected 00 to 59");
  CHECK(
      parse_error("2026-11-02") ==
      "log.csv:7:1: cannot read \"2026-11-02\" in column \"time\" as a time: it is a date without a time of "
      "day; expected a date-time such as 2026-11-02T00:00:00Z");
  CHECK(
      parse_error("2026-11-02T08:30:00Z junk") ==
      "log.csv:7:1: cannot read \"2026-11-02T08:30:00Z junk\" in column \"time\" as a time: unexpected text "
      "\" junk\" after the time zone");
  CHECK(parse_error("2026-11-02T08:30:00 CET") ==
        "log.csv:7:1: cannot read \"2026-11-02T08:30:00 CET\" in column \"time\" as a time: expected Z or an "
        "offset such as +02:00 after the time of day, got \" CET\"");
  CHECK(parse_error("2026-11-02T08:30:00+25:00") ==
        "log.csv:7:1: cannot read \"2026-11-02T08:30:00+25:00\" in column \"time\" as a time: the offset is "
        "out "
        "of range; expected at most 23:59");
}

TEST_CASE("times are written back in the log's own style") {
  // Round trip (first principles): format_time(parse(text)) gives the text back, and adding seconds
  // moves the clock as a calendar does (across a day, a month and a leap day).
  for (const std::string text :
       {"2026-11-02T08:30:00Z", "2026-11-02T10:30:00+02:00", "2024-02-29T23:59:59-05:00",
        "2026-11-02 08:30:00.250Z", "1700000000", "1700000000.125", "-5.25", "0.000000001"}) {
    ParsedTime parsed;
    std::string problem;
    REQUIRE(try_parse_time(text, parsed, problem));
    CHECK(format_time(parsed.time, parsed.style) == text);
  }
  ParsedTime parsed;
  std::string problem;
  REQUIRE(try_parse_time("2024-02-28T23:59:30+01:00", parsed, problem));
  CHECK(format_time(add_seconds(parsed.time, 45.5), parsed.style) == "2024-02-29T00:00:15.5+01:00");
  CHECK(format_time(add_seconds(parsed.time, 86400.0 + 30.0), parsed.style) == "2024-03-01T00:00:00+01:00");
  REQUIRE(try_parse_time("10.50", parsed, problem));
  CHECK(format_time(add_seconds(parsed.time, 0.25), parsed.style) == "10.75");
  CHECK(format_time(add_seconds(parsed.time, -20.0), parsed.style) == "-9.50");
}

TEST_CASE("a row that goes back in time is an error naming its line") {
  // Specification: docs/cli.md, section "Time axis options".
  const StateSpaceModel model = model_with_time();
  const std::string message = input_error_of([&] {
    run_timeline(model, {}, {{"10", 1, 0}, {"20", 1, 0}, {"15", 1, 0}});
  });
  CHECK(
      message ==
      "log.csv:4:1: the time \"15\" is earlier than \"20\" on line 3; expected times in non-decreasing order "
      "(--sort sorts the rows first)");
}

TEST_CASE("a repeated time is an error unless a duplicates policy merges the rows") {
  // Specification: docs/cli.md, section "Time axis options" (per channel: first/last value present, or
  // the mean of the values present; the group's first line and time text).
  const StateSpaceModel model = model_with_time();
  const std::vector<LogRow> rows = {
      {"0", 1.0, 10.0}, {"5", 2.0, 20.0}, {"5", kMissing, 30.0}, {"5", 6.0, 40.0}, {"9", 7.0, 50.0}};
  CHECK(input_error_of([&] { run_timeline(model, {}, rows); }) ==
        "log.csv:4:1: the time \"5\" repeats the time of line 3; expected increasing times (--duplicates "
        "first|last|mean merges rows with the same time)");
  const auto first = run_timeline(model, {DuplicatePolicy::first, 0.0}, rows);
  REQUIRE(first.size() == 3);
  CHECK(first[1].row.values[0] == 2.0);
  CHECK(first[1].row.inputs[0] == 20.0);
  CHECK(first[1].row.line == 3);
  CHECK(first[1].merged == 3);
  CHECK(first[2].row.values[0] == 7.0);
  const auto last = run_timeline(model, {DuplicatePolicy::last, 0.0}, rows);
  CHECK(last[1].row.values[0] == 6.0);
  CHECK(last[1].row.inputs[0] == 40.0);
  const auto mean = run_timeline(model, {DuplicatePolicy::mean, 0.0}, rows);
  CHECK(mean[1].row.values[0] == 4.0);   // (2 + 6) / 2: the missing value does not count
  CHECK(mean[1].row.inputs[0] == 30.0);  // (20 + 30 + 40) / 3
  CHECK(mean[1].row.time_text == "5");
  // A group whose values are all missing stays missing.
  const auto all_missing =
      run_timeline(model, {DuplicatePolicy::mean, 0.0}, {{"1", kMissing, 0}, {"1", kMissing, 0}});
  REQUIRE(all_missing.size() == 1);
  CHECK(std::isnan(all_missing[0].row.values[0]));
}

TEST_CASE("gaps are whole model steps for a discrete model with a step") {
  // Specification: issue "Real time axes", item 3 and docs/model-format.md, section "Time": a gap of
  // k steps propagates k steps; any other gap is an error naming the line.
  const StateSpaceModel model = model_with_time(TimeDomain::discrete, 60.0);
  const auto rows = run_timeline(model, {}, {{"0", 1, 0}, {"60", 1, 0}, {"240", 1, 0}, {"300.00001", 1, 0}});
  REQUIRE(rows.size() == 4);
  CHECK(rows[0].gap.steps == 0);
  CHECK(rows[1].gap.steps == 1);
  CHECK(rows[2].gap.steps == 3);
  CHECK(rows[3].gap.steps == 1);  // 1e-5 s off is within 1e-6 of a 60 s step
  CHECK(rows[2].time == 240.0);
  CHECK(input_error_of([&] {
          run_timeline(model, {}, {{"0", 1, 0}, {"60", 1, 0}, {"150", 1, 0}});
        }) ==
        "log.csv:4:1: the gap of 90 s since line 3 is not a whole number of model steps of 60 s (1.5 steps); "
        "expected a multiple of the step to within 1e-06 of a step");
  // Without a step every row is one step, whatever the gap.
  const auto plain = run_timeline(model_with_time(), {}, {{"0", 1, 0}, {"7", 1, 0}, {"100", 1, 0}});
  CHECK(plain[1].gap.steps == 1);
  CHECK(plain[2].gap.steps == 1);
  CHECK(plain[2].gap.seconds == 93.0);
}

TEST_CASE("a column must keep one form of time") {
  // Specification: docs/model-format.md, section "Time".
  CHECK(input_error_of([&] {
          run_timeline(model_with_time(), {}, {{"2026-11-02T00:00:00Z", 1, 0}, {"1793580000", 1, 0}});
        }) ==
        "log.csv:3:1: the time \"1793580000\" is a number of seconds but line 2's time is an ISO 8601 "
        "date-time; "
        "expected one form in the whole column");
}

TEST_CASE("--regular inserts the grid times the logger skipped, with every channel missing") {
  // Specification: issue "Real time axes", item 4 and docs/cli.md, section "Time axis options": grid
  // times are the first time plus multiples of the step; a grid time without a row within 1e-6 of a
  // step gets an inserted row (inputs held from the row before, time written like the log's); rows off
  // the grid are kept.
  const StateSpaceModel model = model_with_time(TimeDomain::continuous);
  const auto rows = run_timeline(model, {DuplicatePolicy::error, 10.0},
                                 {{"2026-11-02T08:00:00+01:00", 1, 5},
                                  {"2026-11-02T08:00:10+01:00", 2, 6},
                                  {"2026-11-02T08:00:43.5+01:00", 3, 7},
                                  {"2026-11-02T08:00:50+01:00", 4, 8}});
  REQUIRE(rows.size() == 7);
  const std::vector<std::string> times = {"2026-11-02T08:00:00+01:00", "2026-11-02T08:00:10+01:00",
                                          "2026-11-02T08:00:20+01:00", "2026-11-02T08:00:30+01:00",
                                          "2026-11-02T08:00:40+01:00", "2026-11-02T08:00:43.5+01:00"};
  for (std::size_t i = 0; i < 6; ++i) CHECK(rows[i].row.time_text == times[i]);
  CHECK(!rows[1].inserted);
  CHECK(rows[2].inserted);
  CHECK(std::isnan(rows[2].row.values[0]));
  CHECK(rows[2].row.inputs[0] == 6.0);
  CHECK(rows[4].row.inputs[0] == 6.0);
  CHECK(rows[5].gap.seconds == 3.5);
  CHECK(rows[5].row.line == 4);
  CHECK(rows[6].row.time_text == "2026-11-02T08:00:50+01:00");
  CHECK(rows[6].gap.seconds == 6.5);
  const auto all = run_timeline(model, {DuplicatePolicy::error, 10.0},
                                {{"0", 1, 0}, {"10", 1, 0}, {"43.5", 1, 0}, {"50", 1, 0}, {"70", 1, 0}});
  std::vector<double> at;
  for (const auto& row : all) at.push_back(row.time);
  CHECK(at == std::vector<double>{0, 10, 20, 30, 40, 43.5, 50, 60, 70});
}

TEST_CASE("--regular for a discrete model becomes its step or must be a multiple of it") {
  // Specification: docs/cli.md, section "Time axis options".
  const auto rows =
      run_timeline(model_with_time(), {DuplicatePolicy::error, 60.0}, {{"0", 1, 0}, {"180", 1, 0}});
  REQUIRE(rows.size() == 4);
  for (std::size_t i = 1; i < 4; ++i) CHECK(rows[i].gap.steps == 1);
  const auto coarse = run_timeline(model_with_time(TimeDomain::discrete, 30.0),
                                   {DuplicatePolicy::error, 60.0}, {{"0", 1, 0}, {"180", 1, 0}});
  REQUIRE(coarse.size() == 4);
  CHECK(coarse[1].gap.steps == 2);
  CHECK(input_error_of([] {
          Timeline(model_with_time(TimeDomain::discrete, 30.0), {DuplicatePolicy::error, 45.0}, "log.csv");
        }) == "--regular: expected a whole multiple of the model's step of 30 s, got 45");
  StateSpaceModel no_time = model_with_time();
  no_time.time_column.clear();
  CHECK(input_error_of([&] {
          Timeline(no_time, {DuplicatePolicy::error, 60.0}, "log.csv");
        }) ==
        "--regular: needs a time column; the model declares none (add \"time\": {\"column\": ...} to the "
        "model file)");
  CHECK(input_error_of([&] {
          Timeline(no_time, {DuplicatePolicy::mean, 0.0}, "log.csv");
        }) ==
        "--duplicates: needs a time column; the model declares none (add \"time\": {\"column\": ...} to the "
        "model "
        "file)");
  CHECK(input_error_of([&] {
          run_timeline(model_with_time(TimeDomain::continuous), {DuplicatePolicy::error, 0.001},
                       {{"0", 1, 0}, {"86400", 1, 0}});
        }) ==
        "log.csv:3:1: --regular 0.001 would insert 86400000 rows into the gap of 86400 s since line 2; "
        "expected at "
        "most 10000000 (is the grid step in seconds?)");
}

TEST_CASE("sorting keeps the file order of rows with the same time") {
  // Specification: docs/cli.md, section "Time axis options" (--sort is a stable sort).
  std::vector<ObservationRow> rows(4);
  const char* texts[] = {"30", "10", "20", "10"};
  for (std::size_t i = 0; i < 4; ++i) {
    rows[i].time_text = texts[i];
    rows[i].line = i + 2;
  }
  sort_rows_by_time(rows, "log.csv", "time");
  CHECK(rows[0].line == 3);
  CHECK(rows[1].line == 5);
  CHECK(rows[2].line == 4);
  CHECK(rows[3].line == 2);
}
