#include "statewise/report.h"

#include "detail/diagnostics_json.h"
#include "detail/json_util.h"
#include "statewise/version.h"

namespace statewise {

std::string write_report_json(const RunReport& report) {
  using detail::OrderedJson;
  OrderedJson root = OrderedJson::object();
  root["statewise_version"] = STATEWISE_VERSION;
  root["command"] = report.command;
  if (report.lag >= 0) root["lag"] = report.lag;
  root["model"] = report.model_path;
  root["input"] = report.input_path;
  root["rows"] = report.rows;
  root["states"] = report.states;
  root["log_likelihood"] = report.log_likelihood;
  OrderedJson channels = OrderedJson::array();
  for (const auto& c : report.channels) {
    channels.push_back(OrderedJson{{"name", c.name},
                                   {"observed", c.observed},
                                   {"missing", c.missing},
                                   {"innovation_mean", c.innovation_mean},
                                   {"innovation_sd", c.innovation_sd},
                                   {"fraction_outside_1_96", c.fraction_outside_1_96}});
  }
  root["channels"] = channels;
  root["nis"] = OrderedJson{{"steps", report.nis.steps},
                            {"degrees_of_freedom", report.nis.degrees_of_freedom},
                            {"mean", report.nis.mean},
                            {"expected", report.nis.expected},
                            {"lower_95", report.nis.lower_95},
                            {"upper_95", report.nis.upper_95}};
  if (report.diagnostics) detail::add_diagnostics_json(root, *report.diagnostics);
  root["warnings"] = report.warnings;
  return detail::dump_json_pretty(root);
}

}  // namespace statewise
