// The options of `filter` and `smooth` for many sensors in one table (--by, cli/grouped_run.h) and
// for joining the tables of several runs (--no-header).

#include <CLI/CLI.hpp>

#include "cli/commands.h"

namespace statewise::cli {

void add_grouping_options(CLI::App& command, EstimateOptions& options) {
  CLI::Option* by =
      command
          .add_option("--by", options.by,
                      "Column naming each row's sensor: run the model once per group of rows with the same "
                      "value, as if each were a log of its own; the output starts with this column")
          ->type_name("COLUMN");
  command
      .add_option("--threads", options.threads,
                  "Groups run at the same time with --by; 0 = one per processor core")
      ->capture_default_str()
      ->check(CLI::Range(0, 4096))
      ->needs(by);
  command
      .add_flag("--fail-fast", options.fail_fast,
                "With --by, stop at the first failed group (in output order) with its usual exit status; "
                "output and report files are left untouched")
      ->needs(by);
  command.add_flag("--no-header", [&options](std::int64_t) { options.header = false; },
                   "Leave out the header line (csv, tsv), e.g. to join the tables of several runs");
}

}  // namespace statewise::cli
