#include "statewise/plot.h"

#include <algorithm>
#include <array>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <limits>
#include <numbers>
#include <set>
#include <string_view>

#include "statewise/error.h"
#include "statewise/statistics.h"

namespace statewise {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr std::size_t kNone = std::numeric_limits<std::size_t>::max();

// ---- Geometry of the panels (SVG user units; the SVGs scale to the page width) -----------------------
constexpr double kSeriesWidth = 960, kSeriesHeight = 300;
constexpr double kSeriesLeft = 64, kSeriesTop = 14, kSeriesBottom = 36;
constexpr double kSeriesPlotWidth = static_cast<double>(kPlotColumns);  // one column per unit
constexpr double kSmallWidth = 470, kSmallHeight = 240;
constexpr double kSmallLeft = 48, kSmallRight = 12, kSmallTop = 14, kSmallBottom = 36;
constexpr double kHistogramLimit = 5.0, kHistogramBin = 0.5;

// ---- Colours: a restrained palette that survives greyscale printing --------------------------------
constexpr const char* kStyle = R"(
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif;
       color: #1d2733; background: #ffffff; margin: 24px auto; max-width: 1000px; padding: 0 16px; line-height: 1.45; }
h1 { font-size: 1.5em; margin: 0 0 4px 0; }
h2 { font-size: 1.2em; margin: 28px 0 6px 0; border-bottom: 1px solid #d5dbe3; padding-bottom: 3px; }
p.source, p.stats, p.note { color: #4a5868; font-size: 0.9em; margin: 4px 0; }
ul.verdicts li, ul.warnings li { margin: 3px 0; }
ul.warnings li { color: #8a4b00; }
svg { width: 100%; height: auto; display: block; }
svg text { font-family: inherit; font-size: 11px; fill: #4a5868; }
svg .axis line, svg .axis path { stroke: #9aa6b2; stroke-width: 1; fill: none; }
svg .grid line { stroke: #edf0f4; stroke-width: 1; }
svg .band { fill: #5fa3dc; fill-opacity: 0.35; stroke: none; }
svg .estimate { fill: none; stroke: #12416e; stroke-width: 1.6; stroke-linejoin: round; }
svg .measured circle { fill: #3d4650; fill-opacity: 0.55; }
svg .imputed rect { fill: #f2d9a6; fill-opacity: 0.55; }
svg .rejected path { stroke: #c0392b; stroke-width: 1.8; fill: none; }
svg .bar { fill: #8fbde6; stroke: #5b8db8; stroke-width: 0.5; }
svg .bar-rejected { fill: #c0392b; fill-opacity: 0.7; }
svg .normal { fill: none; stroke: #d35400; stroke-width: 1.6; }
svg .stem { stroke: #1f4e79; stroke-width: 2.2; }
svg .bound { stroke: #7f8c99; stroke-width: 1; stroke-dasharray: 4 3; }
.legend { font-size: 0.85em; color: #4a5868; margin: 2px 0 4px 0; }
.legend span { margin-right: 16px; white-space: nowrap; }
.key { display: inline-block; width: 14px; height: 10px; vertical-align: baseline; margin-right: 4px; }
.pair { display: flex; flex-wrap: wrap; gap: 12px; }
.pair > div { flex: 1 1 460px; }
.pair h3 { font-size: 0.95em; margin: 8px 0 2px 0; font-weight: 600; }
section.channel { break-inside: avoid; page-break-inside: avoid; }
@media print { body { margin: 0; max-width: none; } h2 { break-after: avoid; } }
@page { size: A4 landscape; margin: 12mm; }
)";

std::string escape(std::string_view text) {
  std::string out;
  for (const char c : text) {
    switch (c) {
      case '&':
        out += "&amp;";
        break;
      case '<':
        out += "&lt;";
        break;
      case '>':
        out += "&gt;";
        break;
      case '"':
        out += "&quot;";
        break;
      case '\'':
        out += "&#39;";
        break;
      default:
        // Control characters other than tab and line breaks are not allowed in XML 1.0.
        if (static_cast<unsigned char>(c) < 0x20 && c != '\t' && c != '\n' && c != '\r')
          out += "\xEF\xBF\xBD";  // U+FFFD
        else
          out += c;
    }
  }
  return out;
}

// A coordinate with two decimals (a hundredth of a unit is far below what a screen or printer shows).
std::string coordinate(double value) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.2f", value);
  return buffer;
}

// A number for attributes and labels, shortest round-trip form.
std::string exact(double value) {
  if (std::isnan(value)) return "NaN";
  char buffer[64];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value);
  return std::string(buffer, result.ptr);
}

std::string short_number(double value, int digits = 3) {
  if (std::isnan(value)) return "n/a";
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.*g", digits, value);
  return buffer;
}

// Maps [domain_min, domain_max] onto [range_min, range_max] linearly.
struct Scale {
  double domain_min, domain_max, range_min, range_max;
  double operator()(double value) const {
    if (!(domain_max > domain_min)) return 0.5 * (range_min + range_max);
    return range_min + (value - domain_min) / (domain_max - domain_min) * (range_max - range_min);
  }
};

// "Nice" tick positions: steps of 1, 2 or 5 times a power of ten, about `target` of them
// (P. S. Heckbert, Nice numbers for graph labels, in Graphics Gems, 1990).
std::vector<double> nice_ticks(double low, double high, int target, double& step) {
  std::vector<double> ticks;
  step = 0.0;
  if (!(high > low) || !std::isfinite(low) || !std::isfinite(high)) return ticks;
  const double raw = (high - low) / std::max(target, 1);
  const double magnitude = std::pow(10.0, std::floor(std::log10(raw)));
  const double fraction = raw / magnitude;
  step = (fraction < 1.5 ? 1.0 : fraction < 3.0 ? 2.0 : fraction < 7.0 ? 5.0 : 10.0) * magnitude;
  for (double tick = std::ceil(low / step) * step; tick <= high + step * 1e-9; tick += step)
    ticks.push_back(std::abs(tick) < step * 1e-9 ? 0.0 : tick);
  return ticks;
}

std::string tick_label(double value, double step) {
  char buffer[32];
  const int decimals = step >= 1.0 ? 0 : static_cast<int>(std::ceil(-std::log10(step) - 1e-9));
  if (std::abs(value) >= 1e6 || (std::abs(value) > 0 && std::abs(value) < 1e-4))
    std::snprintf(buffer, sizeof buffer, "%.3g", value);
  else
    std::snprintf(buffer, sizeof buffer, "%.*f", std::min(decimals, 10), value);
  return buffer;
}

// ---- ISO 8601 date-times ------------------------------------------------------------------------------

// Days since 1970-01-01 of a proleptic Gregorian date (H. Hinnant, chrono-compatible low-level date
// algorithms, "days_from_civil").
long long days_from_civil(long long year, unsigned month, unsigned day) {
  year -= month <= 2;
  const long long era = (year >= 0 ? year : year - 399) / 400;
  const auto year_of_era = static_cast<unsigned>(year - era * 400);
  const unsigned day_of_year = (153 * (month > 2 ? month - 3 : month + 9) + 2) / 5 + day - 1;
  const unsigned day_of_era = year_of_era * 365 + year_of_era / 4 - year_of_era / 100 + day_of_year;
  return era * 146097 + static_cast<long long>(day_of_era) - 719468;
}

// The inverse (same source, "civil_from_days").
void civil_from_days(long long days, int& year, unsigned& month, unsigned& day) {
  days += 719468;
  const long long era = (days >= 0 ? days : days - 146096) / 146097;
  const auto day_of_era = static_cast<unsigned>(days - era * 146097);
  const unsigned year_of_era =
      (day_of_era - day_of_era / 1460 + day_of_era / 36524 - day_of_era / 146096) / 365;
  const unsigned day_of_year = day_of_era - (365 * year_of_era + year_of_era / 4 - year_of_era / 100);
  const unsigned mp = (5 * day_of_year + 2) / 153;
  day = day_of_year - (153 * mp + 2) / 5 + 1;
  month = mp < 10 ? mp + 3 : mp - 9;
  year = static_cast<int>(static_cast<long long>(year_of_era) + era * 400 + (month <= 2));
}

bool read_digits(std::string_view text, std::size_t& at, std::size_t count, int& value) {
  if (at + count > text.size()) return false;
  value = 0;
  for (std::size_t i = 0; i < count; ++i) {
    const char c = text[at + i];
    if (c < '0' || c > '9') return false;
    value = value * 10 + (c - '0');
  }
  at += count;
  return true;
}

// YYYY-MM-DD, optionally followed by T or a space and hh:mm[:ss[.fraction]], optionally Z or ±hh:mm.
// Seconds since 1970-01-01T00:00 (UTC when a zone is given).
bool parse_date_time(std::string_view text, double& seconds, bool& zoned) {
  std::size_t at = 0;
  int year = 0, month = 0, day = 0, hour = 0, minute = 0, second = 0;
  if (!read_digits(text, at, 4, year) || at >= text.size() || text[at++] != '-' ||
      !read_digits(text, at, 2, month) || at >= text.size() || text[at++] != '-' ||
      !read_digits(text, at, 2, day))
    return false;
  if (month < 1 || month > 12 || day < 1 || day > 31) return false;
  double fraction = 0.0;
  zoned = false;
  int offset = 0;
  if (at < text.size()) {
    if (text[at] != 'T' && text[at] != ' ') return false;
    ++at;
    if (!read_digits(text, at, 2, hour) || at >= text.size() || text[at++] != ':' ||
        !read_digits(text, at, 2, minute))
      return false;
    if (at < text.size() && text[at] == ':') {
      ++at;
      if (!read_digits(text, at, 2, second)) return false;
      if (at < text.size() && (text[at] == '.' || text[at] == ',')) {
        ++at;
        double scale = 0.1;
        const std::size_t start = at;
        while (at < text.size() && text[at] >= '0' && text[at] <= '9') {
          fraction += (text[at] - '0') * scale;
          scale /= 10.0;
          ++at;
        }
        if (at == start) return false;
      }
    }
    if (hour > 24 || minute > 59 || second > 60) return false;
    if (at < text.size()) {
      if (text[at] == 'Z') {
        zoned = true;
        ++at;
      } else if (text[at] == '+' || text[at] == '-') {
        const int sign = text[at] == '-' ? -1 : 1;
        ++at;
        int offset_hours = 0, offset_minutes = 0;
        if (!read_digits(text, at, 2, offset_hours)) return false;
        if (at < text.size() && text[at] == ':') ++at;
        if (!read_digits(text, at, 2, offset_minutes)) return false;
        offset = sign * (offset_hours * 3600 + offset_minutes * 60);
        zoned = true;
      }
    }
    if (at != text.size()) return false;
  }
  const long long days = days_from_civil(year, static_cast<unsigned>(month), static_cast<unsigned>(day));
  seconds = static_cast<double>(days) * 86400.0 + hour * 3600.0 + minute * 60.0 + second + fraction - offset;
  return true;
}

std::string format_date_time(double seconds, double step, bool with_date) {
  const double whole = std::floor(seconds);
  const auto days = static_cast<long long>(std::floor(whole / 86400.0));
  const auto in_day = static_cast<long long>(whole - static_cast<double>(days) * 86400.0);
  int year = 0;
  unsigned month = 0, day = 0;
  civil_from_days(days, year, month, day);
  char buffer[48];
  const int h = static_cast<int>(in_day / 3600), m = static_cast<int>(in_day / 60 % 60),
            s = static_cast<int>(in_day % 60);
  if (step >= 86400.0)
    std::snprintf(buffer, sizeof buffer, "%04d-%02u-%02u", year, month, day);
  else if (step < 60.0)
    std::snprintf(buffer, sizeof buffer, "%02d:%02d:%02d", h, m, s);
  else if (with_date)
    std::snprintf(buffer, sizeof buffer, "%02u-%02u %02d:%02d", month, day, h, m);
  else
    std::snprintf(buffer, sizeof buffer, "%02d:%02d", h, m);
  return buffer;
}

std::vector<double> time_ticks(double low, double high, double& step) {
  static constexpr std::array<double, 22> kSteps = {
      1,    2,    5,    10,    15,    30,    60,    120,    300,    600,     900,
      1800, 3600, 7200, 10800, 21600, 43200, 86400, 172800, 604800, 1209600, 2592000};
  std::vector<double> ticks;
  step = kSteps.back();
  for (const double candidate : kSteps)
    if ((high - low) / candidate <= 8.0) {
      step = candidate;
      break;
    }
  for (double tick = std::ceil(low / step) * step; tick <= high; tick += step) ticks.push_back(tick);
  return ticks;
}

// ---- The table ---------------------------------------------------------------------------------------

struct ChannelColumns {
  std::string name;
  std::size_t estimate = kNone, sd = kNone, filled = kNone, imputed = kNone, rejected = kNone, z = kNone;
};

struct ChannelData {
  std::vector<double> estimate, sd, filled, z;
  std::vector<unsigned char> imputed, rejected;
};

enum class TimeKind { numeric, date_time, row };

struct Table {
  std::string time_name;  // empty when there is no time column
  TimeKind time_kind = TimeKind::row;
  bool zoned = false;
  std::vector<double> x;  // the time axis value of each row
  std::vector<ChannelColumns> columns;
  std::vector<ChannelData> channels;
  std::size_t rows = 0;
};

bool ends_with(const std::string& text, std::string_view suffix) {
  return text.size() > suffix.size() && text.compare(text.size() - suffix.size(), suffix.size(), suffix) == 0;
}

Table read_table(CsvReader& reader) {
  const std::vector<std::string>& header = reader.header();
  Table table;
  std::set<std::string> taken;  // columns that belong to a channel or a state
  for (const std::string& column : header) {
    if (!ends_with(column, "_est")) continue;
    const std::string name = column.substr(0, column.size() - 4);
    ChannelColumns c;
    c.name = name;
    c.estimate = reader.find_column(name + "_est");
    c.sd = reader.find_column(name + "_sd");
    c.filled = reader.find_column(name + "_filled");
    c.imputed = reader.find_column(name + "_imputed");
    if (c.sd == kNone || c.filled == kNone || c.imputed == kNone) continue;
    c.rejected = reader.find_column(name + "_rejected");
    c.z = reader.find_column(name + "_z");
    for (const char* suffix : {"_est", "_sd", "_filled", "_imputed", "_rejected", "_innov", "_z"})
      taken.insert(name + suffix);
    table.columns.push_back(c);
  }
  if (table.columns.empty())
    raise_input_error(
        {reader.display_name(), 1, 0, ""},
        "no channel columns in the header; expected an estimates table of statewise filter or smooth "
        "with columns such as \"c_est\", \"c_sd\", \"c_filled\" and \"c_imputed\"");
  for (const std::string& column : header)
    if (reader.find_column(column + "_sd") != kNone) {
      taken.insert(column);
      taken.insert(column + "_sd");
    }
  const bool has_time = !taken.count(header[0]);
  if (has_time) table.time_name = header[0];

  table.channels.resize(table.columns.size());
  std::vector<std::string> time_texts;
  bool numeric = has_time, date_time = has_time;
  while (reader.next()) {
    ++table.rows;
    if (has_time) {
      const std::string_view text = reader.field(0);
      time_texts.emplace_back(text);
      double value = 0.0;
      const auto result = std::from_chars(text.data(), text.data() + text.size(), value);
      if (result.ec != std::errc() || result.ptr != text.data() + text.size() || !std::isfinite(value))
        numeric = false;
      bool zoned = false;
      if (date_time && !parse_date_time(text, value, zoned)) date_time = false;
    }
    for (std::size_t c = 0; c < table.columns.size(); ++c) {
      const ChannelColumns& columns = table.columns[c];
      ChannelData& data = table.channels[c];
      data.estimate.push_back(reader.number(columns.estimate));
      data.sd.push_back(reader.number(columns.sd));
      data.filled.push_back(reader.number(columns.filled));
      data.imputed.push_back(reader.number(columns.imputed) == 1.0);
      data.rejected.push_back(columns.rejected != kNone && reader.number(columns.rejected) == 1.0);
      data.z.push_back(columns.z != kNone ? reader.number(columns.z) : kNaN);
    }
  }
  table.x.resize(table.rows);
  if (numeric && table.rows > 0) {
    table.time_kind = TimeKind::numeric;
    for (std::size_t t = 0; t < table.rows; ++t)
      std::from_chars(time_texts[t].data(), time_texts[t].data() + time_texts[t].size(), table.x[t]);
  } else if (date_time && table.rows > 0) {
    table.time_kind = TimeKind::date_time;
    for (std::size_t t = 0; t < table.rows; ++t) {
      bool zoned = false;
      parse_date_time(time_texts[t], table.x[t], zoned);
      table.zoned = table.zoned || zoned;
    }
  } else {
    table.time_kind = TimeKind::row;
    for (std::size_t t = 0; t < table.rows; ++t) table.x[t] = static_cast<double>(t + 1);
  }
  return table;
}

// ---- Drawing ------------------------------------------------------------------------------------------

std::string svg_open(double width, double height, const std::string& label) {
  return "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 " + coordinate(width) + " " +
         coordinate(height) + "\" role=\"img\" aria-label=\"" + escape(label) + "\">\n";
}

std::string text_element(double x, double y, const std::string& anchor, const std::string& text,
                         const std::string& extra = "") {
  return "<text x=\"" + coordinate(x) + "\" y=\"" + coordinate(y) + "\" text-anchor=\"" + anchor + "\"" +
         extra + ">" + escape(text) + "</text>\n";
}

// Horizontal grid lines and labels of a value axis.
std::string value_axis(const Scale& y, double left, double right, int target) {
  double step = 0.0;
  const std::vector<double> ticks = nice_ticks(y.domain_min, y.domain_max, target, step);
  std::string out = "<g class=\"grid\">\n";
  for (const double tick : ticks)
    out += "<line x1=\"" + coordinate(left) + "\" x2=\"" + coordinate(right) + "\" y1=\"" +
           coordinate(y(tick)) + "\" y2=\"" + coordinate(y(tick)) + "\"/>\n";
  out += "</g>\n<g class=\"axis\">\n";
  for (const double tick : ticks) out += text_element(left - 6, y(tick) + 3.5, "end", tick_label(tick, step));
  out += "<line x1=\"" + coordinate(left) + "\" x2=\"" + coordinate(left) + "\" y1=\"" +
         coordinate(y.range_max) + "\" y2=\"" + coordinate(y.range_min) + "\"/>\n</g>\n";
  return out;
}

std::string time_axis(const Table& table, const Scale& x, double bottom) {
  std::string out = "<g class=\"axis\">\n<line x1=\"" + coordinate(x.range_min) + "\" x2=\"" +
                    coordinate(x.range_max) + "\" y1=\"" + coordinate(bottom) + "\" y2=\"" +
                    coordinate(bottom) + "\"/>\n";
  double step = 0.0;
  const bool dates = table.time_kind == TimeKind::date_time;
  const std::vector<double> ticks =
      dates ? time_ticks(x.domain_min, x.domain_max, step) : nice_ticks(x.domain_min, x.domain_max, 8, step);
  const bool several_days = dates && std::floor(x.domain_min / 86400.0) != std::floor(x.domain_max / 86400.0);
  for (const double tick : ticks) {
    out += "<line x1=\"" + coordinate(x(tick)) + "\" x2=\"" + coordinate(x(tick)) + "\" y1=\"" +
           coordinate(bottom) + "\" y2=\"" + coordinate(bottom + 4) + "\"/>\n";
    out += text_element(x(tick), bottom + 16, "middle",
                        dates ? format_date_time(tick, step, several_days) : tick_label(tick, step));
  }
  std::string name = table.time_kind == TimeKind::row ? "row" : table.time_name;
  if (dates && table.zoned) name += " (UTC)";
  out += text_element(x.range_max, bottom + 31, "end", name);
  return out + "</g>\n";
}

// The rows to draw: all of them, or per column the rows holding the extremes (thinning).
struct Bucket {
  std::size_t first, last;  // rows [first, last)
};

std::vector<Bucket> buckets(std::size_t rows, std::size_t max_rows_drawn) {
  std::vector<Bucket> result;
  if (rows <= max_rows_drawn) {
    for (std::size_t t = 0; t < rows; ++t) result.push_back({t, t + 1});
    return result;
  }
  for (std::size_t b = 0; b < kPlotColumns; ++b) {
    const std::size_t first = b * rows / kPlotColumns, last = (b + 1) * rows / kPlotColumns;
    if (last > first) result.push_back({first, last});
  }
  return result;
}

std::string series_panel(const Table& table, const ChannelData& data, const std::string& name,
                         std::size_t max_rows_drawn) {
  const std::size_t rows = table.rows;
  // Value range: measured values and the band.
  double low = std::numeric_limits<double>::infinity(), high = -low;
  for (std::size_t t = 0; t < rows; ++t) {
    if (!data.imputed[t] && std::isfinite(data.filled[t])) {
      low = std::min(low, data.filled[t]);
      high = std::max(high, data.filled[t]);
    }
    if (std::isfinite(data.estimate[t])) {
      const double half = std::isfinite(data.sd[t]) ? 1.96 * data.sd[t] : 0.0;
      low = std::min(low, data.estimate[t] - half);
      high = std::max(high, data.estimate[t] + half);
    }
  }
  if (!std::isfinite(low)) {
    low = 0.0;
    high = 1.0;
  }
  if (!(high > low)) {
    low -= 1.0;
    high += 1.0;
  }
  const double pad = 0.04 * (high - low);
  low -= pad;
  high += pad;
  double x_low = rows > 0 ? *std::min_element(table.x.begin(), table.x.end()) : 0.0;
  double x_high = rows > 0 ? *std::max_element(table.x.begin(), table.x.end()) : 1.0;
  if (!(x_high > x_low)) {
    x_low -= 0.5;
    x_high += 0.5;
  }
  const double plot_height = kSeriesHeight - kSeriesTop - kSeriesBottom;
  const Scale x{x_low, x_high, kSeriesLeft, kSeriesLeft + kSeriesPlotWidth};
  const Scale y{low, high, kSeriesTop + plot_height, kSeriesTop};
  const double bottom = kSeriesTop + plot_height;

  std::string out = svg_open(kSeriesWidth, kSeriesHeight, name + ": measured values and estimate over time");
  out += value_axis(y, kSeriesLeft, kSeriesLeft + kSeriesPlotWidth, 6);
  out += time_axis(table, x, bottom);
  out += "<g class=\"plot-area\" data-x-min=\"" + exact(x_low) + "\" data-x-max=\"" + exact(x_high) +
         "\" data-y-min=\"" + exact(low) + "\" data-y-max=\"" + exact(high) + "\" data-left=\"" +
         exact(kSeriesLeft) + "\" data-top=\"" + exact(kSeriesTop) + "\" data-width=\"" +
         exact(kSeriesPlotWidth) + "\" data-height=\"" + exact(plot_height) + "\">\n";

  // Imputed stretches: from halfway to the row before to halfway to the row after; stretches closer
  // than half a unit are merged so that long logs stay small.
  out += "<g class=\"imputed\">\n";
  double open_left = kNaN, open_right = kNaN;
  auto emit = [&]() {
    if (std::isnan(open_left)) return;
    const double width = std::max(open_right - open_left, 0.8);
    out += "<rect x=\"" + coordinate(open_left) + "\" y=\"" + coordinate(kSeriesTop) + "\" width=\"" +
           coordinate(width) + "\" height=\"" + coordinate(plot_height) + "\"/>\n";
  };
  for (std::size_t t = 0; t < rows;) {
    if (!data.imputed[t]) {
      ++t;
      continue;
    }
    std::size_t end = t;
    while (end + 1 < rows && data.imputed[end + 1]) ++end;
    const double half_before = t > 0 ? 0.5 * (table.x[t] - table.x[t - 1])
                                     : (end + 1 < rows ? 0.5 * (table.x[end + 1] - table.x[end]) : 0.5);
    const double half_after = end + 1 < rows ? 0.5 * (table.x[end + 1] - table.x[end]) : half_before;
    const double left = x(table.x[t] - half_before), right = x(table.x[end] + half_after);
    if (!std::isnan(open_left) && left - open_right < 0.5) {
      open_right = std::max(open_right, right);
    } else {
      emit();
      open_left = left;
      open_right = right;
    }
    t = end + 1;
  }
  emit();
  out += "</g>\n";

  const std::vector<Bucket> drawn = buckets(rows, max_rows_drawn);
  // Measured values (not imputed), under the band and the estimate: every one, or per column the lowest
  // and highest.
  out += "<g class=\"measured\">\n";
  for (const Bucket& b : drawn) {
    std::size_t lowest = kNone, highest = kNone;
    for (std::size_t t = b.first; t < b.last; ++t) {
      if (data.imputed[t] || !std::isfinite(data.filled[t])) continue;
      if (lowest == kNone || data.filled[t] < data.filled[lowest]) lowest = t;
      if (highest == kNone || data.filled[t] > data.filled[highest]) highest = t;
    }
    if (lowest == kNone) continue;
    const std::array<std::size_t, 2> picked = {std::min(lowest, highest),
                                               std::max(lowest, highest)};  // time order
    for (std::size_t i = 0; i < (lowest == highest ? 1u : 2u); ++i) {
      const std::size_t t = picked[i];
      out += "<circle cx=\"" + coordinate(x(table.x[t])) + "\" cy=\"" + coordinate(y(data.filled[t])) +
             "\" r=\"1.5\"/>\n";
    }
  }
  out += "</g>\n";

  // The 95% band: upper edge left to right, lower edge back.
  std::string upper, lower_reversed;
  std::vector<std::string> lower;
  for (const Bucket& b : drawn) {
    double top = -std::numeric_limits<double>::infinity(), floor = std::numeric_limits<double>::infinity(),
           at = 0.0;
    std::size_t count = 0;
    for (std::size_t t = b.first; t < b.last; ++t) {
      if (!std::isfinite(data.estimate[t]) || !std::isfinite(data.sd[t])) continue;
      top = std::max(top, data.estimate[t] + 1.96 * data.sd[t]);
      floor = std::min(floor, data.estimate[t] - 1.96 * data.sd[t]);
      at += table.x[t];
      ++count;
    }
    if (count == 0) continue;
    const double px = x(at / static_cast<double>(count));
    upper += coordinate(px) + "," + coordinate(y(top)) + " ";
    lower.push_back(coordinate(px) + "," + coordinate(y(floor)));
  }
  for (auto it = lower.rbegin(); it != lower.rend(); ++it) lower_reversed += *it + " ";
  if (!upper.empty()) out += "<polygon class=\"band\" points=\"" + upper + lower_reversed + "\"/>\n";

  // The estimate: every row, or per column the lowest and highest in time order.
  std::string line;
  for (const Bucket& b : drawn) {
    std::size_t lowest = kNone, highest = kNone;
    for (std::size_t t = b.first; t < b.last; ++t) {
      if (!std::isfinite(data.estimate[t])) continue;
      if (lowest == kNone || data.estimate[t] < data.estimate[lowest]) lowest = t;
      if (highest == kNone || data.estimate[t] > data.estimate[highest]) highest = t;
    }
    if (lowest == kNone) continue;
    const std::size_t first = std::min(lowest, highest), second = std::max(lowest, highest);
    line += coordinate(x(table.x[first])) + "," + coordinate(y(data.estimate[first])) + " ";
    if (second != first)
      line += coordinate(x(table.x[second])) + "," + coordinate(y(data.estimate[second])) + " ";
  }
  if (!line.empty()) out += "<polyline class=\"estimate\" points=\"" + line + "\"/>\n";

  // Rejected values: a cross at the top edge when the value was above the prediction (z > 0), at the
  // bottom edge when below; one per column at most.
  out += "<g class=\"rejected\">\n";
  std::set<std::pair<long, bool>> marked;
  for (std::size_t t = 0; t < rows; ++t) {
    if (!data.rejected[t]) continue;
    const bool below = data.z[t] < 0.0;
    const double px = x(table.x[t]);
    if (!marked.insert({std::lround(px), below}).second) continue;
    const double py = below ? bottom - 6.0 : kSeriesTop + 6.0;
    out += "<path d=\"M" + coordinate(px - 4) + " " + coordinate(py - 4) + "L" + coordinate(px + 4) + " " +
           coordinate(py + 4) + "M" + coordinate(px - 4) + " " + coordinate(py + 4) + "L" +
           coordinate(px + 4) + " " + coordinate(py - 4) + "\"><title>row " + std::to_string(t + 1) +
           ": value rejected" + (std::isnan(data.z[t]) ? std::string() : ", z = " + short_number(data.z[t])) +
           "</title></path>\n";
  }
  out += "</g>\n</g>\n</svg>\n";
  return out;
}

// Standard normal density.
double normal_density(double z) { return std::exp(-0.5 * z * z) / std::sqrt(2.0 * std::numbers::pi); }

std::string histogram_panel(const ChannelData& data, const std::string& name) {
  constexpr int kBins = static_cast<int>(2.0 * kHistogramLimit / kHistogramBin);
  std::array<std::size_t, kBins> accepted{}, rejected{};
  std::size_t accepted_total = 0, beyond = 0, rejected_beyond = 0;
  for (std::size_t t = 0; t < data.z.size(); ++t) {
    const double z = data.z[t];
    if (!std::isfinite(z)) continue;
    const bool is_rejected = data.rejected[t] != 0;
    if (!is_rejected) ++accepted_total;
    if (std::abs(z) >= kHistogramLimit) {
      ++(is_rejected ? rejected_beyond : beyond);
      continue;
    }
    const int bin =
        std::clamp(static_cast<int>(std::floor((z + kHistogramLimit) / kHistogramBin)), 0, kBins - 1);
    ++(is_rejected ? rejected : accepted)[static_cast<std::size_t>(bin)];
  }
  // The normal curve's peak is n * bin width * phi(0).
  double top = static_cast<double>(accepted_total) * kHistogramBin * normal_density(0.0);
  for (std::size_t b = 0; b < accepted.size(); ++b) {
    top = std::max(top, static_cast<double>(accepted[b] + rejected[b]));
  }
  if (!(top > 0.0)) top = 1.0;
  top *= 1.08;
  const double plot_width = kSmallWidth - kSmallLeft - kSmallRight;
  const double plot_height = kSmallHeight - kSmallTop - kSmallBottom;
  const double bottom = kSmallTop + plot_height;
  const Scale x{-kHistogramLimit, kHistogramLimit, kSmallLeft, kSmallLeft + plot_width};
  const Scale y{0.0, top, bottom, kSmallTop};
  std::string out = svg_open(kSmallWidth, kSmallHeight, name + ": histogram of standardized innovations");
  out += value_axis(y, kSmallLeft, kSmallLeft + plot_width, 4);
  out += "<g class=\"axis\">\n<line x1=\"" + coordinate(kSmallLeft) + "\" x2=\"" +
         coordinate(kSmallLeft + plot_width) + "\" y1=\"" + coordinate(bottom) + "\" y2=\"" +
         coordinate(bottom) + "\"/>\n";
  for (int tick = -4; tick <= 4; tick += 2)
    out += text_element(x(tick), bottom + 15, "middle", std::to_string(tick));
  out += text_element(kSmallLeft + plot_width, bottom + 30, "end", "standardized innovation z");
  out += "</g>\n<g class=\"histogram\">\n";
  for (int b = 0; b < kBins; ++b) {
    const auto i = static_cast<std::size_t>(b);
    const double left = -kHistogramLimit + b * kHistogramBin;
    if (accepted[i] > 0)
      out += "<rect class=\"bar\" data-count=\"" + std::to_string(accepted[i]) + "\" x=\"" +
             coordinate(x(left)) + "\" y=\"" + coordinate(y(static_cast<double>(accepted[i]))) +
             "\" width=\"" + coordinate(x(left + kHistogramBin) - x(left)) + "\" height=\"" +
             coordinate(bottom - y(static_cast<double>(accepted[i]))) + "\"/>\n";
    if (rejected[i] > 0)
      out += "<rect class=\"bar-rejected\" data-count=\"" + std::to_string(rejected[i]) + "\" x=\"" +
             coordinate(x(left)) + "\" y=\"" + coordinate(y(static_cast<double>(accepted[i] + rejected[i]))) +
             "\" width=\"" + coordinate(x(left + kHistogramBin) - x(left)) + "\" height=\"" +
             coordinate(y(static_cast<double>(accepted[i])) -
                        y(static_cast<double>(accepted[i] + rejected[i]))) +
             "\"/>\n";
  }
  out += "</g>\n";
  // n * width * phi(z): the expected bar heights under the model.
  std::string curve;
  for (int k = 0; k <= 100; ++k) {
    const double z = -kHistogramLimit + k * 0.1;
    curve += coordinate(x(z)) + "," +
             coordinate(y(static_cast<double>(accepted_total) * kHistogramBin * normal_density(z))) + " ";
  }
  out += "<polyline class=\"normal\" points=\"" + curve + "\"/>\n";
  for (const double edge : {-1.96, 1.96})
    out += "<line class=\"bound\" x1=\"" + coordinate(x(edge)) + "\" x2=\"" + coordinate(x(edge)) +
           "\" y1=\"" + coordinate(bottom) + "\" y2=\"" + coordinate(kSmallTop) + "\"/>\n";
  if (beyond + rejected_beyond > 0)
    out += text_element(
        kSmallLeft, bottom + 30, "start",
        std::to_string(beyond) + " accepted and " + std::to_string(rejected_beyond) + " rejected beyond ±5");
  return out + "</svg>\n";
}

std::string autocorrelation_panel(const ChannelData& data, const std::string& name, int max_lags) {
  // Accepted values only; rejected ones are missing (NaN), as for the filter.
  std::vector<double> z = data.z;
  std::size_t present = 0;
  for (std::size_t t = 0; t < z.size(); ++t) {
    if (data.rejected[t]) z[t] = kNaN;
    present += std::isfinite(z[t]);
  }
  const int lags = std::max(1, std::min(max_lags, static_cast<int>(present / 5)));
  const std::vector<double> r = autocorrelation(z, lags);
  // Under whiteness r_k is about N(0, 1/n) (Bartlett; Box and Jenkins, Time Series Analysis, 1970,
  // section 2.1.6): ±1.96/sqrt(n) holds 95% of them.
  const double bound = present > 0 ? 1.96 / std::sqrt(static_cast<double>(present)) : kNaN;
  double extent = std::isfinite(bound) ? 1.25 * bound : 0.2;
  for (int k = 1; k < static_cast<int>(r.size()); ++k)
    if (std::isfinite(r[static_cast<std::size_t>(k)]))
      extent = std::max(extent, std::abs(r[static_cast<std::size_t>(k)]));
  extent = std::min(1.0, extent * 1.1);
  const double plot_width = kSmallWidth - kSmallLeft - kSmallRight;
  const double plot_height = kSmallHeight - kSmallTop - kSmallBottom;
  const double bottom = kSmallTop + plot_height;
  const Scale x{0.5, lags + 0.5, kSmallLeft, kSmallLeft + plot_width};
  const Scale y{-extent, extent, bottom, kSmallTop};
  std::string out =
      svg_open(kSmallWidth, kSmallHeight, name + ": autocorrelation of standardized innovations");
  out += value_axis(y, kSmallLeft, kSmallLeft + plot_width, 4);
  out += "<g class=\"axis\">\n<line x1=\"" + coordinate(kSmallLeft) + "\" x2=\"" +
         coordinate(kSmallLeft + plot_width) + "\" y1=\"" + coordinate(y(0.0)) + "\" y2=\"" +
         coordinate(y(0.0)) + "\"/>\n";
  const int label_step = lags > 10 ? 5 : 1;
  for (int k = label_step; k <= lags; k += label_step)
    out += text_element(x(k), bottom + 15, "middle", std::to_string(k));
  out += text_element(kSmallLeft + plot_width, bottom + 30, "end", "lag (rows)");
  out += "</g>\n";
  if (std::isfinite(bound))
    for (const double edge : {-bound, bound})
      out += "<line class=\"bound\" x1=\"" + coordinate(kSmallLeft) + "\" x2=\"" +
             coordinate(kSmallLeft + plot_width) + "\" y1=\"" + coordinate(y(edge)) + "\" y2=\"" +
             coordinate(y(edge)) + "\"/>\n";
  out += "<g class=\"autocorrelation\" data-y-min=\"" + exact(-extent) + "\" data-y-max=\"" + exact(extent) +
         "\" data-top=\"" + exact(kSmallTop) + "\" data-height=\"" + exact(plot_height) + "\">\n";
  for (int k = 1; k < static_cast<int>(r.size()); ++k) {
    const double value = r[static_cast<std::size_t>(k)];
    if (!std::isfinite(value)) continue;
    out += "<line class=\"stem\" data-lag=\"" + std::to_string(k) + "\" x1=\"" + coordinate(x(k)) +
           "\" x2=\"" + coordinate(x(k)) + "\" y1=\"" + coordinate(y(0.0)) + "\" y2=\"" +
           coordinate(y(value)) + "\"/>\n";
  }
  return out + "</g>\n</svg>\n";
}

std::string legend() {
  return "<p class=\"legend\">"
         "<span><svg class=\"key\" xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 14 10\"><circle "
         "cx=\"7\" "
         "cy=\"5\" r=\"2.4\" fill=\"#2b2b2b\"/></svg>measured</span>"
         "<span><svg class=\"key\" xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 14 10\"><line x1=\"0\" "
         "y1=\"5\" x2=\"14\" y2=\"5\" stroke=\"#1f4e79\" stroke-width=\"2\"/></svg>estimate</span>"
         "<span><svg class=\"key\" xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 14 10\"><rect "
         "width=\"14\" "
         "height=\"10\" fill=\"#8fbde6\" fill-opacity=\"0.6\"/></svg>95% band (estimate ± 1.96 sd)</span>"
         "<span><svg class=\"key\" xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 14 10\"><rect "
         "width=\"14\" "
         "height=\"10\" fill=\"#f2d9a6\"/></svg>imputed (missing or rejected)</span>"
         "<span><svg class=\"key\" xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 14 10\"><path d=\"M3 "
         "1L11 "
         "9M3 9L11 1\" stroke=\"#c0392b\" stroke-width=\"1.8\"/></svg>rejected value (top: above the "
         "prediction, "
         "bottom: below)</span></p>\n";
}

std::string channel_statistics(const ChannelData& data, std::size_t rows) {
  std::size_t measured = 0, imputed = 0, rejected = 0;
  for (std::size_t t = 0; t < rows; ++t) {
    measured += !data.imputed[t];
    imputed += data.imputed[t] && !data.rejected[t];
    rejected += data.rejected[t];
  }
  std::string text = std::to_string(rows) + " rows: " + std::to_string(measured) + " measured, " +
                     std::to_string(imputed) + " missing and filled in, " + std::to_string(rejected) +
                     " rejected.";
  std::vector<double> z = data.z;
  std::size_t present = 0, outside = 0;
  for (std::size_t t = 0; t < z.size(); ++t) {
    if (data.rejected[t]) z[t] = kNaN;
    if (!std::isfinite(z[t])) continue;
    ++present;
    outside += std::abs(z[t]) > 1.96;
  }
  if (present >= 2) {
    const LjungBoxResult lb = ljung_box(z, default_ljung_box_lags(present));
    const JarqueBeraResult jb = jarque_bera(z);
    text += " Standardized innovations of the values used: |z| > 1.96 for " +
            short_number(100.0 * static_cast<double>(outside) / static_cast<double>(present), 2) +
            "% (5% expected), Ljung–Box p = " + short_number(lb.p_value, 2) + " on " +
            std::to_string(lb.lags) + " lags, Jarque–Bera p = " + short_number(jb.p_value, 2) + ".";
  }
  return "<p class=\"stats\">" + escape(text) + "</p>\n";
}

}  // namespace

std::string write_plot_html(CsvReader& reader, const PlotOptions& options) {
  const Table table = read_table(reader);
  const std::string title = options.title.empty() ? "statewise estimates" : options.title;
  std::string out =
      "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n<meta "
      "charset=\"utf-8\"/>\n"
      "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n<meta name=\"generator\" "
      "content=\"statewise\"/>\n<title>" +
      escape(title) + "</title>\n<style>" + kStyle + "</style>\n</head>\n<body>\n<h1>" + escape(title) +
      "</h1>\n";
  if (!options.source.empty()) out += "<p class=\"source\">" + escape(options.source) + "</p>\n";
  if (!options.verdicts.empty()) {
    out += "<h2>Verdicts</h2>\n<ul class=\"verdicts\">\n";
    for (const std::string& v : options.verdicts) out += "<li>" + escape(v) + "</li>\n";
    out += "</ul>\n";
  }
  if (!options.warnings.empty()) {
    out += "<h2>Warnings</h2>\n<ul class=\"warnings\">\n";
    for (const std::string& w : options.warnings) out += "<li>" + escape(w) + "</li>\n";
    out += "</ul>\n";
  }
  if (table.rows > options.max_rows_drawn)
    out += "<p class=\"note\">" +
           escape("The log has " + std::to_string(table.rows) + " rows; each of the " +
                  std::to_string(kPlotColumns) +
                  " columns of the time charts shows the lowest and highest values of its rows.") +
           "</p>\n";
  for (std::size_t c = 0; c < table.columns.size(); ++c) {
    const std::string& name = table.columns[c].name;
    const ChannelData& data = table.channels[c];
    out += "<section class=\"channel\">\n<h2>" + escape(name) + "</h2>\n" + legend();
    out += series_panel(table, data, name, options.max_rows_drawn);
    out += channel_statistics(data, table.rows);
    if (table.columns[c].z != kNone) {
      out += "<div class=\"pair\">\n<div>\n<h3>Standardized innovations against the standard normal</h3>\n";
      out += histogram_panel(data, name);
      out += "</div>\n<div>\n<h3>Their autocorrelation, with 95% white-noise bounds</h3>\n";
      out += autocorrelation_panel(data, name, options.autocorrelation_lags);
      out += "</div>\n</div>\n";
    } else {
      out += "<p class=\"note\">This table has no standardized innovations (" + escape(name + "_z") +
             "); write them with statewise filter, or smooth --innovations, to see their histogram and "
             "autocorrelation here.</p>\n";
    }
    out += "</section>\n";
  }
  out += "</body>\n</html>\n";
  return out;
}

}  // namespace statewise
