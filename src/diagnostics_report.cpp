#include "statewise/diagnostics_report.h"

#include <charconv>
#include <cmath>

#include "detail/diagnostics_json.h"
#include "statewise/report.h"

namespace statewise {

namespace {

constexpr std::size_t kTextWidth = 100;
constexpr std::size_t kLabelWidth = 34;

// Shortest text that reads back as the same double (as the estimates table writes numbers).
std::string exact_number(double value) {
  char buffer[64];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value);
  return std::string(buffer, result.ptr);
}

std::string signed_significant(double value, int digits = 3) {
  return (value > 0.0 ? "+" : "") + format_significant(value, digits);
}

std::string percent(double share) {
  if (std::isnan(share)) return "n/a";
  return format_significant(100.0 * share, 2) + "%";
}

// Number of characters of UTF-8 text (bytes that do not continue a character).
std::size_t display_width(const std::string& text) {
  std::size_t width = 0;
  for (const char c : text) width += (static_cast<unsigned char>(c) & 0xC0) != 0x80;
  return width;
}

// "  label ......... value" with the value starting at a fixed column.
std::string field(const std::string& label, const std::string& value) {
  std::string line = "  " + label;
  const std::size_t width = display_width(line);
  line.append(width < kLabelWidth ? kLabelWidth - width : 1, ' ');
  return line + value + "\n";
}

// Word-wraps `text` to kTextWidth, the first line after `first`, the others after `next`.
std::string wrap(const std::string& text, const std::string& first, const std::string& next) {
  std::string out = first, word;
  std::size_t column = display_width(first);
  const std::size_t indent = display_width(next);
  bool line_empty = true;
  auto flush_word = [&]() {
    if (word.empty()) return;
    const std::size_t width = display_width(word);
    if (!line_empty && column + 1 + width > kTextWidth) {
      out += "\n" + next;
      column = indent;
      line_empty = true;
    }
    if (!line_empty) {
      out += ' ';
      ++column;
    }
    out += word;
    column += width;
    line_empty = false;
    word.clear();
  };
  for (const char c : text) {
    if (c == ' ')
      flush_word();
    else
      word += c;
  }
  flush_word();
  return out + "\n";
}

std::string channel_name(const DiagnosticsReport& d, std::size_t channel) {
  return channel < d.consistency.channels.size() ? d.consistency.channels[channel].name
                                                 : std::to_string(channel);
}

}  // namespace

DiagnosticsReport make_diagnostics_report(const ForwardPass& pass) {
  DiagnosticsReport d;
  const ForwardPassOptions& options = pass.options();
  d.consistency = pass.consistency();
  VerdictOptions verdict_options;
  verdict_options.gate_probability = options.reject_probability;
  d.level = verdict_options.level;
  d.verdicts = judge(d.consistency, verdict_options);
  d.ljung_box_lags_option = options.ljung_box_lags;
  d.numerics_requested = options.numerics;
  d.numerics_used = pass.numerics();
  d.numerics_switch = pass.numerics_switch();
  d.reject_probability = options.reject_probability;
  if (pass.gate() != nullptr) d.gate_mode = pass.gate()->mode();
  d.rejections = pass.rejections();
  d.stuck_run_length = options.stuck_run_length;
  d.stuck_run_count = pass.stuck().run_count();
  d.stuck_runs = pass.stuck().runs();
  return d;
}

std::vector<std::string> diagnostics_warnings(const DiagnosticsReport& d, const std::string& input) {
  std::vector<std::string> warnings;
  if (d.numerics_switch)
    warnings.push_back("the plain covariance update broke down at " + input + ":" +
                       std::to_string(d.numerics_switch->line) + " (" + d.numerics_switch->reason +
                       "); the filter switched to the square-root form from that row on");
  if (d.rejections.reacquired > 0)
    warnings.push_back(
        "the gate rejected every value on " + std::to_string(kReacquireAfterRows) + " rows in a row " +
        (d.rejections.reacquired == 1 ? std::string("once")
                                      : std::to_string(d.rejections.reacquired) + " times") +
        " (first at line " + std::to_string(d.rejections.first_reacquired_line) + " of " + input +
        "): the filter had lost the signal, or the data jumped; it took on its initial "
        "uncertainty again and that row without the gate, to find the signal again");
  for (const StuckRun& run : d.stuck_runs)
    warnings.push_back("channel \"" + channel_name(d, run.channel) + "\" repeats the value " +
                       exact_number(run.value) + " exactly on " + std::to_string(run.count) +
                       " observations in a row (lines " + std::to_string(run.first_line) + " to " +
                       std::to_string(run.last_line) + " of " + input + "): the sensor may be stuck");
  if (d.stuck_run_count > d.stuck_runs.size())
    warnings.push_back(std::to_string(d.stuck_run_count - d.stuck_runs.size()) +
                       " more runs of identical values were found and not listed");
  return warnings;
}

