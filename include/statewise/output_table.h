#pragma once
/// \file output_table.h
/// Writes rows of named columns as CSV, TSV or JSON Lines (TableLayout), and the estimates table of
/// `filter`, `smooth` and `forecast` on top of it (EstimateTableWriter), with the columns documented in
/// docs/outputs.md: the time column if declared; per state s: `s`, `s_sd`; per channel c: `c_est`,
/// `c_sd`, `c_filled`, `c_imputed`, with an outlier gate `c_rejected`; for the filter (or on request)
/// also `c_innov` and `c_z`; for a forecast also `c_lo` and `c_hi`, a prediction interval for a new
/// measurement. A missing number is an empty cell (null in JSON Lines); numbers are written in shortest
/// round-trip form (std::to_chars) or with a chosen number of significant digits.

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <Eigen/Core>

#include "statewise/error.h"
#include "statewise/filter.h"
#include "statewise/model.h"

namespace statewise {

/// Which command's columns to write.
enum class EstimateKind {
  filtered,  ///< filter: adds c_innov and c_z
  smoothed,  ///< smooth
  forecast,  ///< forecast: adds c_lo and c_hi, the interval C x ∓ z sqrt(C P C' + R)_cc for a new measurement
};

/// The text syntax of a table (docs/outputs.md).
enum class TableSyntax {
  csv,    ///< delimited text with a header row; fields quoted by RFC 4180 rules when needed
  tsv,    ///< tab-separated with a header row; tab, CR, LF and backslash in text written as \t \r \n \\ .
  jsonl,  ///< JSON Lines: no header, one JSON object per row keyed by column name; empty cells are null
};

/// The names of the syntaxes, as the `--format` option spells them: "csv", "tsv", "jsonl".
const std::vector<std::string>& table_syntax_names();

/// The syntax called `name`, or std::nullopt for an unknown name.
std::optional<TableSyntax> find_table_syntax(std::string_view name);

/// The syntax called `name`; raises InputError at `where` for an unknown name:
/// `expected csv, tsv or jsonl, got "x"; did you mean "tsv"?`.
TableSyntax parse_table_syntax(std::string_view name, const SourceLocation& where);

/// How rows and numbers are written.
struct TableFormat {
  char delimiter = ',';                   ///< field separator of csv (tsv always uses a tab, jsonl none)
  int digits = 0;                         ///< significant digits (1-17); 0 = shortest text that reads back exactly
  TableSyntax syntax = TableSyntax::csv;  ///< csv, tsv or jsonl
  bool rejected_column = false;           ///< write `c_rejected` (1 where the gate rejected the value, else 0)
  bool innovations = false;               ///< write `c_innov` and `c_z` for EstimateKind::smoothed too
};

/// Appends `value` to `out`: empty for NaN, otherwise shortest round-trip or `digits` significant digits.
void append_number(std::string& out, double value, int digits);

/// Appends a text field, quoted by RFC 4180 rules when it holds the delimiter, a quote or a line break.
void append_text_field(std::string& out, std::string_view text, char delimiter);

/// Appends `text` as a JSON string with its quotes. Control characters are escaped; bytes that are
/// not valid UTF-8 become U+FFFD, so that the output is always valid JSON.
void append_json_string(std::string& out, std::string_view text);

/// Lays out rows of named columns in one TableSyntax. Any command that writes rows can use it, so
/// that `--format` means the same everywhere.
class TableLayout {
 public:
  /// Prepares the columns (names as they appear in the header or as JSON keys).
  TableLayout(std::vector<std::string> columns, TableFormat format);

  /// Appends the header line (csv, tsv); nothing for jsonl, whose rows name their columns.
  void append_header(std::string& out) const;

  /// The cells of one row, given in column order: exactly one text() or number() per column, then
  /// finish(). Appends to the string passed to start_row(), which must outlive the Row.
  class Row {
   public:
    /// A text cell; an empty text is an empty cell (null in jsonl). Always a string in jsonl.
    void text(std::string_view text);
    /// A number cell; NaN is an empty cell (null in jsonl), and so is an infinity in jsonl.
    void number(double value);
    /// A 0/1 cell (a number in jsonl).
    void flag(bool value);
    /// Ends the row with a line break.
    void finish();

   private:
    friend class TableLayout;
    Row(const TableLayout& layout, std::string& out) : layout_(layout), out_(out) {}
    void separate();
    const TableLayout& layout_;
    std::string& out_;
    std::size_t next_ = 0;
  };

  /// Starts a row appended to `out`.
  Row start_row(std::string& out) const { return Row(*this, out); }

  /// The column names.
  const std::vector<std::string>& columns() const { return columns_; }
  /// The format.
  const TableFormat& format() const { return format_; }

 private:
  std::vector<std::string> columns_;
  std::vector<std::string> json_keys_;  // `"name":` per column, escaped once, for jsonl
  TableFormat format_;
  char separator_;
};

/// The estimates table's column names for `model` and `kind`, in order (docs/outputs.md).
std::vector<std::string> estimate_columns(const StateSpaceModel& model, EstimateKind kind, const TableFormat& format);

/// Writes the header and rows of an estimates table into a caller-owned string buffer.
class EstimateTableWriter {
 public:
  /// Prepares columns for `model`, which must outlive the writer. `interval_level` in (0, 1) is the
  /// coverage of the forecast interval (EstimateKind::forecast only).
  EstimateTableWriter(const StateSpaceModel& model, EstimateKind kind, TableFormat format,
                      double interval_level = 0.95);
  /// Appends the header line (nothing for jsonl).
  void append_header(std::string& out) const;
  /// Appends one row. `values` are the row's m values as the filter used them (NaN = missing or
  /// rejected); `innovations` is required when the table has innovation columns and ignored
  /// otherwise; `rejected` (m flags, 1 = rejected; null = none) fills `c_rejected`.
  /// `diffuse_covariance` (may be null) is the diffuse part P_inf of the covariance during the exact
  /// diffuse phase: the standard deviation of a state or channel it reaches is unbounded, written `inf`.
  void append_row(std::string& out, std::string_view time_text, const double* values,
                  const Eigen::Ref<const Eigen::VectorXd>& mean, const Eigen::Ref<const Eigen::MatrixXd>& covariance,
                  const InnovationRecord* innovations, const unsigned char* rejected = nullptr,
                  const Eigen::MatrixXd* diffuse_covariance = nullptr) const;

 private:
  const StateSpaceModel& model_;
  EstimateKind kind_;
  TableFormat format_;
  double interval_z_;  // standard normal quantile at (1 + level) / 2
  TableLayout layout_;
  mutable Eigen::VectorXd channel_mean_;
  mutable Eigen::MatrixXd covariance_times_ct_;
};

}  // namespace statewise
