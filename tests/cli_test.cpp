// Tests of the statewise command line: runs the built binary (STATEWISE_BINARY) in a fresh
// temporary folder and checks its output, its exact error lines and its exit status
// (src/cli/exit_codes.h: 0 success, 1 numerical failure, 2 bad input or usage, 4 output failure).

#include <doctest/doctest.h>
#include <stdlib.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>
#include <string>
#include <vector>

namespace {

namespace fs = std::filesystem;

const std::string kExampleDir = STATEWISE_SOURCE_DIR "/examples/cold-room";

// The output columns of the cold-room model, in the order documented in
// include/statewise/output_table.h: the time column, per state `s` and `s_sd`, per channel `c_est`,
// `c_sd`, `c_filled`, `c_imputed` and, for the filter only, `c_innov` and `c_z`.
const std::string kSmoothHeader =
    "time,air_temp,air_temp_sd,warming_rate,warming_rate_sd,"
    "probe_a_est,probe_a_sd,probe_a_filled,probe_a_imputed,"
    "probe_b_est,probe_b_sd,probe_b_filled,probe_b_imputed";
const std::string kFilterHeader =
    "time,air_temp,air_temp_sd,warming_rate,warming_rate_sd,"
    "probe_a_est,probe_a_sd,probe_a_filled,probe_a_imputed,probe_a_innov,probe_a_z,"
    "probe_b_est,probe_b_sd,probe_b_filled,probe_b_imputed,probe_b_innov,probe_b_z";

// The singular-S message that follows "file:line: ".
const std::string kSingular =
    "the innovation covariance C P C' + R of the observed channels is singular (not positive definite); "
    "check that "
    "R (or Q and the initial covariance) are not zero where a channel is observed";

std::string read_file(const std::string& path) {
  std::ifstream file(path, std::ios::binary);
  std::ostringstream text;
  text << file.rdbuf();
  return text.str();
}

void write_file(const std::string& path, const std::string& text) {
  std::ofstream file(path, std::ios::binary);
  file << text;
}

std::vector<std::string> split(const std::string& text, char separator) {
  std::vector<std::string> parts;
  std::size_t begin = 0;
  for (;;) {
    const std::size_t end = text.find(separator, begin);
    parts.push_back(text.substr(begin, end == std::string::npos ? std::string::npos : end - begin));
    if (end == std::string::npos) return parts;
    begin = end + 1;
  }
}

// The lines of a text that ends with a line break.
std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> lines = split(text, '\n');
  if (!lines.empty() && lines.back().empty()) lines.pop_back();
  return lines;
}

// The number in `text`, NaN when it is not exactly one number (so that comparisons with it fail).
double to_number(const std::string& text) {
  double value = 0;
  const auto result = std::from_chars(text.data(), text.data() + text.size(), value);
  if (result.ec != std::errc() || result.ptr != text.data() + text.size()) return std::nan("");
  return value;
}

std::string shell_quote(const std::string& text) {
  std::string quoted = "'";
  for (const char c : text) quoted += c == '\'' ? std::string("'\\''") : std::string(1, c);
  return quoted + "'";
}

struct RunResult {
  int status = -1;  // exit status, or -1 when the process did not exit normally
  std::string out;
  std::string err;
};

// A fresh folder per test: `work/` is where the binary runs (and the only place it may write), the
// captured stdout and stderr go beside it so that they never show up in work/'s listing.
class Sandbox {
 public:
  Sandbox() {
    std::string pattern = (fs::temp_directory_path() / "statewise-cli-XXXXXX").string();
    REQUIRE(mkdtemp(pattern.data()) != nullptr);
    root_ = pattern;
    work_ = root_ + "/work";
    fs::create_directory(work_);
  }
  ~Sandbox() {
    std::error_code ignored;
    fs::remove_all(root_, ignored);
  }
  Sandbox(const Sandbox&) = delete;
  Sandbox& operator=(const Sandbox&) = delete;