std::string write_diagnostics_text(const RunReport& report) {
  const DiagnosticsReport& d = *report.diagnostics;
  std::string out = "statewise diagnose\n";
  out += field("model", report.model_path);
  out += field("log", report.input_path + " (" + std::to_string(report.rows) + " rows, " +
                          std::to_string(report.states) + " states, " +
                          std::to_string(d.consistency.channels.size()) + " channels)");
  std::string numerics = numerics_name(d.numerics_used);
  if (d.numerics_switch)
    numerics = std::string("square-root from row ") + std::to_string(d.numerics_switch->row) +
               " (the plain form broke down there)";
  out += field("numerics", numerics);
  if (d.reject_probability > 0.0)
    out += field("outlier gate", "P = " + format_significant(d.reject_probability, 6) +
                                     (d.gate_mode == GateMode::per_channel ? ", channel by channel"
                                                                           : ", all channels jointly") +
                                     ": " + std::to_string(d.rejections.count) + " values rejected on " +
                                     std::to_string(d.rejections.row_count) + " rows");
  else
    out += field("outlier gate", "none");
  out += field("stuck sensors", d.stuck_run_length > 0
                                    ? "runs of " + std::to_string(d.stuck_run_length) +
                                          " identical values; " + std::to_string(d.stuck_run_count) + " found"
                                    : "not checked");

  out += "\nVerdicts\n";
  for (const Verdict& v : d.verdicts) out += wrap(v.text, "  - ", "    ");

  const NisConsistency& nis = d.consistency.nis;
  out += "\nWhole model\n";
  out += field("log-likelihood", format_significant(report.log_likelihood, 8));
  out += field("average NIS per step",
               format_significant(nis.mean) + " (expected " + format_significant(nis.expected) +
                   ", 95% range " + format_significant(nis.lower_95) + " to " +
                   format_significant(nis.upper_95) + ", " + format_p_value(nis.p_value) + ")");
  out +=
      field("steps with NIS outside 95%",
            percent(nis.fraction_steps_outside_95) +
                (d.reject_probability > 0.0 ? " (5% without a gate; fewer behind one)" : " (expected 5%)"));
  out +=
      "  z is the standardized innovation: measured minus predicted, over its standard deviation under the "
      "model.\n";

  for (const ChannelConsistency& c : d.consistency.channels) {
    out += "\n" + c.name + " (" + std::to_string(c.used) + " values used, " + std::to_string(c.missing) +
           " missing, " + std::to_string(c.rejected) + " rejected)\n";
    out += field("mean of z",
                 signed_significant(c.z_mean, 2) + " (expected 0, " + format_p_value(c.z_mean_p_value) + ")");
    out += field("mean square of z", format_significant(c.z_mean_square) + " (expected " +
                                         format_significant(c.z_expected_mean_square) + ", " +
                                         format_p_value(c.z_mean_square_p_value) + ")");
    out +=
        field("share of |z| beyond 1.96", percent(c.fraction_outside_1_96) + " (expected 5% without a gate)");
    out += field("Ljung–Box on " + std::to_string(c.ljung_box.lags) + " lags",
                 "Q = " + format_significant(c.ljung_box.statistic) + ", " +
                     format_p_value(c.ljung_box.p_value) + "; lag-1 autocorrelation " +
                     signed_significant(c.lag1_autocorrelation, 2));
    out += field("Jarque–Bera", "JB = " + format_significant(c.jarque_bera.statistic) + ", " +
                                    format_p_value(c.jarque_bera.p_value) + "; skewness " +
                                    signed_significant(c.jarque_bera.skewness, 2) + ", excess kurtosis " +
                                    signed_significant(c.jarque_bera.excess_kurtosis, 2));
  }

  if (d.rejections.count > 0) {
    out += "\nRejected values (" + std::to_string(d.rejections.count) +
           (d.rejections.count > d.rejections.first.size()
                ? "; the first " + std::to_string(d.rejections.first.size()) + ")\n"
                : ")\n");
    for (const RejectedValue& r : d.rejections.first)
      out += "  line " + std::to_string(r.line) + ": " + channel_name(d, r.channel) + " = " +
             exact_number(r.value) + ", z = " + signed_significant(r.z) + "\n";
  }
  if (!report.warnings.empty()) {
    out += "\nWarnings\n";
    for (const std::string& w : report.warnings) out += wrap(w, "  - ", "    ");
  }
  return out;
}

