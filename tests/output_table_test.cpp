// The estimates table in its three syntaxes (docs/outputs.md). Expected texts are worked out by
// hand from the inputs beside them; JSON Lines output is read back with nlohmann::json, an
// independent JSON parser that rejects invalid JSON and invalid UTF-8.

#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "statewise/output_table.h"

using namespace statewise;

namespace {

constexpr double kMissing = std::numeric_limits<double>::quiet_NaN();

// One state "level" seen by two channels "a" and "b" (C = [1; 2]), with a time column.
StateSpaceModel two_channel_level() {
  StateSpaceModel model;
  model.state_names = {"level"};
  model.observation_names = {"a", "b"};
  model.A = Eigen::MatrixXd::Identity(1, 1);
  model.B = Eigen::MatrixXd::Zero(1, 0);
  model.C.resize(2, 1);
  model.C << 1.0, 2.0;
  model.Q = Eigen::MatrixXd::Constant(1, 1, 0.1);
  model.R = Eigen::MatrixXd::Identity(2, 2);
  model.initial_mean = Eigen::VectorXd::Zero(1);
  model.initial_covariance = Eigen::MatrixXd::Identity(1, 1);
  model.time_column = "time";
  validate_model(model, "test");
  return model;
}

// Writes the header and one row: level 1.5 with variance 0.25 (sd 0.5); channel a measured 1.25,
// channel b missing. Hence a_est = 1.5, a_sd = 0.5, b_est = 3, b_sd = 2 * 0.5 = 1, b_filled = 3.
std::string one_row(const StateSpaceModel& model, EstimateKind kind, TableFormat format, std::string_view time,
                    const InnovationRecord* record) {
  const EstimateTableWriter writer(model, kind, format);
  const double values[] = {1.25, kMissing};
  Eigen::VectorXd mean(1);
  mean << 1.5;
  Eigen::MatrixXd covariance(1, 1);
  covariance << 0.25;
  std::string out;
  writer.append_header(out);
  writer.append_row(out, time, values, mean, covariance, record);
  return out;
}

// Innovation 0.5 with sd 2 on channel a (z = 0.25); channel b missing.
InnovationRecord innovations() {
  InnovationRecord record = make_innovation_record(2);
  record.innovation(0) = 0.5;
  record.innovation_sd(0) = 2.0;
  record.observed = 1;
  return record;
}

std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> lines;
  std::istringstream stream(text);
  std::string line;
  while (std::getline(stream, line)) lines.push_back(line);
  return lines;
}

}  // namespace

TEST_CASE("output table: csv is the default syntax and writes the documented columns") {
  const StateSpaceModel model = two_channel_level();
  CHECK(one_row(model, EstimateKind::smoothed, TableFormat{}, "2024-01-01T00:00", nullptr) ==
        "time,level,level_sd,a_est,a_sd,a_filled,a_imputed,b_est,b_sd,b_filled,b_imputed\n"
        "2024-01-01T00:00,1.5,0.5,1.5,0.5,1.25,0,3,1,3,1\n");
  const InnovationRecord record = innovations();
  CHECK(one_row(model, EstimateKind::filtered, TableFormat{}, "t, quoted", &record) ==
        "time,level,level_sd,a_est,a_sd,a_filled,a_imputed,a_innov,a_z,b_est,b_sd,b_filled,b_imputed,b_innov,b_z\n"
        "\"t, quoted\",1.5,0.5,1.5,0.5,1.25,0,0.5,0.25,3,1,3,1,,\n");
}

TEST_CASE("output table: tsv separates with tabs and escapes tab, line breaks and backslash") {
  const StateSpaceModel model = two_channel_level();
  TableFormat format;
  format.syntax = TableSyntax::tsv;
  format.delimiter = ';';  // ignored by tsv
  CHECK(one_row(model, EstimateKind::smoothed, format, "a\tb\\c\nd\re", nullptr) ==
        "time\tlevel\tlevel_sd\ta_est\ta_sd\ta_filled\ta_imputed\tb_est\tb_sd\tb_filled\tb_imputed\n"
        "a\\tb\\\\c\\nd\\re\t1.5\t0.5\t1.5\t0.5\t1.25\t0\t3\t1\t3\t1\n");
}

TEST_CASE("output table: jsonl writes one object per row with the same columns, null for empty cells") {
  const StateSpaceModel model = two_channel_level();
  TableFormat format;
  format.syntax = TableSyntax::jsonl;
  const InnovationRecord record = innovations();
  const std::string text = one_row(model, EstimateKind::filtered, format, "2024-01-01T00:00", &record);
  CHECK(text ==
        "{\"time\":\"2024-01-01T00:00\",\"level\":1.5,\"level_sd\":0.5,\"a_est\":1.5,\"a_sd\":0.5,\"a_filled\":1.25,"
        "\"a_imputed\":0,\"a_innov\":0.5,\"a_z\":0.25,\"b_est\":3,\"b_sd\":1,\"b_filled\":3,\"b_imputed\":1,"
        "\"b_innov\":null,\"b_z\":null}\n");

  // Read back: the keys are the csv header's columns in the same order.
  const std::vector<std::string> csv = lines_of(one_row(model, EstimateKind::filtered, TableFormat{}, "x", &record));
  const auto object = nlohmann::ordered_json::parse(lines_of(text).at(0));
  std::vector<std::string> keys;
  for (auto it = object.begin(); it != object.end(); ++it) keys.push_back(it.key());
  std::string header;
  for (const auto& key : keys) header += (header.empty() ? "" : ",") + key;
  CHECK(header == csv.at(0));
}

