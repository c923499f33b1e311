#include "detail/json_util.h"

#include <cmath>
#include <set>

#include "statewise/error.h"

namespace statewise::detail {

using nlohmann::json;

namespace {
constexpr int kMaximumNesting = 64;
constexpr std::size_t kMaximumNumberInMessage = 40;  // longer number texts are shortened in messages

// 1-based line and column of a byte offset in the text.
SourceLocation location_of_byte(std::string_view text, std::size_t byte, const std::string& file_name) {
  SourceLocation location{file_name, 1, 1, ""};
  const std::size_t end = std::min(byte, text.size());
  for (std::size_t i = 0; i < end; ++i) {
    if (text[i] == '\n') {
      ++location.line;
      location.column = 1;
    } else {
      ++location.column;
    }
  }
  return location;
}

// Raises InputError at the bracket that opens level kMaximumNesting + 1 (the top-level value is
// level 1). Scanned before parsing so that the message can give the line and column.
void check_nesting(std::string_view text, const std::string& file_name) {
  int depth = 0;
  bool in_string = false;
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    if (in_string) {
      if (c == '\\') {
        ++i;  // the escaped character cannot end the string
      } else if (c == '"') {
        in_string = false;
      }
    } else if (c == '"') {
      in_string = true;
    } else if (c == '[' || c == '{') {
      if (++depth > kMaximumNesting)
        raise_input_error(
            location_of_byte(text, i, file_name),
            "nested more than " + std::to_string(kMaximumNesting) + " levels deep; expected a model file");
    } else if ((c == ']' || c == '}') && depth > 0) {
      --depth;
    }
  }
}

// Raises InputError for text that is not UTF-8 at all, in the words of the CSV reader: a UTF-16
// byte-order mark, or NUL bytes (UTF-16 without a mark shows them in every other byte of ASCII text).
// nlohmann's parser would stop at either with a message about an invalid literal.
void check_encoding(std::string_view text, const std::string& file_name) {
  if (text.size() >= 2) {
    const auto first = static_cast<unsigned char>(text[0]), second = static_cast<unsigned char>(text[1]);
    if ((first == 0xFF && second == 0xFE) || (first == 0xFE && second == 0xFF))
      raise_input_error(location_of_byte(text, 0, file_name),
                        std::string("looks like UTF-16 (byte-order mark ") + (first == 0xFF ? "FF FE" : "FE FF") +
                            "); save it as UTF-8");
  }
  const std::size_t nul = text.find('\0');
  if (nul == std::string_view::npos) return;
  const bool every_other = text.size() >= 4 && (text[1] == '\0' || text[0] == '\0') && (text[3] == '\0' || text[2] == '\0');
  raise_input_error(location_of_byte(text, nul, file_name),
                    every_other ? "looks like UTF-16 (NUL in every other byte); save it as UTF-8"
                                : "binary data (NUL byte); expected UTF-8 text");
}

bool is_scalar_list(const OrderedJson& value) {
  if (!value.is_array()) return false;
  for (const auto& item : value)
    if (item.is_structured()) return false;
  return true;
}

void dump_into(const OrderedJson& value, int indent, std::string& out) {
  const std::string pad(static_cast<std::size_t>(indent), ' ');
  const std::string inner(static_cast<std::size_t>(indent + 2), ' ');
  if (value.is_object()) {
    if (value.empty()) {
      out += "{}";
      return;
    }
    out += "{\n";
    bool first = true;
    for (auto it = value.begin(); it != value.end(); ++it) {
      if (!first) out += ",\n";
      first = false;
      out += inner + OrderedJson(it.key()).dump() + ": ";
      dump_into(it.value(), indent + 2, out);
    }
    out += "\n" + pad + "}";
  } else if (is_scalar_list(value)) {
    // One line, a space after each separating comma: "[1, 2]". Items are written one by one so that
    // commas and brackets inside text items are left alone.
    out += '[';
    bool first = true;
    for (const auto& item : value) {
      if (!first) out += ", ";
      first = false;
      out += item.dump(-1, ' ', false, OrderedJson::error_handler_t::replace);
    }
    out += ']';
  } else if (value.is_array()) {
    if (value.empty()) {
      out += "[]";
      return;
    }
    out += "[\n";
    bool first = true;
    for (const auto& item : value) {
      if (!first) out += ",\n";
      first = false;
      out += inner;
      dump_into(item, indent + 2, out);
    }
    out += "\n" + pad + "]";
  } else {
    out += value.dump(-1, ' ', false, OrderedJson::error_handler_t::replace);
  }
}
}  // namespace

void JsonContext::fail(const std::string& key, const std::string& message) const {
  raise_input_error({file_name, 0, 0, key.empty() ? std::string("top level") : key}, message);
}

