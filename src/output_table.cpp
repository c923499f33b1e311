#include "statewise/output_table.h"

#include <cassert>
#include <charconv>
#include <cmath>
#include <limits>

#include "statewise/diffuse.h"

#include "statewise/statistics.h"

namespace statewise {

namespace {

constexpr char kHexDigits[] = "0123456789abcdef";

// Length of the valid UTF-8 sequence starting at text[i], or 0 when the bytes there are not one
// (RFC 3629, section 4: no overlong forms, no surrogates, nothing above U+10FFFF).
std::size_t utf8_sequence_length(std::string_view text, std::size_t i) {
  const auto byte = [&](std::size_t k) { return static_cast<unsigned char>(text[k]); };
  const unsigned char lead = byte(i);
  std::size_t length = 0;
  unsigned char low = 0x80, high = 0xBF;  // allowed range of the second byte
  if (lead >= 0xC2 && lead <= 0xDF) {
    length = 2;
  } else if (lead >= 0xE0 && lead <= 0xEF) {
    length = 3;
    if (lead == 0xE0) low = 0xA0;
    if (lead == 0xED) high = 0x9F;
  } else if (lead >= 0xF0 && lead <= 0xF4) {
    length = 4;
    if (lead == 0xF0) low = 0x90;
    if (lead == 0xF4) high = 0x8F;
  } else {
    return 0;
  }
  if (i + length > text.size()) return 0;
  if (byte(i + 1) < low || byte(i + 1) > high) return 0;
  for (std::size_t k = 2; k < length; ++k)
    if (byte(i + k) < 0x80 || byte(i + k) > 0xBF) return 0;
  return length;
}

// Text in a TSV cell: the characters TSV cannot hold written as backslash escapes (the convention
// of PostgreSQL's COPY text format and of most TSV readers).
void append_tsv_field(std::string& out, std::string_view text) {
  for (const char c : text) {
    switch (c) {
      case '\t':
        out += "\\t";
        break;
      case '\n':
        out += "\\n";
        break;
      case '\r':
        out += "\\r";
        break;
      case '\\':
        out += "\\\\";
        break;
      default:
        out += c;
    }
  }
}

}  // namespace

const std::vector<std::string>& table_syntax_names() {
  static const std::vector<std::string> names = {"csv", "tsv", "jsonl"};
  return names;
}

std::optional<TableSyntax> find_table_syntax(std::string_view name) {
  if (name == "csv") return TableSyntax::csv;
  if (name == "tsv") return TableSyntax::tsv;
  if (name == "jsonl") return TableSyntax::jsonl;
  return std::nullopt;
}

TableSyntax parse_table_syntax(std::string_view name, const SourceLocation& where) {
  const std::optional<TableSyntax> syntax = find_table_syntax(name);
  if (!syntax)
    raise_input_error(where, "expected csv, tsv or jsonl, got \"" + std::string(name) + "\"" +
                                 did_you_mean(name, table_syntax_names()));
  return *syntax;
}

void append_number(std::string& out, double value, int digits) {
  if (std::isnan(value)) return;
  char buffer[64];
  const auto result = digits > 0 ? std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::general, digits)
                                 : std::to_chars(buffer, buffer + sizeof buffer, value);
  out.append(buffer, result.ptr);
}

void append_text_field(std::string& out, std::string_view text, char delimiter) {
  bool needs_quotes = false;
  for (const char c : text) needs_quotes = needs_quotes || c == delimiter || c == '"' || c == '\n' || c == '\r';
  if (!needs_quotes) {
    out.append(text);
    return;
  }
  out += '"';
  for (const char c : text) {
    if (c == '"') out += '"';
    out += c;
  }
  out += '"';
}

void append_json_string(std::string& out, std::string_view text) {
  // RFC 8259, section 7: '"', '\' and the control characters U+0000..U+001F must be escaped.
  out += '"';
  std::size_t i = 0;
  while (i < text.size()) {
    const auto c = static_cast<unsigned char>(text[i]);
    if (c >= 0x80) {
      const std::size_t length = utf8_sequence_length(text, i);
      if (length == 0) {
        out += "\\ufffd";
        ++i;
      } else {
        out.append(text.substr(i, length));
        i += length;
      }
      continue;
    }
    switch (c) {
      case '"':
        out += "\\\"";
        break;
      case '\\':
        out += "\\\\";
        break;
      case '\n':
        out += "\\n";
        break;
      case '\r':
        out += "\\r";
        break;
      case '\t':
        out += "\\t";
        break;
      default:
        if (c < 0x20) {
          out += "\\u00";
          out += kHexDigits[c >> 4];
          out += kHexDigits[c & 0xF];
        } else {
          out += static_cast<char>(c);
        }
    }
    ++i;
  }
  out += '"';
}

TableLayout::TableLayout(std::vector<std::string> columns, TableFormat format)
    : columns_(std::move(columns)),
      format_(format),
      separator_(format.syntax == TableSyntax::tsv ? '\t' : format.delimiter) {
  if (format_.syntax == TableSyntax::jsonl) {
    json_keys_.reserve(columns_.size());
    for (const auto& name : columns_) {
      std::string key;
      append_json_string(key, name);
      key += ':';
      json_keys_.push_back(std::move(key));
    }
  }
}

void TableLayout::append_header(std::string& out) const {
  if (format_.syntax == TableSyntax::jsonl) return;
  for (std::size_t i = 0; i < columns_.size(); ++i) {
    if (i > 0) out += separator_;
    if (format_.syntax == TableSyntax::tsv)
      append_tsv_field(out, columns_[i]);
    else
      append_text_field(out, columns_[i], separator_);
  }
  out += '\n';
}

