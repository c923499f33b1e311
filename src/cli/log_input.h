#pragma once
// Reading a log through the time axis, shared by the commands that read logs: the time-axis flags
// (--sort, --duplicates, --regular) become TimelineOptions, and every row goes through a Timeline.

#include <cstddef>
#include <functional>
#include <string>
#include <vector>

#include "statewise/csv.h"
#include "statewise/model.h"
#include "statewise/series.h"
#include "statewise/time_axis.h"

namespace statewise::cli {

/// The CSV reading options from --delimiter and --missing.
CsvOptions make_csv_options(const std::string& delimiter, const std::vector<std::string>& missing_tokens);

/// The policy named by --duplicates: "error" (the default), "first", "last" or "mean".
DuplicatePolicy parse_duplicate_policy(const std::string& text);

/// Raises InputError when --sort is given for a model without a time column.
void check_sort_flag(const StateSpaceModel& model, bool sort);

/// Feeds every row of `stream` through `timeline` (all rows sorted by time first when `sort`) and
/// calls `visit` with each timeline row, in order. Log rows for which `skip` (when given) returns
/// true are left out before the timeline sees them.
void read_timeline(ObservationStream& stream, Timeline& timeline, bool sort,
                   const std::function<void(TimelineRow&)>& visit,
                   const std::function<bool(const ObservationRow&)>& skip = {});
/// The same for rows from `next` (fills a row, false at the end); `file` names the log in messages.
void read_timeline(const std::function<bool(ObservationRow&)>& next, const std::string& file, Timeline& timeline,
                   bool sort, const std::function<void(TimelineRow&)>& visit,
                   const std::function<bool(const ObservationRow&)>& skip = {});

/// Where a timeline row came from, for messages: `file:line`, or `file: the row inserted at TIME`.
std::string row_place(const std::string& file, const TimelineRow& row);
/// The same for a row kept in a series: `line` is 0 for an inserted row.
std::string row_place(const std::string& file, std::size_t line, std::string_view time_text);

/// Watches the spacing of a discrete model's rows when the model has no step, so that a log with
/// uneven gaps (which such a model takes as one step each) can be pointed out. Constant memory.
class SpacingWatch {
 public:
  /// Watches only when the model is discrete, has a time column and no step.
  SpacingWatch(const StateSpaceModel& model, double regular_step);
  /// Looks at one timeline row.
  void add(const TimelineRow& row);
  /// A plain-words warning when the gaps were uneven; empty otherwise.
  std::string warning() const;

 private:
  bool active_ = false;
  double smallest_ = 0.0, largest_ = 0.0;
  std::size_t largest_line_ = 0;
  bool any_ = false;
};

}  // namespace statewise::cli