json parse_json_document(std::string_view text, const std::string& file_name) {
  if (text.find_first_not_of(" \t\r\n") == std::string_view::npos)
    raise_input_error({file_name, 0, 0, ""}, "the file is empty; expected a JSON object");
  check_encoding(text, file_name);
  check_nesting(text, file_name);
  // The containers being parsed, outermost first, to name the key path of a duplicate key or of a
  // number out of range (nlohmann reports neither with a position).
  struct Frame {
    bool object = false;
    std::string key;        // object: the key whose value is being parsed
    std::size_t index = 0;  // array: the index of the item being parsed
    std::set<std::string> keys;
  };
  std::vector<Frame> frames;
  const auto path = [&frames]() {
    std::string joined;
    for (const Frame& frame : frames) {
      if (!frame.object) {
        joined += "[" + std::to_string(frame.index) + "]";
      } else if (!frame.key.empty()) {
        if (!joined.empty()) joined += ".";
        joined += frame.key;
      }
    }
    return joined;
  };
  const auto item_done = [&frames]() {
    if (!frames.empty() && !frames.back().object) ++frames.back().index;
  };
  auto callback = [&](int /*depth*/, json::parse_event_t event, json& parsed) {
    switch (event) {
      case json::parse_event_t::object_start:
        frames.push_back(Frame{true, {}, 0, {}});
        break;
      case json::parse_event_t::array_start:
        frames.push_back(Frame{false, {}, 0, {}});
        break;
      case json::parse_event_t::object_end:
      case json::parse_event_t::array_end:
        if (!frames.empty()) frames.pop_back();
        item_done();
        break;
      case json::parse_event_t::key: {
        if (frames.empty()) break;
        Frame& frame = frames.back();
        frame.key = parsed.get<std::string>();
        if (!frame.keys.insert(frame.key).second)
          raise_input_error({file_name, 0, 0, path()}, "the key appears twice in the same object; keep one");
        break;
      }
      case json::parse_event_t::value:
        item_done();
        break;
    }
    return true;
  };
  try {
    return json::parse(text.begin(), text.end(), callback);
  } catch (const json::parse_error& error) {
    std::string what = error.what();
    // nlohmann's text reads "[json.exception.parse_error.101] parse error at line 1, column 2: <detail>".
    const std::size_t colon = what.find(": ");
    std::string detail_text = colon == std::string::npos ? what : what.substr(colon + 2);
    const SourceLocation location =
        location_of_byte(text, error.byte > 0 ? error.byte - 1 : 0, file_name);
    raise_input_error(location, "invalid JSON: " + detail_text);
  } catch (const json::out_of_range& error) {
    // Error 406, "number overflow parsing '1e999'": a number beyond the range of a double. It is
    // reported like any other non-finite entry, at the key path of the number.
    std::string what = error.what();
    const std::size_t open = what.find('\'');
    const std::size_t close = what.rfind('\'');
    if (error.id == 406 && open != std::string::npos && close > open) {
      std::string number = what.substr(open + 1, close - open - 1);
      if (number.size() > kMaximumNumberInMessage)
        number = number.substr(0, kMaximumNumberInMessage - 3) + "...";
      const std::string key = path();
      raise_input_error({file_name, 0, 0, key.empty() ? std::string("top level") : key},
                        "expected a finite number, got " + number + " (beyond the range of a double)");
    }
    const std::size_t bracket = what.find("] ");
    raise_input_error({file_name, 0, 0, ""},
                      "invalid JSON: " + (bracket == std::string::npos ? what : what.substr(bracket + 2)));
  } catch (const json::exception& error) {
    std::string what = error.what();
    const std::size_t bracket = what.find("] ");
    raise_input_error({file_name, 0, 0, ""},
                      "invalid JSON: " + (bracket == std::string::npos ? what : what.substr(bracket + 2)));
  }
}

std::string describe(const json& value) {
  switch (value.type()) {
    case json::value_t::null:
      return "null";
    case json::value_t::boolean:
      return std::string("the value ") + (value.get<bool>() ? "true" : "false");
    case json::value_t::string:
      return "the text " + value.dump();
    case json::value_t::number_integer:
    case json::value_t::number_unsigned:
    case json::value_t::number_float:
      return "the number " + value.dump();
    case json::value_t::array: {
      bool all_numbers = true;
      for (const auto& item : value) all_numbers = all_numbers && item.is_number();
      const char* noun = all_numbers ? (value.size() == 1 ? " number" : " numbers")
                                     : (value.size() == 1 ? " item" : " items");
      return "a list of " + std::to_string(value.size()) + noun;
    }
    case json::value_t::object:
      return "an object";
    default:
      return "an unexpected value";
  }
}

void reject_unknown_keys(const JsonContext& context, const json& object, const std::string& path,
                         const std::vector<std::string>& allowed) {
  for (auto it = object.begin(); it != object.end(); ++it) {
    bool known = false;
    for (const auto& name : allowed) known = known || name == it.key();
    if (!known) {
      const std::string key = path.empty() ? it.key() : path + "." + it.key();
      context.fail(key, "unknown key" + did_you_mean(it.key(), allowed));
    }
  }
}

Eigen::Index matrix_rows(const JsonContext& context, const json& value, const std::string& key) {
  if (value.is_number()) return 1;
  if (value.is_array()) return static_cast<Eigen::Index>(value.size());
  context.fail(key, "expected a matrix (a list of rows), got " + describe(value));
}

bool is_estimate_marker(const json& value) {
  return (value.is_string() && value.get_ref<const std::string&>() == "estimate") ||
         (value.is_object() && value.contains("estimate"));
}