namespace detail {

void add_diagnostics_json(OrderedJson& root, const DiagnosticsReport& d) {
  OrderedJson numerics = OrderedJson::object();
  numerics["requested"] = numerics_name(d.numerics_requested);
  numerics["used"] = numerics_name(d.numerics_used);
  if (d.numerics_switch)
    numerics["switched"] = OrderedJson{{"row", d.numerics_switch->row},
                                       {"line", d.numerics_switch->line},
                                       {"reason", d.numerics_switch->reason}};
  else
    numerics["switched"] = nullptr;
  root["numerics"] = numerics;

  const NisConsistency& nis = d.consistency.nis;
  OrderedJson diagnostics = OrderedJson::object();
  diagnostics["level"] = d.level;
  diagnostics["consistent"] = all_consistent(d.verdicts);
  diagnostics["nis"] = OrderedJson{{"steps", nis.steps},
                                   {"degrees_of_freedom", nis.degrees_of_freedom},
                                   {"mean", nis.mean},
                                   {"expected", nis.expected},
                                   {"lower_95", nis.lower_95},
                                   {"upper_95", nis.upper_95},
                                   {"p_value", nis.p_value},
                                   {"scale_factor", nis.scale_factor},
                                   {"fraction_steps_outside_95", nis.fraction_steps_outside_95}};
  OrderedJson channels = OrderedJson::array();
  for (const ChannelConsistency& c : d.consistency.channels) {
    channels.push_back(
        OrderedJson{{"name", c.name},
                    {"used", c.used},
                    {"missing", c.missing},
                    {"rejected", c.rejected},
                    {"z_mean", c.z_mean},
                    {"z_mean_p_value", c.z_mean_p_value},
                    {"z_mean_square", c.z_mean_square},
                    {"z_expected_mean_square", c.z_expected_mean_square},
                    {"z_mean_square_p_value", c.z_mean_square_p_value},
                    {"fraction_outside_1_96", c.fraction_outside_1_96},
                    {"lag1_autocorrelation", c.lag1_autocorrelation},
                    {"ljung_box", OrderedJson{{"lags", c.ljung_box.lags},
                                              {"statistic", c.ljung_box.statistic},
                                              {"p_value", c.ljung_box.p_value}}},
                    {"jarque_bera", OrderedJson{{"statistic", c.jarque_bera.statistic},
                                                {"skewness", c.jarque_bera.skewness},
                                                {"excess_kurtosis", c.jarque_bera.excess_kurtosis},
                                                {"p_value", c.jarque_bera.p_value}}}});
  }
  diagnostics["channels"] = channels;
  root["diagnostics"] = diagnostics;

  OrderedJson verdicts = OrderedJson::array();
  for (const Verdict& v : d.verdicts)
    verdicts.push_back(
        OrderedJson{{"finding", finding_code(v.finding)},
                    {"channel", v.channel.empty() ? OrderedJson(nullptr) : OrderedJson(v.channel)},
                    {"text", v.text}});
  root["verdicts"] = verdicts;

  if (d.reject_probability > 0.0) {
    OrderedJson per_channel = OrderedJson::object();
    for (std::size_t c = 0; c < d.rejections.per_channel.size(); ++c)
      per_channel[channel_name(d, c)] = d.rejections.per_channel[c];
    OrderedJson first = OrderedJson::array();
    for (const RejectedValue& r : d.rejections.first)
      first.push_back(OrderedJson{{"row", r.row},
                                  {"line", r.line},
                                  {"channel", channel_name(d, r.channel)},
                                  {"value", r.value},
                                  {"z", r.z}});
    root["rejected"] = OrderedJson{{"probability", d.reject_probability},
                                   {"mode", d.gate_mode == GateMode::per_channel ? "per_channel" : "joint"},
                                   {"count", d.rejections.count},
                                   {"rows", d.rejections.row_count},
                                   {"reacquired", d.rejections.reacquired},
                                   {"per_channel", per_channel},
                                   {"first", first}};
  }
  if (d.stuck_run_length > 0) {
    OrderedJson runs = OrderedJson::array();
    for (const StuckRun& run : d.stuck_runs)
      runs.push_back(OrderedJson{{"channel", channel_name(d, run.channel)},
                                 {"value", run.value},
                                 {"count", run.count},
                                 {"first_row", run.first_row},
                                 {"last_row", run.last_row},
                                 {"first_line", run.first_line},
                                 {"last_line", run.last_line}});
    root["stuck"] =
        OrderedJson{{"run_length", d.stuck_run_length}, {"count", d.stuck_run_count}, {"runs", runs}};
  }
}

}  // namespace detail

}  // namespace statewise
