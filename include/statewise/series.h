#pragma once
/// \file series.h
/// A model's view of a CSV log: the time column's text, the measured channels (NaN where missing)
/// and the known inputs of each row, read one row at a time (ObservationStream, for streaming) or
/// all at once (ObservationSeries, for smoothing).

#include <cstddef>
#include <string>
#include <string_view>
#include <vector>

#include "statewise/csv.h"
#include "statewise/model.h"

namespace statewise {

/// One row of a log as the model sees it.
struct ObservationRow {
  std::vector<double> values;  ///< m channel values, NaN where missing
  std::vector<double> inputs;  ///< p input values (never missing)
  std::string time_text;       ///< the time column's text, empty when the model declares none
  std::size_t line = 0;        ///< 1-based line of the row in the input
  std::size_t time_column = 0;  ///< 1-based column where the time field starts; 0 without a time column
};

/// Binds a model's columns to a CSV header and reads rows. Raises InputError for a column the model
/// names that the header lacks (with a did-you-mean hint), an unparsable cell, or a missing input.
class ObservationStream {
 public:
  /// Binds to `reader`, which must outlive the stream.
  ObservationStream(CsvReader& reader, const StateSpaceModel& model);
  /// Reads the next row into `row` (sized on first use); false at the end of input.
  bool next(ObservationRow& row);
  /// The reader, for positions and names.
  const CsvReader& reader() const { return reader_; }

 private:
  CsvReader& reader_;
  std::vector<std::size_t> value_columns_;
  std::vector<std::size_t> input_columns_;
  std::size_t time_column_;
  std::vector<std::string> input_names_;
};

/// A whole log in memory, row-major: row t's values are values[t*m .. t*m+m).
struct ObservationSeries {
  int channels = 0;                  ///< m
  int input_count = 0;               ///< p
  bool has_time = false;             ///< true when the model declares a time column
  std::vector<double> values;        ///< rows × m, NaN where missing
  std::vector<double> inputs;        ///< rows × p
  std::string time_texts;            ///< all time texts, concatenated
  std::vector<std::size_t> time_ends;  ///< end offset of row t's time text in time_texts (empty when no time column)
  std::vector<std::size_t> lines;    ///< 1-based input line of each row

  /// Number of rows.
  std::size_t rows() const { return lines.size(); }
  /// Row t's m values.
  const double* row_values(std::size_t t) const { return values.data() + t * static_cast<std::size_t>(channels); }
  /// Row t's p inputs (null when p = 0).
  const double* row_inputs(std::size_t t) const {
    return input_count > 0 ? inputs.data() + t * static_cast<std::size_t>(input_count) : nullptr;
  }
  /// Row t's time text (empty when no time column).
  std::string_view time_text(std::size_t t) const;
  /// Appends a row.
  void push_back(const ObservationRow& row);
};

/// Reads every remaining row of `stream`.
ObservationSeries read_series(ObservationStream& stream, const StateSpaceModel& model);

}  // namespace statewise