void reject_estimate_marker(const JsonContext& context, const json& value, const std::string& key) {
  if (!is_estimate_marker(value)) return;
  // A component's marker is named by its key path; name that, not the entry it expanded into.
  std::string place = key;
  if (value.is_object() && value.contains("parameter") && value["parameter"].is_string()) {
    const std::string parameter = value["parameter"].get<std::string>();
    place = parameter.rfind("components[", 0) == 0 ? parameter : key + " (parameter \"" + parameter + "\")";
  }
  context.fail(place, "is marked \"estimate\"; estimate it first with `statewise fit -m " + context.file_name +
                          " data.csv -o fitted.json` and use the fitted model file");
}

double parse_number(const JsonContext& context, const json& value, const std::string& key) {
  reject_estimate_marker(context, value, key);
  if (!value.is_number()) context.fail(key, "expected a number, got " + describe(value));
  const double number = value.get<double>();
  if (!std::isfinite(number)) context.fail(key, "expected a finite number, got " + value.dump());
  return number;
}

namespace {
// "2×3" when `value` is a list of equally long lists (a matrix of some shape), else empty.
std::string shape_of(const json& value) {
  if (!value.is_array() || value.empty()) return "";
  for (const auto& row : value)
    if (!row.is_array() || row.size() != value[0].size()) return "";
  return std::to_string(value.size()) + "×" + std::to_string(value[0].size());
}
}  // namespace

Eigen::MatrixXd parse_matrix(const JsonContext& context, const json& value, const std::string& key,
                             Eigen::Index rows, Eigen::Index cols, const std::string& what) {
  const std::string expected = std::to_string(rows) + "×" + std::to_string(cols) + " matrix (" + what + ")";
  reject_estimate_marker(context, value, key);
  if (value.is_number()) {
    if (rows != 1 || cols != 1) context.fail(key, "expected a " + expected + ", got a single number");
    return Eigen::MatrixXd::Constant(1, 1, parse_number(context, value, key));
  }
  if (!value.is_array() || (!value.empty() && !value[0].is_array()))
    context.fail(key, "expected a " + expected + " as a list of rows, got " + describe(value));
  // A well-formed matrix of the wrong shape is reported with both shapes.
  const std::string shape = shape_of(value);
  if (!shape.empty() &&
      (static_cast<Eigen::Index>(value.size()) != rows || static_cast<Eigen::Index>(value[0].size()) != cols))
    context.fail(key, "expected a " + expected + ", got a " + shape + " matrix");
  if (static_cast<Eigen::Index>(value.size()) != rows)
    context.fail(key, "expected a " + expected + ", got " + std::to_string(value.size()) + " rows");
  Eigen::MatrixXd matrix(rows, cols);
  for (Eigen::Index i = 0; i < rows; ++i) {
    const json& row = value[static_cast<std::size_t>(i)];
    const std::string row_key = key + "[" + std::to_string(i) + "]";
    if (!row.is_array())
      context.fail(row_key, "expected a row of " + std::to_string(cols) + " numbers, got " + describe(row));
    if (static_cast<Eigen::Index>(row.size()) != cols)
      context.fail(row_key, "expected a " + expected + ", got a row of " + std::to_string(row.size()) + " numbers");
    for (Eigen::Index j = 0; j < cols; ++j)
      matrix(i, j) = parse_number(context, row[static_cast<std::size_t>(j)], row_key + "[" + std::to_string(j) + "]");
  }
  return matrix;
}

Eigen::VectorXd parse_vector(const JsonContext& context, const json& value, const std::string& key,
                             Eigen::Index size, const std::string& what) {
  reject_estimate_marker(context, value, key);
  if (value.is_number() && size == 1) return Eigen::VectorXd::Constant(1, parse_number(context, value, key));
  if (!value.is_array() || static_cast<Eigen::Index>(value.size()) != size)
    context.fail(key, "expected a list of " + std::to_string(size) + " numbers (" + what + "), got " + describe(value));
  Eigen::VectorXd vector(size);
  for (Eigen::Index i = 0; i < size; ++i)
    vector(i) = parse_number(context, value[static_cast<std::size_t>(i)], key + "[" + std::to_string(i) + "]");
  return vector;
}

OrderedJson matrix_to_json(const Eigen::MatrixXd& matrix) {
  OrderedJson rows = OrderedJson::array();
  for (Eigen::Index i = 0; i < matrix.rows(); ++i) {
    OrderedJson row = OrderedJson::array();
    for (Eigen::Index j = 0; j < matrix.cols(); ++j) row.push_back(matrix(i, j));
    rows.push_back(std::move(row));
  }
  return rows;
}

OrderedJson vector_to_json(const Eigen::VectorXd& vector) {
  OrderedJson items = OrderedJson::array();
  for (Eigen::Index i = 0; i < vector.size(); ++i) items.push_back(vector(i));
  return items;
}

std::string dump_json_pretty(const OrderedJson& value) {
  std::string out;
  dump_into(value, 0, out);
  out += "\n";
  return out;
}

}  // namespace statewise::detail