  std::string path(const std::string& name) const { return work_ + "/" + name; }
  void write(const std::string& name, const std::string& text) const { write_file(path(name), text); }
  std::string read(const std::string& name) const { return read_file(path(name)); }
  // Copies examples/cold-room/model.json and data.csv into work/.
  void copy_example() const {
    fs::copy_file(kExampleDir + "/model.json", path("model.json"));
    fs::copy_file(kExampleDir + "/data.csv", path("data.csv"));
  }
  // Names in work/, hidden ones included.
  std::set<std::string> entries() const {
    std::set<std::string> names;
    for (const auto& entry : fs::directory_iterator(work_)) names.insert(entry.path().filename().string());
    return names;
  }

  // Runs `statewise <arguments>` in work/ with standard input from `input` (relative to work/).
  RunResult run(const std::vector<std::string>& arguments, const std::string& input = "/dev/null") const {
    return run_command("exec " + statewise_command(arguments) + " < " + shell_quote(input));
  }
  // The same with `input` fed through a pipe (`cat input | statewise ...`).
  RunResult run_piped(const std::vector<std::string>& arguments, const std::string& input) const {
    return run_command("cat " + shell_quote(input) + " | " + statewise_command(arguments));
  }

 private:
  static std::string statewise_command(const std::vector<std::string>& arguments) {
    std::string command = shell_quote(STATEWISE_BINARY);
    for (const auto& argument : arguments) command += " " + shell_quote(argument);
    return command;
  }
  RunResult run_command(const std::string& pipeline) const {
    const std::string command = "cd " + shell_quote(work_) + " && " + pipeline + " > " +
                                shell_quote(root_ + "/stdout") + " 2> " + shell_quote(root_ + "/stderr");
    const int status = std::system(command.c_str());
    RunResult result;
    result.status = status != -1 && WIFEXITED(status) ? WEXITSTATUS(status) : -1;
    result.out = read_file(root_ + "/stdout");
    result.err = read_file(root_ + "/stderr");
    return result;
  }

  std::string root_;
  std::string work_;
};

bool is_missing_cell(const std::string& cell) { return cell.empty() || cell == "NA" || cell == "-999"; }

// Checks an estimates table against the cold-room input: one row per input row with the input's time,
// c_imputed = 1 exactly where the input cell is missing (empty, NA, or -999 given with --missing),
// c_filled equal to the input value where present and to c_est where missing (the estimate fills the
// gap: src/output_table.cpp), c_sd >= 0, and for the filter c_innov and c_z empty exactly where the
// value is missing. Mismatches are collected so that a failure prints a few lines, not thousands.
void check_against_input(const std::string& output, const std::string& input, const std::string& header,
                         bool filtered) {
  const std::vector<std::string> out_lines = lines_of(output);
  const std::vector<std::string> in_lines = lines_of(input);
  REQUIRE(out_lines.size() == in_lines.size());
  CHECK(out_lines[0] == header);
  const std::size_t columns = split(header, ',').size();
  const std::size_t per_channel = filtered ? 6 : 4;
  const std::size_t first_channel = 5;  // time + 2 states × (value, sd)
  std::size_t missing_seen = 0;
  std::vector<std::string> mismatches;
  auto expect = [&](bool ok, std::size_t line, std::size_t channel, const std::string& what) {
    if (!ok && mismatches.size() < 5)
      mismatches.push_back("line " + std::to_string(line) + ", channel " + std::to_string(channel) + ": " +
                           what);
  };
  for (std::size_t r = 1; r < in_lines.size(); ++r) {
    const std::vector<std::string> in = split(in_lines[r], ',');
    const std::vector<std::string> out = split(out_lines[r], ',');
    if (out.size() != columns) {
      expect(false, r + 1, 0, std::to_string(out.size()) + " fields");
      continue;
    }
    expect(out[0] == in[0], r + 1, 0, "time " + out[0] + " for " + in[0]);
    for (std::size_t c = 0; c < 2; ++c) {
      const std::size_t base = first_channel + c * per_channel;
      const std::string& cell = in[1 + c];
      const std::string& estimate = out[base];
      const std::string& filled = out[base + 2];
      const std::string& imputed = out[base + 3];
      expect(!out[base + 1].empty() && to_number(out[base + 1]) >= 0.0, r + 1, c, "sd " + out[base + 1]);
      if (is_missing_cell(cell)) {
        ++missing_seen;
        expect(imputed == "1", r + 1, c, "imputed " + imputed + " for missing " + cell);
        expect(filled == estimate, r + 1, c, "filled " + filled + " but estimate " + estimate);
        if (filtered)
          expect(out[base + 4].empty() && out[base + 5].empty(), r + 1, c, "innovation without a value");
      } else {
        expect(imputed == "0", r + 1, c, "imputed " + imputed + " for " + cell);
        expect(to_number(filled) == to_number(cell), r + 1, c, "filled " + filled + " for " + cell);
        if (filtered) expect(!out[base + 4].empty() && !out[base + 5].empty(), r + 1, c, "no innovation");
      }
    }
  }
  CHECK(mismatches == std::vector<std::string>{});
  // Probe B is off for 360 minutes (examples/cold-room/generate.py); probe A has 60 empty, NA or
  // -999 cells (counted in data.csv).
  CHECK(missing_seen == 420);
}

