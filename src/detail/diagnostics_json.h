#pragma once
// The JSON sections of a DiagnosticsReport (keys documented in docs/outputs.md), for report.cpp.

#include "detail/json_util.h"
#include "statewise/diagnostics_report.h"

namespace statewise::detail {

// Adds `numerics`, `diagnostics`, `verdicts` and, when there was a gate or stuck detection, `rejected`
// and `stuck` to the report object `root`.
void add_diagnostics_json(OrderedJson& root, const DiagnosticsReport& diagnostics);

}  // namespace statewise::detail
