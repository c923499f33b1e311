#pragma once
// Private helpers for reading and writing model-file JSON: locations for syntax errors, key paths
// for content errors, matrices and vectors, and a compact pretty printer.

#include <string>
#include <string_view>
#include <vector>

#include <Eigen/Core>
#include <nlohmann/json.hpp>

namespace statewise::detail {

/// JSON that keeps keys in insertion order, for everything statewise writes.
using OrderedJson = nlohmann::ordered_json;

/// The file being parsed; fail() raises InputError naming the file and a key path.
struct JsonContext {
  std::string file_name;
  [[noreturn]] void fail(const std::string& key, const std::string& message) const;
};

/// Parses a JSON document. Syntax errors and nesting deeper than 64 levels (the top-level value is
/// level 1) raise InputError with file:line:column; a duplicate key and a number beyond the range of
/// a double (1e999) raise it with the key path.
nlohmann::json parse_json_document(std::string_view text, const std::string& file_name);

/// A short description of a JSON value for messages: `the text "abc"`, `the number 3`, `a list of 2 items`.
std::string describe(const nlohmann::json& value);

/// Raises InputError for a key of `object` that is not in `allowed`, with a did-you-mean hint.
void reject_unknown_keys(const JsonContext& context, const nlohmann::json& object, const std::string& path,
                         const std::vector<std::string>& allowed);

/// Number of rows a matrix value has (1 for a plain number); raises for anything that is not a matrix.
Eigen::Index matrix_rows(const JsonContext& context, const nlohmann::json& value, const std::string& key);

/// True for an "estimate" marker: the text "estimate" or an object with an "estimate" key.
bool is_estimate_marker(const nlohmann::json& value);

/// Raises InputError for an "estimate" marker where a number is needed (the model is not fitted yet).
void reject_estimate_marker(const JsonContext& context, const nlohmann::json& value, const std::string& key);

/// A finite number at `key`; raises otherwise.
double parse_number(const JsonContext& context, const nlohmann::json& value, const std::string& key);

/// A rows×cols matrix given as a list of rows (or a plain number when 1×1). `what` names the
/// dimensions in words for messages ("states × states").
Eigen::MatrixXd parse_matrix(const JsonContext& context, const nlohmann::json& value, const std::string& key,
                             Eigen::Index rows, Eigen::Index cols, const std::string& what);

/// A vector of `size` numbers given as a list (or a plain number when size is 1).
Eigen::VectorXd parse_vector(const JsonContext& context, const nlohmann::json& value, const std::string& key,
                             Eigen::Index size, const std::string& what);

/// A matrix as a JSON list of rows.
OrderedJson matrix_to_json(const Eigen::MatrixXd& matrix);
/// A vector as a JSON list.
OrderedJson vector_to_json(const Eigen::VectorXd& vector);

/// Pretty JSON with two-space indentation where lists of numbers (and lists of such lists, one row
/// a line) stay compact; ends with a newline.
std::string dump_json_pretty(const OrderedJson& value);

}  // namespace statewise::detail
