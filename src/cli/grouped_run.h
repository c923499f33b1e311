#pragma once
// `filter --by COLUMN` and `smooth --by COLUMN`: a long-format table holding many sensors' logs, one
// run of the model per group of rows with the same value in COLUMN, run in parallel on --threads
// and written out in the order of each group's first row (docs/cli.md, section "Many sensors").

#include <cstddef>
#include <string>
#include <vector>

#include "cli/commands.h"
#include "statewise/model.h"
#include "statewise/series.h"

namespace statewise::cli {

/// The command run on each group.
enum class GroupedCommand { filter, smooth };

/// One group's log rows, in the table's order, kept compactly (the table is read whole before the
/// groups run, since a group's rows may be spread over the whole table).
class GroupRows {
 public:
  /// An empty group called `name`, for `model`'s columns.
  GroupRows(std::string name, const StateSpaceModel& model);
  /// The group's value of the --by column.
  const std::string& name() const { return name_; }
  /// Appends a log row.
  void push_back(const ObservationRow& row);
  /// Number of rows.
  std::size_t rows() const { return series_.rows(); }
  /// Fills `out` with row t, as ObservationStream would have read it.
  void row(std::size_t t, ObservationRow& out) const;
  /// Frees the rows (once the group has run).
  void release();

 private:
  std::string name_;
  ObservationSeries series_;
  std::vector<std::size_t> time_columns_;
};

/// A table split by the --by column: the groups in the order of their first row.
struct GroupedTable {
  std::string file;               // the table's name in messages
  std::vector<GroupRows> groups;  // by first appearance
};

/// Reads the whole table of `options.input_path` and splits it by the column `options.by`. Raises
/// InputError when the column is missing (naming it, with a did-you-mean hint), when the model uses
/// it, when a row leaves it empty, and for any row that cannot be read.
GroupedTable read_grouped_table(const EstimateOptions& options, const StateSpaceModel& model);

/// Runs `command` once per group (see the file comment); returns kExitSuccess, or
/// kExitSomeGroupsFailed when some groups failed and the others' rows were written; with
/// --fail-fast, the first failed group's own status, and nothing is written.
int run_grouped(const EstimateOptions& options, GroupedCommand command);

}  // namespace statewise::cli
