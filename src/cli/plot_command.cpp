// `statewise plot`: draws an estimates table (the CSV of filter or smooth) as a self-contained HTML page.

#include "cli/commands.h"
#include "cli/exit_codes.h"
#include "cli/output_file.h"
#include "statewise/csv.h"
#include "statewise/plot.h"

namespace statewise::cli {

int run_plot(const PlotCommandOptions& options) {
  CsvReader table = CsvReader::open(options.input_path, CsvOptions{});
  PlotOptions plot;
  plot.title = options.title.empty() ? "statewise estimates: " + table.display_name() : options.title;
  plot.source = "from " + table.display_name();
  const std::string page = write_plot_html(table, plot);
  write_whole_file(options.output_path, page, options.input_path);
  return kExitSuccess;
}

}  // namespace statewise::cli
