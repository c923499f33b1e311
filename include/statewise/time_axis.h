#pragma once
/// \file time_axis.h
/// The time axis of a log: reading the time column (seconds as a number, or ISO 8601 date-times with
/// `Z` or a numeric offset), checking that rows run forward in time, merging rows that share a time,
/// filling a regular grid, and measuring the gap between consecutive rows in the model's terms
/// (whole model steps for a discrete model, seconds for a continuous one). Rules in
/// docs/model-format.md (section "Time") and docs/cli.md (section "Time axis options").

#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "statewise/error.h"
#include "statewise/model.h"
#include "statewise/series.h"

namespace statewise {

/// Relative tolerance for "a whole number of steps": a gap dt is k steps of length s when
/// |dt - k s| <= kStepTolerance * s. The same tolerance decides whether a row lies on a --regular grid.
inline constexpr double kStepTolerance = 1e-6;

/// Most rows a --regular grid may insert into one gap between two log rows (a guard against a grid
/// step given in the wrong unit).
inline constexpr std::int64_t kMaxInsertedRowsPerGap = 10'000'000;

/// An instant, as whole seconds plus a fraction, so that differences of nearby times are exact to far
/// below a nanosecond even for epoch times near 2e9 s (a double holding the epoch seconds would only
/// resolve 0.24 µs there).
struct TimePoint {
  std::int64_t seconds = 0;  ///< whole seconds; for ISO 8601 times, since 1970-01-01T00:00:00Z
  double fraction = 0.0;     ///< fraction of a second, in [0, 1)
};

/// True when both are the same instant.
bool operator==(const TimePoint& a, const TimePoint& b);
/// True when `a` is earlier than `b`.
bool operator<(const TimePoint& a, const TimePoint& b);

/// `to - from` in seconds.
double seconds_between(const TimePoint& from, const TimePoint& to);

/// `time + seconds` (seconds may be negative).
TimePoint add_seconds(const TimePoint& time, double seconds);

/// How a time was written, so that times statewise writes (inserted and forecast rows) look like the
/// log's own.
struct TimeStyle {
  bool iso8601 = false;        ///< an ISO 8601 date-time; otherwise a number of seconds
  char separator = 'T';        ///< between date and time of day: 'T' or ' '
  bool zulu = true;            ///< the zone was written "Z" (else as an offset)
  int utc_offset_minutes = 0;  ///< the zone's offset from UTC, minutes (east positive)
  int fraction_digits = 0;     ///< digits written after the decimal point (0 to 9)
};

/// A time as read from the log.
struct ParsedTime {
  TimePoint time;   ///< the instant
  TimeStyle style;  ///< how it was written
};

/// Reads a time: a number of seconds (any epoch; `1700000000`, `12.5`, `-3`, `1.7e9`), or an ISO 8601
/// date-time `YYYY-MM-DDThh:mm[:ss[.fff]]` followed by `Z` or an offset `±hh:mm`, `±hhmm` or `±hh`
/// (a space may stand for the `T`; a comma for the decimal point). Surrounding spaces are ignored.
/// Returns false and sets `problem` (a phrase, e.g. "month 13 does not exist; expected 01 to 12") when
/// the text is not a time; `problem` is empty when the text looks like neither form.
bool try_parse_time(std::string_view text, ParsedTime& parsed, std::string& problem);

/// Reads a time or raises InputError at `where`:
/// `cannot read "x" in column "c" as a time; expected seconds (a number) or an ISO 8601 date-time ...`.
ParsedTime parse_time(std::string_view text, const SourceLocation& where, std::string_view column);

/// Writes a time in a style: ISO 8601 in the style's zone and separator, or seconds; with the
/// style's number of fraction digits, more (up to 9, nanoseconds) when the time needs them.
std::string format_time(const TimePoint& time, const TimeStyle& style);

/// What to do with rows that share a time.
enum class DuplicatePolicy {
  error,  ///< a repeated time is an error naming the line (the default)
  first,  ///< per channel, keep the first value present in the group; inputs of the first row
  last,   ///< per channel, keep the last value present in the group; inputs of the last row
  mean,   ///< per channel, the mean of the values present; inputs averaged
};

/// How to turn log rows into the timeline the estimator steps through.
struct TimelineOptions {
  DuplicatePolicy duplicates = DuplicatePolicy::error;  ///< rows with the same time
  /// Seconds between the rows of a complete output timeline (--regular); 0 = off. Grid times are the
  /// first row's time plus whole multiples of it. A grid time with no log row within
  /// kStepTolerance * regular_step gets an inserted row with every channel missing; log rows off the
  /// grid are kept. For a discrete model without "step" it also becomes the model step; for one with
  /// a step it must be a whole multiple of that step.
  double regular_step = 0.0;
};

/// The time between two consecutive timeline rows, in the model's terms.
struct Gap {
  /// Discrete models: model steps from the previous row (1 when each row is one step). Continuous
  /// models: 0 (they use `seconds`).
  std::int64_t steps = 0;
  /// Seconds from the previous row; 0 without a time column.
  double seconds = 0.0;
};

/// One row of the timeline: a log row (possibly merged from rows with the same time) or a row
/// inserted on the --regular grid.
struct TimelineRow {
  /// Values (all NaN on inserted rows), inputs (held from the row before on inserted rows), time text
  /// (written like the log's on inserted rows), line (0 on inserted rows).
  ObservationRow row;
  bool inserted = false;   ///< true for a row on the --regular grid that the log did not have
  std::size_t merged = 1;  ///< log rows merged into this one (see DuplicatePolicy); 0 when inserted
  double time = 0.0;       ///< seconds since the first row; 0 without a time column
  Gap gap;                 ///< from the previous timeline row; {0, 0} on the first row
};

/// Where a Timeline stopped: what the rows after the last one handed out depend on (the gap from it,
/// the --regular grid, the inputs held on inserted rows), to resume a log in a later run.
struct TimelinePosition {
  TimePoint origin;                 ///< the first row's time: the --regular grid's anchor
  TimePoint last_time;              ///< the last log row's time
  std::string last_text;            ///< that time as the log wrote it (its style for inserted rows)
  std::int64_t next_grid = 0;       ///< index of the next --regular grid time not yet passed
  std::vector<double> last_inputs;  ///< the last row's inputs
};

/// Turns log rows, in file order, into timeline rows. Use:
/// `for each log row: timeline.push(row); while (timeline.pop(out)) use(out);`
/// then `timeline.finish(); while (timeline.pop(out)) use(out);`.
/// Raises InputError (naming the file, line and column) for a time that cannot be read, a time that
/// goes back, a repeated time under DuplicatePolicy::error, a change between seconds and ISO 8601
/// within the column, or, for a discrete model with a step, a gap that is not a whole number of steps.
/// Without a time column every row is one step and no options may be set.
class Timeline {
 public:
  /// Prepares for `model`'s log, named `file_name` in messages. Raises InputError (location
  /// "--regular" or "--duplicates") when an option needs a time column the model lacks, or when
  /// regular_step is not a positive whole multiple of the model's step.
  Timeline(const StateSpaceModel& model, const TimelineOptions& options, std::string file_name);

