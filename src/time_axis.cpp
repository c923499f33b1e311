#include "statewise/time_axis.h"

#include <fast_float/fast_float.h>

#include <algorithm>
#include <cassert>
#include <charconv>
#include <cmath>
#include <limits>
#include <numeric>
#include <utility>

namespace statewise {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr std::int64_t kSecondsPerDay = 86400;
// Whole seconds beyond this are refused, so that sums and differences of times cannot overflow.
constexpr double kLargestSeconds = 4.0e18;

bool is_digit(char c) { return c >= '0' && c <= '9'; }

std::string_view trim(std::string_view text) {
  while (!text.empty() && (text.front() == ' ' || text.front() == '\t')) text.remove_prefix(1);
  while (!text.empty() && (text.back() == ' ' || text.back() == '\t')) text.remove_suffix(1);
  return text;
}

// Days from 1970-01-01 to a date of the proleptic Gregorian calendar (H. Hinnant, "chrono-Compatible
// Low-Level Date Algorithms", days_from_civil).
std::int64_t days_from_civil(std::int64_t year, int month, int day) {
  year -= month <= 2 ? 1 : 0;
  const std::int64_t era = (year >= 0 ? year : year - 399) / 400;
  const std::int64_t year_of_era = year - era * 400;
  const std::int64_t day_of_year = (153 * (month + (month > 2 ? -3 : 9)) + 2) / 5 + day - 1;
  const std::int64_t day_of_era = year_of_era * 365 + year_of_era / 4 - year_of_era / 100 + day_of_year;
  return era * 146097 + day_of_era - 719468;
}

struct CivilDate {
  std::int64_t year;
  int month;
  int day;
};

// The inverse of days_from_civil (same source, civil_from_days).
CivilDate civil_from_days(std::int64_t days) {
  days += 719468;
  const std::int64_t era = (days >= 0 ? days : days - 146096) / 146097;
  const std::int64_t day_of_era = days - era * 146097;
  const std::int64_t year_of_era =
      (day_of_era - day_of_era / 1460 + day_of_era / 36524 - day_of_era / 146096) / 365;
  const std::int64_t day_of_year = day_of_era - (365 * year_of_era + year_of_era / 4 - year_of_era / 100);
  const std::int64_t shifted_month = (5 * day_of_year + 2) / 153;
  const auto day = static_cast<int>(day_of_year - (153 * shifted_month + 2) / 5 + 1);
  const auto month = static_cast<int>(shifted_month < 10 ? shifted_month + 3 : shifted_month - 9);
  return {year_of_era + era * 400 + (month <= 2 ? 1 : 0), month, day};
}

bool is_leap_year(std::int64_t year) { return (year % 4 == 0 && year % 100 != 0) || year % 400 == 0; }

int days_in_month(std::int64_t year, int month) {
  static constexpr int kDays[] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
  return month == 2 && is_leap_year(year) ? 29 : kDays[month - 1];
}

std::string two_digits(int value) {
  std::string text = std::to_string(value);
  return text.size() < 2 ? "0" + text : text;
}

// "0.ddd" for the fraction digits `digits` (at least one), read exactly to the nearest double.
double fraction_from_digits(std::string_view digits) {
  std::string text = "0.";
  text.append(digits);
  double value = 0.0;
  fast_float::from_chars(text.data(), text.data() + text.size(), value);
  return value;
}

// A number of seconds. Plain decimals (the usual case) are split into whole seconds and fraction
// exactly; other forms (an exponent, more than 18 integer digits) go through a double.
bool parse_seconds(std::string_view text, ParsedTime& parsed) {
  std::size_t i = 0;
  bool negative = false;
  if (i < text.size() && (text[i] == '+' || text[i] == '-')) negative = text[i++] == '-';
  const std::size_t integer_begin = i;
  while (i < text.size() && is_digit(text[i])) ++i;
  const std::size_t integer_end = i;
  std::size_t fraction_begin = i, fraction_end = i;
  if (i < text.size() && text[i] == '.') {
    fraction_begin = ++i;
    while (i < text.size() && is_digit(text[i])) ++i;
    fraction_end = i;
  }
  if (integer_end == integer_begin && fraction_end == fraction_begin) return false;
  parsed.style = TimeStyle{};
  parsed.style.fraction_digits = static_cast<int>(std::min<std::size_t>(9, fraction_end - fraction_begin));
  if (i == text.size() && integer_end - integer_begin <= 18) {
    std::int64_t whole = 0;
    for (std::size_t k = integer_begin; k < integer_end; ++k) whole = whole * 10 + (text[k] - '0');
    double fraction = fraction_end > fraction_begin
                          ? fraction_from_digits(text.substr(fraction_begin, fraction_end - fraction_begin))
                          : 0.0;
    if (fraction >= 1.0) {  // more than 16 nines after the point round up to 1
      fraction = 0.0;
      ++whole;
    }
    if (negative) {
      whole = -whole;
      if (fraction > 0.0) {
        whole -= 1;
        fraction = 1.0 - fraction;
        if (fraction >= 1.0) {
          fraction = 0.0;
          ++whole;
        }
      }
    }
    parsed.time = TimePoint{whole, fraction};
    return true;
  }
  const char* first = text.data() + (text[0] == '+' ? 1 : 0);
  const char* last = text.data() + text.size();
  double value = 0.0;
  const auto result = fast_float::from_chars(first, last, value);
  if (result.ec != std::errc() || result.ptr != last || !std::isfinite(value) ||
      std::abs(value) > kLargestSeconds)
    return false;
  double whole = std::floor(value);
  double fraction = value - whole;
  if (fraction >= 1.0) {  // a tiny negative value: -1e-20 - (-1) rounds to 1
    fraction = 0.0;
    whole += 1.0;
  }
  parsed.time = TimePoint{static_cast<std::int64_t>(whole), fraction};
  return true;
}

// Reads `count` digits at `position` into `value`; false when they are not all digits.
bool read_digits(std::string_view text, std::size_t position, std::size_t count, int& value) {
  if (position + count > text.size()) return false;
  value = 0;
  for (std::size_t k = position; k < position + count; ++k) {
    if (!is_digit(text[k])) return false;
    value = value * 10 + (text[k] - '0');
  }
  return true;
}

// An ISO 8601 date-time with a zone. Returns false with `problem` set when the text is not one.
bool parse_iso8601(std::string_view text, ParsedTime& parsed, std::string& problem) {
  int year = 0, month = 0, day = 0, hour = 0, minute = 0, second = 0;
  if (!read_digits(text, 0, 4, year) || text.size() < 10 || text[4] != '-' ||
      !read_digits(text, 5, 2, month) || text[7] != '-' || !read_digits(text, 8, 2, day)) {
    problem = "expected a date as YYYY-MM-DD";
    return false;
  }
  if (month < 1 || month > 12) {
    problem = "month " + two_digits(month) + " does not exist; expected 01 to 12";
    return false;
  }
  if (day < 1 || day > days_in_month(year, month)) {
    problem = "day " + two_digits(day) + " does not exist in " + std::to_string(year) + "-" +
              two_digits(month) + "; expected 01 to " + two_digits(days_in_month(year, month));
    return false;
  }
  if (text.size() == 10) {
    problem = "it is a date without a time of day; expected a date-time such as " + std::string(text) +
              "T00:00:00Z";
    return false;
  }
  TimeStyle style;
  style.iso8601 = true;
  style.separator = text[10] == ' ' ? ' ' : 'T';
  if (text[10] != 'T' && text[10] != 't' && text[10] != ' ') {
    problem = "expected 'T' between the date and the time of day";
    return false;
  }
  std::size_t i = 11;
  if (!read_digits(text, i, 2, hour) || i + 2 >= text.size() || text[i + 2] != ':' ||
      !read_digits(text, i + 3, 2, minute)) {
    problem = "expected the time of day as hh:mm or hh:mm:ss after the date";
    return false;
  }
  i += 5;
  if (i < text.size() && text[i] == ':') {
    if (!read_digits(text, i + 1, 2, second)) {
      problem = "expected two digits of seconds after hh:mm:";
      return false;
    }
    i += 3;
  }
  if (hour > 23) {
    problem = "hour " + two_digits(hour) + " is out of range; expected 00 to 23";
    return false;
  }
  if (minute > 59) {
    problem = "minute " + two_digits(minute) + " is out of range; expected 00 to 59";
    return false;
  }
  if (second > 59) {
    problem = "second " + two_digits(second) +
              " is out of range (leap seconds are not supported); expected 00 to 59";
    return false;
  }
  double fraction = 0.0;
  if (i < text.size() && (text[i] == '.' || text[i] == ',')) {
    const std::size_t begin = ++i;
    while (i < text.size() && is_digit(text[i])) ++i;
    if (i == begin) {
      problem = "expected digits after the decimal point of the seconds";
      return false;
    }
    // Read to the nanosecond, the finest a time is written with: rounding further digits up could
    // carry 9999-12-31T23:59:59.9999999999Z into a year 10000 that format_time cannot write readably.
    fraction = fraction_from_digits(text.substr(begin, std::min<std::size_t>(9, i - begin)));
    style.fraction_digits = static_cast<int>(std::min<std::size_t>(9, i - begin));
  }
  int offset_minutes = 0;
  if (i == text.size()) {
    problem = "it has no time zone; expected Z or an offset such as +02:00 after the time of day";
    return false;
  }
  if (text[i] == 'Z' || text[i] == 'z') {
    ++i;
  } else if (text[i] == '+' || text[i] == '-') {
    const int sign = text[i] == '-' ? -1 : 1;
    int offset_hours = 0, offset_rest = 0;
    if (!read_digits(text, i + 1, 2, offset_hours)) {
      problem = "expected the offset as +hh:mm, +hhmm or +hh";
      return false;
    }
    i += 3;
    if (i < text.size() && text[i] == ':') ++i;
    if (i < text.size()) {
      if (!read_digits(text, i, 2, offset_rest)) {
        problem = "expected the offset as +hh:mm, +hhmm or +hh";
        return false;
      }
      i += 2;
    }
    if (offset_hours > 23 || offset_rest > 59) {
      problem = "the offset is out of range; expected at most 23:59";
      return false;
    }
    offset_minutes = sign * (offset_hours * 60 + offset_rest);
    style.zulu = false;
  } else {
    problem = "expected Z or an offset such as +02:00 after the time of day, got \"" +
              std::string(text.substr(i)) + "\"";
    return false;
  }
  if (i != text.size()) {
    problem = "unexpected text \"" + std::string(text.substr(i)) + "\" after the time zone";
    return false;
  }
  style.utc_offset_minutes = offset_minutes;
  const std::int64_t local =
      days_from_civil(year, month, day) * kSecondsPerDay + hour * 3600 + minute * 60 + second;
  parsed.time = TimePoint{local - offset_minutes * 60, fraction};
  parsed.style = style;
  return true;
}

bool looks_like_iso8601(std::string_view text) {
  return text.size() >= 5 && is_digit(text[0]) && is_digit(text[1]) && is_digit(text[2]) &&
         is_digit(text[3]) && text[4] == '-';
}

// Short text for a number in a message: up to 10 significant digits.
std::string number_text(double value) {
  char buffer[64];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::general, 10);
  return std::string(buffer, result.ptr);
}

