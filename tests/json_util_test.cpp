// The compact pretty printer for JSON that statewise writes (reports, model files).

#include "detail/json_util.h"

#include <doctest/doctest.h>

#include <string>

using statewise::detail::dump_json_pretty;
using statewise::detail::OrderedJson;

TEST_CASE("lists of strings keep their commas and brackets (regression)") {
  // Regression test: spaces were added after every comma of a list of scalars, inside strings too, and
  // the list was found by the last '[' written, which could lie inside a string. First principles
  // (RFC 8259): reading the output back must give the same value.
  OrderedJson value = OrderedJson::object();
  value["warnings"] = {"gaps from 60 s to 1200 s, the largest before line 5", "a [bracket], \"quoted, too\""};
  value["numbers"] = {1, 2.5, -3};
  const std::string text = dump_json_pretty(value);
  CHECK(OrderedJson::parse(text) == value);
  CHECK(text.find("\"gaps from 60 s to 1200 s, the largest before line 5\"") != std::string::npos);
  CHECK(text.find("[1, 2.5, -3]") != std::string::npos);
}
