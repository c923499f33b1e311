#include "statewise/series.h"

#include <cmath>
#include <limits>

#include "statewise/error.h"

namespace statewise {

namespace {
constexpr std::size_t kNoColumn = std::numeric_limits<std::size_t>::max();
}

ObservationStream::ObservationStream(CsvReader& reader, const StateSpaceModel& model)
    : reader_(reader), time_column_(kNoColumn), input_names_(model.input_names) {
  for (const auto& name : model.observation_names) value_columns_.push_back(reader.column_index(name));
  for (const auto& name : model.input_names) input_columns_.push_back(reader.column_index(name));
  if (!model.time_column.empty()) time_column_ = reader.column_index(model.time_column);
}

bool ObservationStream::next(ObservationRow& row) {
  if (!reader_.next()) return false;
  row.values.resize(value_columns_.size());
  row.inputs.resize(input_columns_.size());
  for (std::size_t c = 0; c < value_columns_.size(); ++c) row.values[c] = reader_.number(value_columns_[c]);
  for (std::size_t i = 0; i < input_columns_.size(); ++i) {
    const double value = reader_.number(input_columns_[i]);
    if (std::isnan(value))
      raise_input_error(reader_.location(input_columns_[i]),
                        "the input \"" + input_names_[i] +
                            "\" is missing; inputs are known quantities and must be given on every row");
    row.inputs[i] = value;
  }
  if (time_column_ != kNoColumn) {
    const std::string_view text = reader_.field(time_column_);
    row.time_text.assign(text.begin(), text.end());
    row.time_column = reader_.column(time_column_);
  } else {
    row.time_text.clear();
    row.time_column = 0;
  }
  row.line = reader_.line();
  return true;
}

std::string_view ObservationSeries::time_text(std::size_t t) const {
  if (time_ends.empty()) return {};
  const std::size_t begin = t == 0 ? 0 : time_ends[t - 1];
  return std::string_view(time_texts).substr(begin, time_ends[t] - begin);
}

void ObservationSeries::push_back(const ObservationRow& row) {
  values.insert(values.end(), row.values.begin(), row.values.end());
  inputs.insert(inputs.end(), row.inputs.begin(), row.inputs.end());
  if (has_time) {
    time_texts += row.time_text;
    time_ends.push_back(time_texts.size());
  }
  lines.push_back(row.line);
}

ObservationSeries read_series(ObservationStream& stream, const StateSpaceModel& model) {
  ObservationSeries series;
  series.channels = model.channel_count();
  series.input_count = model.input_count();
  series.has_time = !model.time_column.empty();
  ObservationRow row;
  while (stream.next(row)) series.push_back(row);
  return series;
}

}  // namespace statewise