std::string quoted(std::string_view text) {
  std::string out(1, '"');
  out.append(text);
  out += '"';
  return out;
}

// Nanoseconds of a fraction, and how many digits (at least `minimum`) write it exactly.
void fraction_digits(double fraction, int minimum, std::int64_t& nanoseconds, int& digits) {
  nanoseconds = std::llround(fraction * 1e9);
  digits = minimum;
  std::int64_t unit = 1;
  for (int k = 0; k < 9 - digits; ++k) unit *= 10;
  while (digits < 9 && nanoseconds % unit != 0) {
    ++digits;
    unit /= 10;
  }
}

void append_fraction(std::string& out, std::int64_t nanoseconds, int digits) {
  if (digits <= 0) return;
  std::string text = std::to_string(nanoseconds);
  text.insert(0, 9 - text.size(), '0');
  out += '.';
  out.append(text, 0, static_cast<std::size_t>(digits));
}

}  // namespace

bool operator==(const TimePoint& a, const TimePoint& b) {
  return a.seconds == b.seconds && a.fraction == b.fraction;
}

bool operator<(const TimePoint& a, const TimePoint& b) {
  return a.seconds < b.seconds || (a.seconds == b.seconds && a.fraction < b.fraction);
}

double seconds_between(const TimePoint& from, const TimePoint& to) {
  return static_cast<double>(to.seconds - from.seconds) + (to.fraction - from.fraction);
}

