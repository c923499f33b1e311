#pragma once
/// \file output_table.h
/// Formats estimates as rows of delimited text, the columns documented in docs/outputs.md:
/// the time column if declared; per state s: `s`, `s_sd`; per channel c: `c_est`, `c_sd`,
/// `c_filled`, `c_imputed`, with an outlier gate `c_rejected`; for the filter (or on request) also
/// `c_innov` and `c_z`; for a forecast also `c_lo` and `c_hi`, a prediction interval for a new
/// measurement. Missing numbers are empty cells;
/// numbers are written in shortest round-trip form (std::to_chars) or with a chosen number of
/// significant digits.

#include <string>
#include <string_view>

#include <Eigen/Core>

#include "statewise/filter.h"
#include "statewise/model.h"

namespace statewise {

/// Which command's columns to write.
enum class EstimateKind {
  filtered,  ///< filter: adds c_innov and c_z
  smoothed,  ///< smooth
  forecast,  ///< forecast: adds c_lo and c_hi, the interval C x ∓ z sqrt(C P C' + R)_cc for a new measurement
};

/// How numbers and fields are written, and which optional columns there are.
struct TableFormat {
  char delimiter = ',';  ///< field separator
  int digits = 0;        ///< significant digits; 0 = shortest text that reads back to the same double
  bool rejected_column = false;  ///< write `c_rejected` (1 where the gate rejected the value, else 0)
  bool innovations = false;      ///< write `c_innov` and `c_z` for EstimateKind::smoothed too
};

/// Appends `value` to `out`: empty for NaN, otherwise shortest round-trip or `digits` significant digits.
void append_number(std::string& out, double value, int digits);

/// Appends a text field, quoted by RFC 4180 rules when it holds the delimiter, a quote or a line break.
void append_text_field(std::string& out, std::string_view text, char delimiter);

/// Writes the header and rows of an estimates table into a caller-owned string buffer.
class EstimateTableWriter {
 public:
  /// Prepares columns for `model`. `interval_level` in (0, 1) is the coverage of the forecast
  /// interval (EstimateKind::forecast only).
  EstimateTableWriter(const StateSpaceModel& model, EstimateKind kind, TableFormat format,
                      double interval_level = 0.95);
  /// Appends the header line.
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
  mutable Eigen::VectorXd channel_mean_;
  mutable Eigen::MatrixXd covariance_times_ct_;
};

}  // namespace statewise
