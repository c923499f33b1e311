#include "cli/log_input.h"

#include <charconv>

#include "cli/commands.h"
#include "statewise/error.h"

namespace statewise::cli {

namespace {
std::string number_text(double value) {
  char buffer[64];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::general, 6);
  return std::string(buffer, result.ptr);
}
}  // namespace

CsvOptions make_csv_options(const std::string& delimiter, const std::vector<std::string>& missing_tokens) {
  CsvOptions csv;
  csv.delimiter = parse_delimiter(delimiter);
  csv.missing_tokens = missing_tokens;
  return csv;
}

DuplicatePolicy parse_duplicate_policy(const std::string& text) {
  if (text.empty() || text == "error") return DuplicatePolicy::error;
  if (text == "first") return DuplicatePolicy::first;
  if (text == "last") return DuplicatePolicy::last;
  if (text == "mean") return DuplicatePolicy::mean;
  raise_input_error({"--duplicates", 0, 0, ""}, "expected first, last, mean or error, got \"" + text + "\"" +
                                                    did_you_mean(text, {"first", "last", "mean", "error"}));
}

void check_sort_flag(const StateSpaceModel& model, bool sort) {
  if (sort && model.time_column.empty())
    raise_input_error(
        {"--sort", 0, 0, ""},
        "needs a time column; the model declares none (add \"time\": {\"column\": ...} to the model file)");
}

void read_timeline(ObservationStream& stream, Timeline& timeline, bool sort,
                   const std::function<void(TimelineRow&)>& visit,
                   const std::function<bool(const ObservationRow&)>& skip) {
  read_timeline([&stream](ObservationRow& row) { return stream.next(row); }, stream.reader().display_name(), timeline,
                sort, visit, skip);
}

void read_timeline(const std::function<bool(ObservationRow&)>& next, const std::string& file, Timeline& timeline,
                   bool sort, const std::function<void(TimelineRow&)>& visit,
                   const std::function<bool(const ObservationRow&)>& skip) {
  TimelineRow out;
  if (sort) {
    std::vector<ObservationRow> rows;
    ObservationRow row;
    while (next(row))
      if (!skip || !skip(row)) rows.push_back(row);
    sort_rows_by_time(rows, file, timeline.time_column());
    for (const ObservationRow& sorted : rows) {
      timeline.push(sorted);
      while (timeline.pop(out)) visit(out);
    }
  } else {
    ObservationRow row;
    while (next(row)) {
      if (skip && skip(row)) continue;
      timeline.push(row);
      while (timeline.pop(out)) visit(out);
    }
  }
  timeline.finish();
  while (timeline.pop(out)) visit(out);
}

std::string row_place(const std::string& file, std::size_t line, std::string_view time_text) {
  if (line == 0) return file + ": the row inserted at " + std::string(time_text);
  return file + ":" + std::to_string(line);
}

std::string row_place(const std::string& file, const TimelineRow& row) {
  return row_place(file, row.inserted ? 0 : row.row.line, row.row.time_text);
}

SpacingWatch::SpacingWatch(const StateSpaceModel& model, double regular_step)
    : active_(model.domain == TimeDomain::discrete && !model.time_column.empty() && model.step == 0.0 &&
              regular_step == 0.0) {}

void SpacingWatch::add(const TimelineRow& row) {
  if (!active_ || row.gap.steps == 0) return;
  const double gap = row.gap.seconds;
  if (!any_ || gap < smallest_) smallest_ = gap;
  if (!any_ || gap > largest_) {
    largest_ = gap;
    largest_line_ = row.row.line;
  }
  any_ = true;
}

std::string SpacingWatch::warning() const {
  if (!any_ || largest_ - smallest_ <= kStepTolerance * largest_) return "";
  return "the rows are unevenly spaced in time (gaps from " + number_text(smallest_) + " s to " +
         number_text(largest_) + " s, the largest before line " + std::to_string(largest_line_) +
         "), but the model has no \"step\", so each row counts as one model step; give the model a \"step\", "
         "make it continuous, or use --regular";
}

}  // namespace statewise::cli