TimePoint add_seconds(const TimePoint& time, double seconds) {
  const double whole = std::floor(seconds);
  double fraction = time.fraction + (seconds - whole);
  std::int64_t result = time.seconds + static_cast<std::int64_t>(whole);
  if (fraction >= 1.0) {
    fraction -= 1.0;
    ++result;
  }
  return TimePoint{result, fraction};
}

bool try_parse_time(std::string_view text, ParsedTime& parsed, std::string& problem) {
  problem.clear();
  text = trim(text);
  if (text.empty()) return false;
  if (looks_like_iso8601(text)) return parse_iso8601(text, parsed, problem);
  return parse_seconds(text, parsed);
}

ParsedTime parse_time(std::string_view text, const SourceLocation& where, std::string_view column) {
  ParsedTime parsed;
  std::string problem;
  if (try_parse_time(text, parsed, problem)) return parsed;
  const std::string prefix =
      "cannot read " + quoted(trim(text)) + " in column " + quoted(column) + " as a time";
  if (trim(text).empty())
    raise_input_error(where,
                      "the time is missing in column " + quoted(column) + "; expected a time on every row");
  if (!problem.empty()) raise_input_error(where, prefix + ": " + problem);
  raise_input_error(where, prefix +
                               "; expected seconds (a number) or an ISO 8601 date-time such as "
                               "2026-11-02T08:30:00Z");
}

