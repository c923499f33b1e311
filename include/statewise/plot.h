#pragma once
/// \file plot.h
/// A plot report of an estimates table (the CSV of `filter` or `smooth`, columns in docs/outputs.md):
/// one self-contained HTML page with inline SVG — no scripts, no external files, fonts or styles —
/// readable in any browser and in print. Per channel it draws the measured points, the estimate with
/// its 95% band (estimate ± 1.96 sd), imputed stretches shaded and rejected values marked; and, when
/// the table has standardized innovations (`c_z`), their histogram against the standard normal
/// density and their autocorrelation with white-noise bounds.
///
/// The page is also well-formed XML (XHTML), so it can be checked with any XML parser.

#include <cstddef>
#include <string>
#include <vector>

#include "statewise/csv.h"

namespace statewise {

/// What to put on the page besides the table's data.
struct PlotOptions {
  std::string title;                  ///< heading and page title (plain text; escaped)
  std::string source;                 ///< a line under the title saying where the data came from
  std::vector<std::string> verdicts;  ///< sentences listed under "Verdicts" (e.g. verdict.h); none = no list
  std::vector<std::string> warnings;  ///< sentences listed under "Warnings"; none = no list
  /// Rows drawn one by one at most; longer tables are drawn per pixel column (the extremes of the
  /// measured values, the estimate and the band in each of kPlotColumns columns), which keeps the
  /// page small and every spike visible.
  std::size_t max_rows_drawn = 4000;
  int autocorrelation_lags = 20;  ///< lags in the autocorrelation panel (fewer when the series is short)
};

/// Number of columns a long table is thinned to (one per pixel of the time axis).
inline constexpr std::size_t kPlotColumns = 880;

/// Reads an estimates table from `table` (all remaining rows) and returns the HTML page. The time
/// axis is the table's first column when it is neither a state nor a channel column and holds numbers
/// or ISO 8601 date-times (e.g. 2026-11-02T14:05:00Z); otherwise the row number. Raises InputError
/// naming the table when it has no channel (no `c_est` with `c_sd`, `c_filled` and `c_imputed`
/// beside it) or when a cell of those columns is not a number.
std::string write_plot_html(CsvReader& table, const PlotOptions& options);

}  // namespace statewise