  /// Takes the next log row. Call pop() until it returns false before the next push().
  void push(const ObservationRow& row);
  /// Ends the input: releases a row held back to merge duplicates.
  void finish();
  /// The next timeline row, if one is ready (swapped into `out`, whose old buffers are reused).
  bool pop(TimelineRow& out);

  /// Where the timeline stands after the rows handed out so far (valid once a row was handed out).
  TimelinePosition position() const;
  /// Continues after a position saved by an earlier run, as if its rows had been handed out: the next
  /// row's gap is measured from `position.last_time`, must come after it, and the --regular grid keeps
  /// its anchor. Call before the first push(). Raises InputError at `where` when last_text is not a time.
  void resume(const TimelinePosition& position, const SourceLocation& where);

  /// True when the model has a time column.
  bool has_time() const { return has_time_; }
  /// Seconds per model step of a discrete model (its "step", or --regular's when it has none);
  /// 0 when each row is one step or the model is continuous.
  double step_seconds() const { return step_; }
  /// Timeline rows handed out so far.
  std::size_t rows() const { return emitted_; }
  /// Rows inserted on the --regular grid so far.
  std::size_t inserted_rows() const { return inserted_; }
  /// Log rows merged into another row with the same time so far.
  std::size_t merged_rows() const { return merged_; }
  /// The time of the first row (valid once a row was handed out).
  const TimePoint& origin() const { return origin_; }
  /// The time of the last row handed out.
  const TimePoint& last_time() const { return last_time_; }
  /// The style of the last log row, for writing times after it.
  const TimeStyle& last_style() const { return last_style_; }
  /// The input line of the last log row handed out.
  std::size_t last_line() const { return last_line_; }
  /// The time column's name ("" when none).
  const std::string& time_column() const { return time_column_; }

 private:
  // A log row whose time is known, waiting to be handed out (or merged with rows of the same time).
  struct Held {
    TimelineRow row;
    TimePoint time;
    TimeStyle style;
    std::vector<int> value_counts;  // per channel, values summed (DuplicatePolicy::mean)
  };
  [[noreturn]] void fail(const ObservationRow& row, const std::string& message) const;
  void hold(const ObservationRow& row, const ParsedTime& parsed, Held& slot);
  void merge(const ObservationRow& row, Held& slot);
  void finish_merge(Held& slot);
  Gap gap_between(const TimePoint& from, const TimePoint& to) const;
  void hand_out(Held& held, TimelineRow& out);

  std::string file_name_;
  std::string time_column_;
  TimeDomain domain_;
  TimelineOptions options_;
  bool has_time_ = false;
  double step_ = 0.0;
  int channels_ = 0;

  // The newest log row pushed, held back while rows with its time may follow (merging policies).
  Held pending_;
  bool has_pending_ = false;
  // The next log row to hand out.
  Held ready_;
  bool has_ready_ = false;

  // The last distinct time pushed, for order checks and messages.
  bool any_pushed_ = false;
  TimePoint pushed_time_;
  std::string pushed_text_;
  std::size_t pushed_line_ = 0;
  bool iso8601_ = false;  // the form of the column, set by its first row
  std::size_t first_line_ = 0;

  // What was handed out.
  bool started_ = false;
  TimePoint origin_;
  TimePoint last_time_;
  TimeStyle last_style_;
  std::string last_text_;
  std::size_t last_line_ = 0;
  std::vector<double> last_inputs_;
  std::int64_t next_grid_ = 0;  // index of the next grid time not yet passed
  std::size_t emitted_ = 0, inserted_ = 0, merged_ = 0;
};

/// Sorts rows by their time, keeping the file order of rows with the same time (a stable sort), for
/// --sort. Raises InputError for a time that cannot be read. `column` names the time column in messages.
void sort_rows_by_time(std::vector<ObservationRow>& rows, const std::string& file_name,
                       std::string_view column);

}  // namespace statewise