void TableLayout::Row::separate() {
  assert(next_ < layout_.columns_.size() && "more cells than columns");
  if (layout_.format_.syntax == TableSyntax::jsonl) {
    out_ += next_ == 0 ? '{' : ',';
    out_ += layout_.json_keys_[next_];
  } else if (next_ > 0) {
    out_ += layout_.separator_;
  }
  ++next_;
}

void TableLayout::Row::text(std::string_view text) {
  separate();
  switch (layout_.format_.syntax) {
    case TableSyntax::csv:
      append_text_field(out_, text, layout_.separator_);
      break;
    case TableSyntax::tsv:
      append_tsv_field(out_, text);
      break;
    case TableSyntax::jsonl:
      if (text.empty())
        out_ += "null";
      else
        append_json_string(out_, text);
      break;
  }
}

void TableLayout::Row::number(double value) {
  separate();
  if (layout_.format_.syntax == TableSyntax::jsonl && !std::isfinite(value))
    out_ += "null";  // JSON has no NaN or infinity
  else
    append_number(out_, value, layout_.format_.digits);
}

void TableLayout::Row::flag(bool value) {
  separate();
  out_ += value ? '1' : '0';
}

void TableLayout::Row::finish() {
  assert(next_ == layout_.columns_.size() && "fewer cells than columns");
  if (layout_.format_.syntax == TableSyntax::jsonl) out_ += next_ == 0 ? "{}" : "}";
  out_ += '\n';
}

std::vector<std::string> estimate_columns(const StateSpaceModel& model, EstimateKind kind, const TableFormat& format) {
  std::vector<std::string> columns;
  if (!model.time_column.empty()) columns.push_back(model.time_column);
  for (const auto& s : model.state_names) {
    columns.push_back(s);
    columns.push_back(s + "_sd");
  }
  for (const auto& c : model.observation_names) {
    columns.push_back(c + "_est");
    columns.push_back(c + "_sd");
    columns.push_back(c + "_filled");
    columns.push_back(c + "_imputed");
    if (format.rejected_column) columns.push_back(c + "_rejected");
    if (kind == EstimateKind::filtered || format.innovations) {
      columns.push_back(c + "_innov");
      columns.push_back(c + "_z");
    }
    if (kind == EstimateKind::forecast) {
      columns.push_back(c + "_lo");
      columns.push_back(c + "_hi");
    }
  }
  return columns;
}

EstimateTableWriter::EstimateTableWriter(const StateSpaceModel& model, EstimateKind kind, TableFormat format,
                                         double interval_level)
    : model_(model),
      kind_(kind),
      format_(format),
      interval_z_(kind == EstimateKind::forecast && interval_level > 0.0 && interval_level < 1.0
                      ? -normal_quantile(0.5 * (1.0 - interval_level))
                      : std::nan("")),
      layout_(estimate_columns(model, kind, format), format),
      channel_mean_(model.C.rows()),
      covariance_times_ct_(model.A.rows(), model.C.rows()) {}

void EstimateTableWriter::append_header(std::string& out) const { layout_.append_header(out); }

void EstimateTableWriter::append_row(std::string& out, std::string_view time_text, const double* values,
                                     const Eigen::Ref<const Eigen::VectorXd>& mean,
                                     const Eigen::Ref<const Eigen::MatrixXd>& covariance,
                                     const InnovationRecord* innovations, const unsigned char* rejected,
                                     const Eigen::MatrixXd* diffuse_covariance) const {
  constexpr double kInfinity = std::numeric_limits<double>::infinity();
  TableLayout::Row row = layout_.start_row(out);
  if (!model_.time_column.empty()) row.text(time_text);
  for (Eigen::Index i = 0; i < mean.size(); ++i) {
    row.number(mean(i));
    const bool unbounded = diffuse_covariance != nullptr && (*diffuse_covariance)(i, i) > kDiffuseTolerance;
    row.number(unbounded ? kInfinity : std::sqrt(std::max(covariance(i, i), 0.0)));
  }
  // Channel estimate C x and its standard deviation sqrt(diag(C P C')).
  channel_mean_.noalias() = model_.C.lazyProduct(mean);
  covariance_times_ct_.noalias() = covariance.lazyProduct(model_.C.transpose());
  for (Eigen::Index c = 0; c < channel_mean_.size(); ++c) {
    const double estimate = channel_mean_(c);
    double variance = model_.C.row(c).dot(covariance_times_ct_.col(c));
    if (diffuse_covariance != nullptr &&
        model_.C.row(c) * (*diffuse_covariance) * model_.C.row(c).transpose() >
            kDiffuseTolerance * model_.C.row(c).squaredNorm())
      variance = kInfinity;
    const bool missing = std::isnan(values[c]);
    row.number(estimate);
    row.number(std::sqrt(std::max(variance, 0.0)));
    row.number(missing ? estimate : values[c]);
    row.flag(missing);
    if (format_.rejected_column) row.flag(rejected != nullptr && rejected[c] != 0);
    if (kind_ == EstimateKind::filtered || format_.innovations) {
      const double innovation = innovations != nullptr ? innovations->innovation(c) : std::nan("");
      const double sd = innovations != nullptr ? innovations->innovation_sd(c) : std::nan("");
      row.number(innovation);
      row.number(innovation / sd);
    }
    if (kind_ == EstimateKind::forecast) {
      // A new measurement y = C x + v has variance c P c' + R_cc.
      const double half_width = interval_z_ * std::sqrt(std::max(variance + model_.R(c, c), 0.0));
      row.number(estimate - half_width);
      row.number(estimate + half_width);
    }
  }
  row.finish();
}

}  // namespace statewise