std::string format_time(const TimePoint& time, const TimeStyle& style) {
  std::int64_t nanoseconds = 0;
  int digits = 0;
  fraction_digits(time.fraction, style.fraction_digits, nanoseconds, digits);
  std::int64_t whole = time.seconds;
  if (nanoseconds >= 1'000'000'000) {
    nanoseconds -= 1'000'000'000;
    ++whole;
  }
  std::string out;
  if (!style.iso8601) {
    if (whole < 0 && nanoseconds > 0) {  // e.g. whole -1 and 0.75 is -0.25
      out = "-" + std::to_string(-(whole + 1));
      append_fraction(out, 1'000'000'000 - nanoseconds, digits);
    } else {
      out = std::to_string(whole);
      append_fraction(out, nanoseconds, digits);
    }
    return out;
  }
  const std::int64_t local = whole + style.utc_offset_minutes * 60;
  std::int64_t days = local / kSecondsPerDay;
  std::int64_t second_of_day = local % kSecondsPerDay;
  if (second_of_day < 0) {
    second_of_day += kSecondsPerDay;
    --days;
  }
  const CivilDate date = civil_from_days(days);
  std::string year = std::to_string(date.year);
  if (date.year >= 0 && year.size() < 4) year.insert(0, 4 - year.size(), '0');
  out = year + "-" + two_digits(date.month) + "-" + two_digits(date.day);
  out += style.separator;
  out += two_digits(static_cast<int>(second_of_day / 3600)) + ":" +
         two_digits(static_cast<int>(second_of_day / 60 % 60)) + ":" +
         two_digits(static_cast<int>(second_of_day % 60));
  append_fraction(out, nanoseconds, digits);
  if (style.zulu && style.utc_offset_minutes == 0) {
    out += 'Z';
  } else {
    const int offset = std::abs(style.utc_offset_minutes);
    out += style.utc_offset_minutes < 0 ? '-' : '+';
    out += two_digits(offset / 60) + ":" + two_digits(offset % 60);
  }
  return out;
}

Timeline::Timeline(const StateSpaceModel& model, const TimelineOptions& options, std::string file_name)
    : file_name_(std::move(file_name)),
      time_column_(model.time_column),
      domain_(model.domain),
      options_(options),
      has_time_(!model.time_column.empty()),
      channels_(model.channel_count()) {
  const std::string add_time =
      "; the model declares none (add \"time\": {\"column\": ...} to the model file)";
  if (!(options.regular_step >= 0.0) || !std::isfinite(options.regular_step))
    raise_input_error({"--regular", 0, 0, ""},
                      "expected a positive number of seconds, got " + number_text(options.regular_step));
  if (options.regular_step > 0.0 && !has_time_)
    raise_input_error({"--regular", 0, 0, ""}, "needs a time column" + add_time);
  if (options.duplicates != DuplicatePolicy::error && !has_time_)
    raise_input_error({"--duplicates", 0, 0, ""}, "needs a time column" + add_time);
  if (domain_ == TimeDomain::discrete) {
    step_ = model.step;
    if (options.regular_step > 0.0) {
      if (step_ > 0.0) {
        const double ratio = options.regular_step / step_;
        const double whole = std::round(ratio);
        if (whole < 1.0 || std::abs(options.regular_step - whole * step_) > kStepTolerance * step_)
          raise_input_error({"--regular", 0, 0, ""}, "expected a whole multiple of the model's step of " +
                                                         number_text(step_) + " s, got " +
                                                         number_text(options.regular_step));
      } else {
        step_ = options.regular_step;  // the grid step becomes the model step
      }
    }
  }
}

void Timeline::fail(const ObservationRow& row, const std::string& message) const {
  raise_input_error({file_name_, row.line, row.time_column, ""}, message);
}

void Timeline::hold(const ObservationRow& row, const ParsedTime& parsed, Held& slot) {
  slot.row.row = row;
  slot.row.inserted = false;
  slot.row.merged = 1;
  slot.time = parsed.time;
  slot.style = parsed.style;
  if (options_.duplicates == DuplicatePolicy::mean) {
    slot.value_counts.resize(row.values.size());
    for (std::size_t c = 0; c < row.values.size(); ++c)
      slot.value_counts[c] = std::isnan(row.values[c]) ? 0 : 1;
  }
}

void Timeline::merge(const ObservationRow& row, Held& slot) {
  ObservationRow& kept = slot.row.row;
  ++slot.row.merged;
  ++merged_;
  switch (options_.duplicates) {
    case DuplicatePolicy::first:
      for (std::size_t c = 0; c < kept.values.size(); ++c)
        if (std::isnan(kept.values[c])) kept.values[c] = row.values[c];
      break;
    case DuplicatePolicy::last:
      for (std::size_t c = 0; c < kept.values.size(); ++c)
        if (!std::isnan(row.values[c])) kept.values[c] = row.values[c];
      kept.inputs = row.inputs;
      break;
    case DuplicatePolicy::mean:
      for (std::size_t c = 0; c < kept.values.size(); ++c) {
        if (std::isnan(row.values[c])) continue;
        kept.values[c] = slot.value_counts[c] == 0 ? row.values[c] : kept.values[c] + row.values[c];
        ++slot.value_counts[c];
      }
      for (std::size_t i = 0; i < kept.inputs.size(); ++i) kept.inputs[i] += row.inputs[i];
      break;
    case DuplicatePolicy::error:
      assert(false);
      break;
  }
}

void Timeline::finish_merge(Held& slot) {
  if (options_.duplicates != DuplicatePolicy::mean || slot.row.merged == 1) return;
  ObservationRow& kept = slot.row.row;
  for (std::size_t c = 0; c < kept.values.size(); ++c)
    if (slot.value_counts[c] > 1) kept.values[c] /= slot.value_counts[c];
  for (double& input : kept.inputs) input /= static_cast<double>(slot.row.merged);
}

void Timeline::push(const ObservationRow& row) {
  assert(!has_ready_ && "pop() every ready row before the next push()");
  if (!has_time_) {
    ready_.row.row = row;
    ready_.row.inserted = false;
    ready_.row.merged = 1;
    has_ready_ = true;
    return;
  }
  const ParsedTime parsed =
      parse_time(row.time_text, {file_name_, row.line, row.time_column, ""}, time_column_);
  if (!any_pushed_) {
    iso8601_ = parsed.style.iso8601;
    first_line_ = row.line;
  } else if (parsed.style.iso8601 != iso8601_) {
    const char* seconds = "a number of seconds";
    const char* iso = "an ISO 8601 date-time";
    fail(row, "the time " + quoted(trim(row.time_text)) + " is " + (parsed.style.iso8601 ? iso : seconds) +
                  " but line " + std::to_string(first_line_) + "'s time is " + (iso8601_ ? iso : seconds) +
                  "; expected one form in the whole column");
  }
  if (any_pushed_) {
    if (parsed.time < pushed_time_)
      fail(row, "the time " + quoted(trim(row.time_text)) + " is earlier than " + quoted(pushed_text_) +
                    " on line " + std::to_string(pushed_line_) +
                    "; expected times in non-decreasing order (--sort sorts the rows first)");
    if (parsed.time == pushed_time_) {
      if (options_.duplicates == DuplicatePolicy::error)
        fail(row,
             "the time " + quoted(trim(row.time_text)) + " repeats the time of line " +
                 std::to_string(pushed_line_) +
                 "; expected increasing times (--duplicates first|last|mean merges rows with the same time)");
      merge(row, pending_);
      return;
    }
    const double gap = seconds_between(pushed_time_, parsed.time);
    if (domain_ == TimeDomain::discrete && step_ > 0.0) {
      const double steps = gap / step_;
      const double whole = std::round(steps);
      if (whole < 1.0 || std::abs(gap - whole * step_) > kStepTolerance * step_)
        fail(row, "the gap of " + number_text(gap) + " s since line " + std::to_string(pushed_line_) +
                      " is not a whole number of model steps of " + number_text(step_) + " s (" +
                      number_text(steps) + " steps); expected a multiple of the step to within " +
                      number_text(kStepTolerance) + " of a step");
    }
    if (options_.regular_step > 0.0 &&
        gap / options_.regular_step > static_cast<double>(kMaxInsertedRowsPerGap))
      fail(row, "--regular " + number_text(options_.regular_step) + " would insert " +
                    number_text(std::floor(gap / options_.regular_step)) + " rows into the gap of " +
                    number_text(gap) + " s since line " + std::to_string(pushed_line_) +
                    "; expected at most " + std::to_string(kMaxInsertedRowsPerGap) +
                    " (is the grid step in seconds?)");
  }
  any_pushed_ = true;
  pushed_time_ = parsed.time;
  pushed_text_.assign(trim(row.time_text));  // reuses the buffer: no allocation per row
  pushed_line_ = row.line;
  if (options_.duplicates == DuplicatePolicy::error) {
    hold(row, parsed, ready_);
    has_ready_ = true;
    return;
  }
  if (has_pending_) {
    finish_merge(pending_);
    std::swap(ready_, pending_);
    has_ready_ = true;
  }
  hold(row, parsed, pending_);
  has_pending_ = true;
}

void Timeline::finish() {
  assert(!has_ready_ && "pop() every ready row before finish()");
  if (!has_pending_) return;
  finish_merge(pending_);
  std::swap(ready_, pending_);
  has_ready_ = true;
  has_pending_ = false;
}

TimelinePosition Timeline::position() const {
  return TimelinePosition{origin_, last_time_, last_text_, next_grid_, last_inputs_};
}

void Timeline::resume(const TimelinePosition& position, const SourceLocation& where) {
  started_ = true;
  last_inputs_ = position.last_inputs;
  if (!has_time_) return;
  const ParsedTime parsed = parse_time(position.last_text, where, time_column_);
  origin_ = position.origin;
  last_time_ = position.last_time;
  last_style_ = parsed.style;
  next_grid_ = position.next_grid;
  any_pushed_ = true;
  iso8601_ = parsed.style.iso8601;
  pushed_time_ = position.last_time;
  pushed_text_ = position.last_text;
  last_text_ = position.last_text;
  pushed_line_ = 0;
}

Gap Timeline::gap_between(const TimePoint& from, const TimePoint& to) const {
  Gap gap;
  gap.seconds = seconds_between(from, to);
  if (domain_ == TimeDomain::continuous) return gap;
  gap.steps = step_ > 0.0 ? static_cast<std::int64_t>(std::llround(gap.seconds / step_)) : 1;
  return gap;
}

void Timeline::hand_out(Held& held, TimelineRow& out) {
  std::swap(out, held.row);
  if (!has_time_) {
    out.gap = started_ ? Gap{1, 0.0} : Gap{0, 0.0};
    out.time = 0.0;
  } else {
    if (!started_) origin_ = held.time;
    out.gap = started_ ? gap_between(last_time_, held.time) : Gap{0, 0.0};
    out.time = seconds_between(origin_, held.time);
    last_time_ = held.time;
    last_style_ = held.style;
    last_text_.assign(trim(out.row.time_text));
  }
  last_line_ = out.row.line;
  last_inputs_ = out.row.inputs;
  started_ = true;
  ++emitted_;
}

bool Timeline::pop(TimelineRow& out) {
  if (!has_ready_) return false;
  const double grid_step = options_.regular_step;
  const double tolerance = kStepTolerance * grid_step;
  if (grid_step > 0.0 && started_) {
    const double grid_time = static_cast<double>(next_grid_) * grid_step;
    if (grid_time < seconds_between(origin_, ready_.time) - tolerance) {
      const TimePoint time = add_seconds(origin_, grid_time);
      out.inserted = true;
      out.merged = 0;
      out.row.values.assign(static_cast<std::size_t>(channels_), kNaN);
      out.row.inputs = last_inputs_;
      out.row.time_text = format_time(time, last_style_);
      out.row.line = 0;
      out.row.time_column = 0;
      out.gap = gap_between(last_time_, time);
      out.time = grid_time;
      last_time_ = time;
      ++next_grid_;
      ++inserted_;
      ++emitted_;
      return true;
    }
  }
  hand_out(ready_, out);
  has_ready_ = false;
  if (grid_step > 0.0)
    while (static_cast<double>(next_grid_) * grid_step <= out.time + tolerance) ++next_grid_;
  return true;
}

void sort_rows_by_time(std::vector<ObservationRow>& rows, const std::string& file_name,
                       std::string_view column) {
  std::vector<TimePoint> times(rows.size());
  for (std::size_t i = 0; i < rows.size(); ++i)
    times[i] = parse_time(rows[i].time_text, {file_name, rows[i].line, rows[i].time_column, ""}, column).time;
  std::vector<std::size_t> order(rows.size());
  std::iota(order.begin(), order.end(), std::size_t{0});
  std::stable_sort(order.begin(), order.end(),
                   [&](std::size_t a, std::size_t b) { return times[a] < times[b]; });
  std::vector<ObservationRow> sorted;
  sorted.reserve(rows.size());
  for (const std::size_t i : order) sorted.push_back(std::move(rows[i]));
  rows = std::move(sorted);
}

}  // namespace statewise