// A number cell rewritten with `digits` significant digits, as --digits writes it; empty stays empty.
std::string with_digits(const std::string& cell, int digits) {
  if (cell.empty()) return cell;
  char buffer[64];
  const auto result =
      std::to_chars(buffer, buffer + sizeof buffer, to_number(cell), std::chars_format::general, digits);
  return std::string(buffer, result.ptr);
}

// A one-state model with two noiseless channels reading the same state. After row 1 (only channel a,
// S = P = 1) the filter knows the state exactly (P = 0); row 2 predicts P = Q = 1 and observes both
// channels: S = [[1, 1], [1, 1]] + 0, which is singular (rank 1), so the step at line 3 fails.
const char* kSingularModel =
    R"({"observations": ["a", "b"], "A": 1, "C": [[1], [1]], "Q": 1, "R": [0, 0], "initial": {"mean": 0, "covariance": 1}})";
const char* kSingularData = "a,b\n0.5,\n1,1\n2,2\n";

// Three rows of the cold-room columns with two sentinels, -999 and -5.
const char* kSentinelData =
    "time,probe_a,probe_b,compressor\n"
    "1,-999,-18.1,0\n"
    "2,-17.9,-5,0\n"
    "3,-18.0,-18.2,1\n";

}  // namespace

TEST_SUITE("cli") {
  TEST_CASE("smooth on the cold-room example") {
    Sandbox box;
    box.copy_example();
    const RunResult result = box.run({"smooth", "-m", "model.json", "--missing", "-999", "data.csv"});
    CHECK(result.err == "");
    REQUIRE(result.status == 0);
    check_against_input(result.out, box.read("data.csv"), kSmoothHeader, false);
  }

  TEST_CASE("filter on the cold-room example") {
    Sandbox box;
    box.copy_example();
    const RunResult result = box.run({"filter", "-m", "model.json", "--missing", "-999", "data.csv"});
    CHECK(result.err == "");
    REQUIRE(result.status == 0);
    check_against_input(result.out, box.read("data.csv"), kFilterHeader, true);
  }

  TEST_CASE("the smoothed last row equals the filtered last row") {
    // The RTS backward pass starts from the filtered estimate at the last row (Rauch, Tung and
    // Striebel 1965), and both commands run the same forward arithmetic, so the text is identical.
    Sandbox box;
    box.copy_example();
    const RunResult smoothed = box.run({"smooth", "-m", "model.json", "--missing", "-999", "data.csv"});
    const RunResult filtered = box.run({"filter", "-m", "model.json", "--missing", "-999", "data.csv"});
    REQUIRE(smoothed.status == 0);
    REQUIRE(filtered.status == 0);
    const std::vector<std::string> s = split(lines_of(smoothed.out).back(), ',');
    const std::vector<std::string> f = split(lines_of(filtered.out).back(), ',');
    for (std::size_t i = 0; i < 5; ++i) CHECK(s[i] == f[i]);  // time and both states with their sd
    // The first row does change: the smoother uses the later data.
    CHECK(split(lines_of(smoothed.out)[1], ',')[1] != split(lines_of(filtered.out)[1], ',')[1]);
  }

  TEST_CASE("bad input exits with status 2 and one exact error line") {
    Sandbox box;
    box.copy_example();
    SUBCASE("a missing model file") {
      const RunResult result = box.run({"filter", "-m", "nope.json", "data.csv"});
      CHECK(result.status == 2);
      CHECK(result.err ==
            "statewise: error: nope.json: cannot open the model file (No such file or directory)\n");
      CHECK(result.out == "");
    }
    SUBCASE("a bad model file") {
      box.write("typo.json", R"({"obsevations": ["probe_a"]})");
      const RunResult result = box.run({"smooth", "-m", "typo.json", "data.csv"});
      CHECK(result.status == 2);
      CHECK(result.err ==
            "statewise: error: typo.json: obsevations: unknown key; did you mean \"observations\"?\n");
    }
    SUBCASE("a missing log file") {
      const RunResult result = box.run({"filter", "-m", "model.json", "nope.csv"});
      CHECK(result.status == 2);
      CHECK(result.err == "statewise: error: nope.csv: cannot open (No such file or directory)\n");
    }
    SUBCASE("a column the model names is not in the CSV") {
      box.write("typo.csv", "time,probe_a,probe_b,compresor\n1,1,2,0\n");
      const RunResult result = box.run({"smooth", "-m", "model.json", "typo.csv"});
      CHECK(result.status == 2);
      CHECK(result.err ==
            "statewise: error: typo.csv:1: no column \"compressor\" in the header; did you mean "
            "\"compresor\"?\n");
      CHECK(result.out == "");
    }
    SUBCASE("an unparsable cell") {
      box.write("bad.csv", "time,probe_a,probe_b,compressor\n1,-18,-18,0\n2,x2,-18,0\n");
      const RunResult result = box.run({"smooth", "-m", "model.json", "bad.csv"});
      CHECK(result.status == 2);
      CHECK(result.err ==
            "statewise: error: bad.csv:3:3: cannot read \"x2\" in column \"probe_a\" as a number\n");
      CHECK(result.out == "");
    }
    SUBCASE("a missing input value") {
      box.write("noinput.csv", "time,probe_a,probe_b,compressor\n1,-18,-18,\n");
      const RunResult result = box.run({"filter", "-m", "model.json", "noinput.csv"});
      CHECK(result.status == 2);
      CHECK(result.err ==
            "statewise: error: noinput.csv:2:11: the input \"compressor\" is missing; inputs are "
            "known quantities and must be given on every row\n");
    }
    SUBCASE("an empty CSV") {
      box.write("empty.csv", "");
      const RunResult result = box.run({"filter", "-m", "model.json", "empty.csv"});
      CHECK(result.status == 2);
      CHECK(result.err == "statewise: error: empty.csv: empty file; expected a header row\n");
      CHECK(result.out == "");
    }
    SUBCASE("an unknown flag") {
      const RunResult result = box.run({"filter", "-m", "model.json", "--bogus", "data.csv"});
      CHECK(result.status == 2);
      CHECK(result.err ==
            "statewise: error: The following argument was not expected: --bogus; see 'statewise "
            "--help'\n");
      CHECK(result.out == "");
    }
    SUBCASE("no model flag") {
      const RunResult result = box.run({"smooth", "data.csv"});
      CHECK(result.status == 2);
      CHECK(result.err == "statewise: error: --model is required; see 'statewise --help'\n");
    }
    SUBCASE("--digits out of range") {
      const RunResult result = box.run({"filter", "-m", "model.json", "--digits", "18", "data.csv"});
      CHECK(result.status == 2);
      CHECK(result.err ==
            "statewise: error: --digits: Value 18 not in range 0 to 17; see 'statewise --help'\n");
    }
    SUBCASE("a bad --delimiter") {
      for (const std::string delimiter : {"ab", "", "\""}) {
        const RunResult result =
            box.run({"filter", "-m", "model.json", "--delimiter", delimiter, "data.csv"});
        CHECK(result.status == 2);
        CHECK(result.err ==
              "statewise: error: --delimiter: expected one character such as \",\" \";\" \"|\" or "
              "\"tab\", got \"" +
                  delimiter + "\"\n");
        CHECK(result.out == "");
      }
    }
  }

  TEST_CASE("a singular innovation covariance exits with status 1 naming the row's file and line") {
    Sandbox box;
    box.write("singular.json", kSingularModel);
    box.write("singular.csv", kSingularData);
    for (const std::string command : {"filter", "smooth"}) {
      INFO(command);
      const RunResult result = box.run({command, "-m", "singular.json", "-o", "out.csv", "singular.csv"});
      CHECK(result.status == 1);
      CHECK(result.err == "statewise: error: singular.csv:3: " + kSingular + "\n");
      CHECK(box.entries() == std::set<std::string>{"singular.csv", "singular.json"});
    }
    // Through standard input the row is named <stdin>.
    const RunResult piped = box.run({"filter", "-m", "singular.json"}, "singular.csv");
    CHECK(piped.status == 1);
    CHECK(piped.err == "statewise: error: <stdin>:3: " + kSingular + "\n");
  }

  TEST_CASE("-o FILE: a failed run leaves FILE as it was and no temporary file behind") {
    Sandbox box;
    box.copy_example();
    box.write("bad.csv", "time,probe_a,probe_b,compressor\n1,-18,-18,0\n2,-18,-18,0\n3,oops,-18,0\n");
    box.write("singular.json", kSingularModel);
    box.write("singular.csv", kSingularData);
    const std::string original = "previous results\nkeep me\n";
    box.write("out.csv", original);
    const std::set<std::string> before = box.entries();
    for (const std::string command : {"filter", "smooth"}) {
      INFO(command);
      const RunResult bad_cell = box.run({command, "-m", "model.json", "-o", "out.csv", "bad.csv"});
      CHECK(bad_cell.status == 2);
      CHECK(bad_cell.out == "");
      CHECK(box.read("out.csv") == original);
      CHECK(box.entries() == before);

      const RunResult singular = box.run({command, "-m", "singular.json", "-o", "out.csv", "singular.csv"});
      CHECK(singular.status == 1);
      CHECK(box.read("out.csv") == original);
      CHECK(box.entries() == before);

      const RunResult bad_model = box.run({command, "-m", "nope.json", "-o", "out.csv", "data.csv"});
      CHECK(bad_model.status == 2);
      CHECK(box.read("out.csv") == original);
      CHECK(box.entries() == before);
    }
  }

  TEST_CASE("-o FILE: a successful run replaces FILE and keeps its permissions") {
    Sandbox box;
    box.copy_example();
    box.write("out.csv", "previous results\n");
    REQUIRE(chmod(box.path("out.csv").c_str(), 0640) == 0);
    for (const std::string command : {"filter", "smooth"}) {
      INFO(command);
      const RunResult to_stdout = box.run({command, "-m", "model.json", "--missing", "-999", "data.csv"});
      const RunResult to_file =
          box.run({command, "-m", "model.json", "--missing", "-999", "-o", "out.csv", "data.csv"});
      CHECK(to_file.status == 0);
      CHECK(to_file.out == "");
      CHECK(to_file.err == "");
      CHECK(box.read("out.csv") == to_stdout.out);
      // src/cli/output_file.cpp: a replaced file keeps the old file's permissions.
      struct stat info {};
      REQUIRE(stat(box.path("out.csv").c_str(), &info) == 0);
      CHECK((info.st_mode & 07777) == 0640);
      CHECK(box.entries() == std::set<std::string>{"data.csv", "model.json", "out.csv"});
    }
    // A new file is created too.
    const RunResult fresh =
        box.run({"smooth", "-m", "model.json", "--missing", "-999", "-o", "new.csv", "data.csv"});
    CHECK(fresh.status == 0);
    CHECK(lines_of(box.read("new.csv")).size() == 2881);
  }

  TEST_CASE("-o /dev/null writes nothing and leaves /dev/null a character device") {
    Sandbox box;
    box.copy_example();
    for (const std::string command : {"filter", "smooth"}) {
      const RunResult result = box.run({command, "-m", "model.json", "-o", "/dev/null", "data.csv"});
      CHECK(result.status == 0);
      CHECK(result.out == "");
      CHECK(result.err == "");
      struct stat info {};
      REQUIRE(stat("/dev/null", &info) == 0);
      CHECK(S_ISCHR(info.st_mode));
    }
    CHECK(box.entries() == std::set<std::string>{"data.csv", "model.json"});
  }

  TEST_CASE("-o naming the input file is refused with status 4 and the input is untouched") {
    Sandbox box;
    box.copy_example();
    const std::string data = box.read("data.csv");
    for (const std::string command : {"filter", "smooth"}) {
      INFO(command);
      const RunResult same = box.run({command, "-m", "model.json", "-o", "data.csv", "data.csv"});
      CHECK(same.status == 4);
      CHECK(same.err ==
            "statewise: error: data.csv: is the input file; refusing to overwrite the log with its own "
            "estimates\n");
      CHECK(same.out == "");
      // The same file under another name.
      const RunResult other_name = box.run({command, "-m", "model.json", "-o", "./data.csv", "data.csv"});
      CHECK(other_name.status == 4);
      CHECK(other_name.err ==
            "statewise: error: ./data.csv: is the input file; refusing to overwrite the log with "
            "its own estimates\n");
      // The log read through standard input (regression: "-" used to be exempt, so
      // `statewise filter -o data.csv < data.csv` replaced the log with its estimates).
      const RunResult piped = box.run({command, "-m", "model.json", "-o", "data.csv"}, "data.csv");
      CHECK(piped.status == 4);
      CHECK(piped.err ==
            "statewise: error: data.csv: is the input file; refusing to overwrite the log with its own "
            "estimates\n");
      CHECK(box.read("data.csv") == data);
      CHECK(box.entries() == std::set<std::string>{"data.csv", "model.json"});
    }
  }

  TEST_CASE("--report writes the documented JSON keys") {
    Sandbox box;
    box.copy_example();
    for (const std::string command : {"filter", "smooth"}) {
      INFO(command);
      const RunResult result =
          box.run({command, "-m", "model.json", "--missing", "-999", "--report", "report.json", "data.csv"});
      REQUIRE(result.status == 0);
      const nlohmann::json report = nlohmann::json::parse(box.read("report.json"));
      // Keys from include/statewise/report.h, include/statewise/diagnostics.h.
      CHECK(report.at("command") == command);
      CHECK(report.at("rows") == 2880);
      CHECK(report.at("log_likelihood").is_number_float());
      REQUIRE(report.at("channels").size() == 2);
      const auto& a = report.at("channels")[0];
      const auto& b = report.at("channels")[1];
      CHECK(a.at("name") == "probe_a");
      CHECK(b.at("name") == "probe_b");
      // Missing counts from examples/cold-room/generate.py (probe B is off for 6 hours) and the
      // data file itself (probe A: 60 empty, NA or -999 cells).
      CHECK(a.at("observed") == 2820);
      CHECK(a.at("missing") == 60);
      CHECK(b.at("observed") == 2520);
      CHECK(b.at("missing") == 360);
      for (const auto& channel : report.at("channels")) {
        CHECK(channel.at("innovation_mean").is_number());
        CHECK(channel.at("innovation_sd").get<double>() > 0.0);
        const double outside = channel.at("fraction_outside_1_96").get<double>();
        CHECK(outside >= 0.0);
        CHECK(outside <= 1.0);
      }
      const auto& nis = report.at("nis");
      CHECK(nis.at("mean").is_number());
      CHECK(nis.at("lower_95").get<double>() < nis.at("upper_95").get<double>());
      // The data are simulated from this very model, so the averaged NIS is near its expectation
      // sum(k_t)/N = (2820 + 2520) / rows with data; the 95% band is about ±4% of it.
      CHECK(nis.at("mean").get<double>() > 0.9 * nis.at("expected").get<double>());
      CHECK(nis.at("mean").get<double>() < 1.1 * nis.at("expected").get<double>());
      CHECK(nis.at("degrees_of_freedom") == 5340.0);
      CHECK(report.at("warnings") == nlohmann::json::array());
    }
  }

  TEST_CASE("--report: a channel without data gives a warning and null statistics") {
    Sandbox box;
    box.copy_example();
    box.write("no_b.csv", "time,probe_a,probe_b,compressor\n1,-18,,0\n2,-18.1,NA,0\n3,-17.9,,1\n");
    const RunResult result = box.run({"filter", "-m", "model.json", "--report", "report.json", "no_b.csv"});
    REQUIRE(result.status == 0);
    const nlohmann::json report = nlohmann::json::parse(box.read("report.json"));
    CHECK(report.at("rows") == 3);
    const auto& b = report.at("channels")[1];
    CHECK(b.at("observed") == 0);
    CHECK(b.at("missing") == 3);
    CHECK(b.at("innovation_mean").is_null());  // NaN is written as null (include/statewise/report.h)
    CHECK(b.at("innovation_sd").is_null());
    CHECK(b.at("fraction_outside_1_96").is_null());
    CHECK(report.at("warnings") ==
          nlohmann::json::array(
              {"channel \"probe_b\" has no observed values; its estimates come from the model alone"}));
  }

  TEST_CASE("--report is not written when the run fails") {
    Sandbox box;
    box.write("singular.json", kSingularModel);
    box.write("singular.csv", kSingularData);
    const RunResult result =
        box.run({"smooth", "-m", "singular.json", "--report", "report.json", "singular.csv"});
    CHECK(result.status == 1);
    CHECK(box.entries() == std::set<std::string>{"singular.csv", "singular.json"});
  }

  TEST_CASE("--digits 4 writes every number with 4 significant digits") {
    Sandbox box;
    box.copy_example();
    for (const std::string command : {"filter", "smooth"}) {
      INFO(command);
      const RunResult exact = box.run({command, "-m", "model.json", "--missing", "-999", "data.csv"});
      const RunResult rounded =
          box.run({command, "-m", "model.json", "--missing", "-999", "--digits", "4", "data.csv"});
      REQUIRE(exact.status == 0);
      REQUIRE(rounded.status == 0);
      const std::vector<std::string> exact_lines = lines_of(exact.out);
      const std::vector<std::string> rounded_lines = lines_of(rounded.out);
      REQUIRE(exact_lines.size() == rounded_lines.size());
      CHECK(rounded_lines[0] == exact_lines[0]);
      // The default output reads back to the exact doubles, so rounding it gives --digits 4's text.
      for (std::size_t r = 1; r < exact_lines.size(); ++r) {
        const std::vector<std::string> e = split(exact_lines[r], ',');
        const std::vector<std::string> d = split(rounded_lines[r], ',');
        if (d.size() != e.size() || d[0] != e[0]) FAIL_CHECK("line ", r + 1, ": ", rounded_lines[r]);
        for (std::size_t i = 1; i < std::min(e.size(), d.size()); ++i)
          if (d[i] != with_digits(e[i], 4))
            FAIL_CHECK("line ", r + 1, " field ", i + 1, ": ", d[i], " from ", e[i]);
      }
    }
  }

  TEST_CASE("--digits 4: a value worked out by hand") {
    // Row 1 of the sentinel data without --missing: the prior N(-18, 4) on air_temp meets the two
    // probes -999 (variance 0.01) and -18.1 (variance 0.04). Precision 1/4 + 1/0.01 + 1/0.04 = 125.25;
    // mean (-18/4 - 999/0.01 - 18.1/0.04) / 125.25 = -100357 / 125.25 = -801.2535; sd 1/sqrt(125.25) =
    // 0.0893534. The unobserved warming_rate keeps its prior N(0, 0.01): 0 and sd 0.1.
    Sandbox box;
    box.copy_example();
    box.write("sentinel.csv", kSentinelData);
    const RunResult result = box.run({"filter", "-m", "model.json", "--digits", "4", "sentinel.csv"});
    REQUIRE(result.status == 0);
    const std::vector<std::string> row = split(lines_of(result.out)[1], ',');
    CHECK(row[1] == "-801.3");
    CHECK(row[2] == "0.08935");
    CHECK(row[3] == "0");
    CHECK(row[4] == "0.1");
    CHECK(row[7] == "-999");  // probe_a_filled: -999 is a value without --missing
  }

  TEST_CASE("--missing marks extra cell texts as missing and is repeatable") {
    Sandbox box;
    box.copy_example();
    box.write("sentinel.csv", kSentinelData);
    // Columns of the filter output: 8 probe_a_imputed, 14 probe_b_imputed (0-based), 7 and 13 filled.
    auto imputed_flags = [](const std::string& output) {
      std::string flags;
      for (std::size_t r = 1; r < lines_of(output).size(); ++r) {
        const std::vector<std::string> f = split(lines_of(output)[r], ',');
        flags += f[8] + f[14];
      }
      return flags;
    };
    const RunResult none = box.run({"filter", "-m", "model.json", "sentinel.csv"});
    REQUIRE(none.status == 0);
    CHECK(imputed_flags(none.out) == "000000");
    CHECK(split(lines_of(none.out)[1], ',')[7] == "-999");

    const RunResult one = box.run({"filter", "-m", "model.json", "--missing", "-999", "sentinel.csv"});
    REQUIRE(one.status == 0);
    CHECK(imputed_flags(one.out) == "100000");

    const RunResult equals_form = box.run({"filter", "-m", "model.json", "--missing=-999", "sentinel.csv"});
    CHECK(equals_form.out == one.out);

    const RunResult two =
        box.run({"filter", "-m", "model.json", "--missing", "-999", "--missing", "-5", "sentinel.csv"});
    REQUIRE(two.status == 0);
    CHECK(imputed_flags(two.out) == "100100");
    CHECK(two.err == "");
  }

  TEST_CASE("standard input: with - and by default") {
    Sandbox box;
    box.copy_example();
    const RunResult from_file = box.run({"smooth", "-m", "model.json", "--missing", "-999", "data.csv"});
    REQUIRE(from_file.status == 0);
    for (const std::string command : {"filter", "smooth"}) {
      INFO(command);
      const RunResult named = box.run({command, "-m", "model.json", "--missing", "-999", "data.csv"});
      const RunResult dash = box.run({command, "-m", "model.json", "--missing", "-999", "-"}, "data.csv");
      const RunResult implicit = box.run({command, "-m", "model.json", "--missing", "-999"}, "data.csv");
      CHECK(dash.status == 0);
      CHECK(implicit.status == 0);
      CHECK(dash.out == named.out);
      CHECK(implicit.out == named.out);
    }
    // Through a pipe, which delivers the log in pieces.
    const RunResult piped = box.run_piped({"smooth", "-m", "model.json", "--missing", "-999"}, "data.csv");
    CHECK(piped.status == 0);
    CHECK(piped.out == from_file.out);
    // Messages name standard input <stdin>.
    box.write("bad.csv", "time,probe_a,probe_b,compressor\n1,-18,?,0\n");
    const RunResult bad = box.run({"filter", "-m", "model.json"}, "bad.csv");
    CHECK(bad.status == 2);
    CHECK(bad.err == "statewise: error: <stdin>:2:7: cannot read \"?\" in column \"probe_b\" as a number\n");
  }

  TEST_CASE("--delimiter semicolon and tab read the same log and the output stays comma-separated") {
    Sandbox box;
    box.copy_example();
    const std::string data = box.read("data.csv");
    std::string semicolons = data, tabs = data;
    for (char& c : semicolons)
      if (c == ',') c = ';';
    for (char& c : tabs)
      if (c == ',') c = '\t';
    box.write("data_semicolon.csv", semicolons);
    box.write("data.tsv", tabs);
    const RunResult commas = box.run({"smooth", "-m", "model.json", "--missing", "-999", "data.csv"});
    REQUIRE(commas.status == 0);
    const RunResult semicolon = box.run(
        {"smooth", "-m", "model.json", "--missing", "-999", "--delimiter", ";", "data_semicolon.csv"});
    CHECK(semicolon.status == 0);
    CHECK(semicolon.out == commas.out);
    // "--delimiter: one character, or tab" (the option's help); "\t" is accepted too (src/cli).
    for (const std::string tab : {"\t", "tab", "\\t"}) {
      INFO("--delimiter '", tab, "'");
      const RunResult tabbed =
          box.run({"smooth", "-m", "model.json", "--missing", "-999", "--delimiter", tab, "data.tsv"});
      CHECK(tabbed.status == 0);
      CHECK(tabbed.out == commas.out);
    }
    // Read with the wrong delimiter the header is one column, so the model's columns are not found.
    const RunResult wrong = box.run({"smooth", "-m", "model.json", "data_semicolon.csv"});
    CHECK(wrong.status == 2);
    CHECK(wrong.err ==
          "statewise: error: data_semicolon.csv:1: no column \"probe_a\" in the header; the columns are "
          "\"time;probe_a;probe_b;compressor\"\n");
  }
}