TEST_CASE("output table: jsonl keeps the time column a string, even when it looks like a number") {
  const StateSpaceModel model = two_channel_level();
  TableFormat format;
  format.syntax = TableSyntax::jsonl;
  const auto numeric = nlohmann::json::parse(one_row(model, EstimateKind::smoothed, format, "1700000000", nullptr));
  CHECK(numeric["time"].is_string());
  CHECK(numeric["time"] == "1700000000");
  const auto empty = nlohmann::json::parse(one_row(model, EstimateKind::smoothed, format, "", nullptr));
  CHECK(empty["time"].is_null());
}

TEST_CASE("output table: jsonl numbers read back to exactly the doubles written, with --digits too") {
  const StateSpaceModel model = two_channel_level();
  const EstimateTableWriter shortest(model, EstimateKind::smoothed, TableFormat{',', 0, TableSyntax::jsonl});
  const EstimateTableWriter three(model, EstimateKind::smoothed, TableFormat{',', 3, TableSyntax::jsonl});
  const double values[] = {1e-300, 2.0 / 3.0};
  Eigen::VectorXd mean(1);
  mean << 0.1 + 0.2;  // 0.30000000000000004, which needs 17 digits
  Eigen::MatrixXd covariance(1, 1);
  covariance << 1e300;
  std::string out;
  shortest.append_row(out, "t", values, mean, covariance, nullptr);
  const auto row = nlohmann::json::parse(out);
  CHECK(row["level"].get<double>() == 0.1 + 0.2);
  CHECK(row["level_sd"].get<double>() == std::sqrt(1e300));
  CHECK(row["a_filled"].get<double>() == 1e-300);
  CHECK(row["b_filled"].get<double>() == 2.0 / 3.0);
  out.clear();
  three.append_row(out, "t", values, mean, covariance, nullptr);
  const auto rounded = nlohmann::json::parse(out);
  CHECK(rounded["level"].get<double>() == 0.3);
  CHECK(rounded["b_filled"].get<double>() == 0.667);
}

TEST_CASE("output table: jsonl writes null for an infinite number, which JSON cannot hold") {
  const TableLayout layout({"x", "y"}, TableFormat{',', 0, TableSyntax::jsonl});
  std::string out;
  TableLayout::Row row = layout.start_row(out);
  row.number(std::numeric_limits<double>::infinity());
  row.number(-2.5);
  row.finish();
  CHECK(out == "{\"x\":null,\"y\":-2.5}\n");
}

TEST_CASE("output table: JSON strings escape control characters and replace invalid UTF-8") {
  std::string out;
  append_json_string(out, std::string("quote\" backslash\\ tab\t nul", 26) + std::string(1, '\0') + "\x1f");
  CHECK(out == "\"quote\\\" backslash\\\\ tab\\t nul\\u0000\\u001f\"");
  out.clear();
  // Valid multi-byte UTF-8 (°, €, U+1F321) passes unchanged.
  append_json_string(out, "\xC2\xB0" "C \xE2\x82\xAC \xF0\x9F\x8C\xA1");
  CHECK(out == "\"\xC2\xB0" "C \xE2\x82\xAC \xF0\x9F\x8C\xA1\"");
  CHECK(nlohmann::json::parse(out).get<std::string>() == "\xC2\xB0" "C \xE2\x82\xAC \xF0\x9F\x8C\xA1");
  // Latin-1 degree sign, a truncated sequence, an overlong '/', a UTF-16 surrogate: each bad byte
  // becomes U+FFFD and the result is valid JSON.
  for (const std::string bad : {"\xB0" "C", "\xE2\x82", "\xC0\xAF", "\xED\xA0\x80", "\xF5\x80\x80\x80"}) {
    out.clear();
    append_json_string(out, bad);
    INFO("escaped: " << out);
    CHECK(out.find("\\ufffd") != std::string::npos);
    CHECK(nlohmann::json::accept(out));
  }
}

TEST_CASE("output table: the syntax names and the error for an unknown one") {
  CHECK(table_syntax_names() == std::vector<std::string>{"csv", "tsv", "jsonl"});
  CHECK(find_table_syntax("jsonl") == TableSyntax::jsonl);
  CHECK_FALSE(find_table_syntax("json").has_value());
  try {
    (void)parse_table_syntax("tsb", {"--format", 0, 0, ""});
    FAIL("expected an InputError");
  } catch (const InputError& e) {
    CHECK(std::string(e.what()) == "--format: expected csv, tsv or jsonl, got \"tsb\"; did you mean \"tsv\"?");
  }
}
