// `statewise filter --by` and `smooth --by`: one table holding several sensors' logs, one run per
// group, run through the binary.

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <sstream>
#include <string>
#include <vector>

#include "cli_run.h"

using statewise::testing::CommandResult;
using statewise::testing::run_statewise;
using statewise::testing::ScratchFolder;

namespace {

// A random walk seen by one probe (invented numbers), with a time column in seconds.
const char* kModel = R"({
  "states": ["level"], "observations": ["probe"], "time": {"column": "time"},
  "A": 1, "C": 1, "Q": 0.05, "R": 0.2, "initial": {"mean": 10, "covariance": 4}
})";

// Three sensors, interleaved as a logger writes them (all sensors per time), with a gap in sensor
// "b", a missing value and a name that needs quoting in CSV. Invented numbers.
const char* kInterleaved =
    "time,sensor,probe\n"
    "0,a,10.1\n"
    "0,b,20.3\n"
    "0,\"c,north\",5.0\n"
    "60,a,10.4\n"
    "60,\"c,north\",\n"
    "120,a,9.8\n"
    "120,b,21.0\n"
    "120,\"c,north\",5.6\n"
    "180,b,20.7\n"
    "180,a,10.0\n";

struct Row {
  std::string group;  // the sensor field as written (with its quotes)
  std::string line;   // the line without the sensor field
};

// Splits "time,sensor,probe" lines: the sensor is the second field, quoted or not.
std::vector<Row> split_rows(const std::string& table) {
  std::vector<Row> rows;
  std::istringstream in(table);
  std::string line;
  std::getline(in, line);  // header
  while (std::getline(in, line)) {
    const std::size_t first = line.find(',');
    const std::size_t second =
        line[first + 1] == '"' ? line.find('"', first + 2) + 1 : line.find(',', first + 1);
    rows.push_back({line.substr(first + 1, second - first - 1), line.substr(0, first) + line.substr(second)});
  }
  return rows;
}

// The groups in the order of their first row, each with its log as a separate CSV file's text.
std::vector<std::pair<std::string, std::string>> logs_per_group(const std::string& table) {
  std::vector<std::pair<std::string, std::string>> logs;
  for (const Row& row : split_rows(table)) {
    auto it = logs.begin();
    while (it != logs.end() && it->first != row.group) ++it;
    if (it == logs.end()) it = logs.insert(logs.end(), {row.group, "time,probe\n"});
    it->second += row.line + "\n";
  }
  return logs;
}

// The same rows with each group's rows together (groups in the order of their first row).
std::string contiguous(const std::string& table) {
  std::string out = table.substr(0, table.find('\n') + 1);
  for (const auto& [group, log] : logs_per_group(table)) {
    std::istringstream in(log);
    std::string line;
    std::getline(in, line);
    while (std::getline(in, line)) {
      const std::size_t comma = line.find(',');
      out += line.substr(0, comma) + "," + group + line.substr(comma) + "\n";
    }
  }
  return out;
}

// The data rows of a table statewise wrote, each with `group,` in front (the header is left out).
std::string rows_of_group(const std::string& group, const std::string& table) {
  std::string out, line;
  std::istringstream lines(table);
  std::getline(lines, line);
  while (std::getline(lines, line)) out += group + "," + line + "\n";
  return out;
}

}  // namespace

TEST_CASE("--by gives each group exactly the rows of a run on that group alone") {
  // First principles: the groups are independent runs of the model, so each group's rows must be
  // the rows statewise writes for that group's log on its own, with the group column in front.
  ScratchFolder folder;
  folder.write("model.json", kModel);
  folder.write("all.csv", kInterleaved);
  for (const std::string command : {"filter", "smooth"}) {
    INFO(command);
    std::string expected;
    bool first = true;
    for (const auto& [group, log] : logs_per_group(kInterleaved)) {
      folder.write("one.csv", log);
      const CommandResult alone = run_statewise(folder, command + " -m model.json one.csv");
      REQUIRE(alone.status == 0);
      if (first) expected += "sensor," + alone.out.substr(0, alone.out.find('\n') + 1);
      first = false;
      expected += rows_of_group(group, alone.out);
    }
    const CommandResult grouped = run_statewise(folder, command + " -m model.json --by sensor all.csv");
    CHECK(grouped.status == 0);
    CHECK(grouped.err == "");
    CHECK(grouped.out == expected);
  }
}

TEST_CASE("--by writes the same table and report whatever the number of threads") {
  // First principles: the groups are independent and written in the order of their first row.
  ScratchFolder folder;
  folder.write("model.json", kModel);
  std::string table = "time,sensor,probe\n";
  for (int t = 0; t < 40; ++t)
    for (int g = 0; g < 25; ++g)
      table += std::to_string(60 * t) + ",s" + std::to_string((g * 7) % 25) + "," +
               std::to_string(10 + g + ((t * 13 + g * 5) % 11) * 0.1) + "\n";
  folder.write("all.csv", table);
  for (const std::string command : {"filter", "smooth"}) {
    INFO(command);
    const CommandResult one =
        run_statewise(folder, command + " -m model.json --by sensor --threads 1 all.csv --report r1.json");
    REQUIRE(one.status == 0);
    CHECK(std::count(one.out.begin(), one.out.end(), '\n') == 1 + 40 * 25);
    for (const std::string threads : {"2", "4"}) {
      INFO(threads);
      const CommandResult many =
          run_statewise(folder, command + " -m model.json --by sensor --threads " + threads + " all.csv --report r.json");
      CHECK(many.status == 0);
      CHECK(many.out == one.out);
      CHECK(folder.read("r.json") == folder.read("r1.json"));
    }
  }
}

TEST_CASE("--by: interleaved and contiguous tables give the same rows") {
  // First principles: a group's rows are the same log wherever they sit in the table.
  ScratchFolder folder;
  folder.write("model.json", kModel);
  folder.write("interleaved.csv", kInterleaved);
  folder.write("contiguous.csv", contiguous(kInterleaved));
  REQUIRE(folder.read("contiguous.csv") != kInterleaved);
  for (const std::string command : {"filter", "smooth"}) {
    INFO(command);
    const CommandResult a = run_statewise(folder, command + " -m model.json --by sensor interleaved.csv");
    const CommandResult b = run_statewise(folder, command + " -m model.json --by sensor contiguous.csv");
    CHECK(a.status == 0);
    CHECK(b.status == 0);
    CHECK(a.out == b.out);
  }
}

TEST_CASE("--by: a failing group is reported and the others are written") {
  ScratchFolder folder;
  folder.write("model.json", kModel);
  // Sensor b's clock goes back at line 6.
  folder.write("all.csv",
               "time,sensor,probe\n"
               "0,a,10.1\n"
               "0,b,20.3\n"
               "60,a,10.4\n"
               "60,b,20.1\n"
               "30,b,20.0\n"
               "120,a,9.8\n");
  folder.write("a.csv", "time,probe\n0,10.1\n60,10.4\n120,9.8\n");
  const CommandResult alone = run_statewise(folder, "filter -m model.json a.csv");
  REQUIRE(alone.status == 0);
  const std::string expected_a = rows_of_group("a", alone.out);

  const CommandResult result =
      run_statewise(folder, "filter -m model.json --by sensor all.csv -o out.csv --report r.json");
  CHECK(result.status == 6);
  CHECK(result.err ==
        "statewise: error: all.csv:6:1: the time \"30\" is earlier than \"60\" on line 5; expected times in "
        "non-decreasing order (--sort sorts the rows first) [group \"b\"]\n");
  const std::string out = folder.read("out.csv");
  CHECK(out.substr(out.find('\n') + 1) == expected_a);
  const std::string report = folder.read("r.json");
  CHECK(report.find("\"group\": \"b\",\n      \"status\": \"failed\",\n      \"exit_status\": 2,") != std::string::npos);
  CHECK(report.find("\"group\": \"a\",\n      \"status\": \"ok\",\n      \"command\": \"filter\",") !=
        std::string::npos);
  CHECK(report.find("\"summary\": {\n    \"groups\": 2,\n    \"ok\": 1,\n    \"failed\": 1\n  }") != std::string::npos);

  SUBCASE("--fail-fast stops with the group's own status and writes nothing") {
    const CommandResult stopped =
        run_statewise(folder, "filter -m model.json --by sensor --fail-fast all.csv -o stopped.csv --report s.json");
    CHECK(stopped.status == 2);
    CHECK(stopped.err == result.err);
    CHECK_FALSE(std::filesystem::exists(folder.path("stopped.csv")));
    CHECK_FALSE(std::filesystem::exists(folder.path("s.json")));
  }
}

TEST_CASE("--by: a group whose numbers break down fails alone with status 1 in the report") {
  // With R = 0 a row where both channels see the one state has a singular C P C' + R (it is
  // P [[1, 1], [1, 1]]); rows with one channel are fine. Only group "bad" has such a row.
  ScratchFolder folder;
  folder.write("model.json",
               R"({"observations": ["a", "b"], "A": 1, "C": [[1], [1]], "Q": 1, "R": [0, 0], )"
               R"("initial": {"mean": 0, "covariance": 1}})");
  folder.write("all.csv", "id,a,b\ngood,0.5,\nbad,0.5,\ngood,1,\nbad,1,1\n");
  for (const std::string command : {"filter", "smooth"}) {
    INFO(command);
    const CommandResult result = run_statewise(folder, command + " -m model.json --by id all.csv");
    CHECK(result.status == 6);
    CHECK(result.err ==
          "statewise: error: all.csv:5: the innovation covariance C P C' + R of the observed channels is singular "
          "(not positive definite); check that R (or Q and the initial covariance) are not zero where a channel is "
          "observed [group \"bad\"]\n");
    CHECK(std::count(result.out.begin(), result.out.end(), '\n') == 3);  // header and good's two rows
  }
}

TEST_CASE("--by: bad group columns are refused with status 2 naming them") {
  ScratchFolder folder;
  folder.write("model.json", kModel);
  folder.write("all.csv", kInterleaved);
  folder.write("empty.csv", "time,sensor,probe\n0,a,1\n0,,2\n");
  const struct {
    const char* arguments;
    const char* error;
  } cases[] = {
      {"filter -m model.json --by sensors all.csv",  // a column the header lacks
       "all.csv:1: no column \"sensors\" in the header for --by; did you mean \"sensor\"?"},
      {"smooth -m model.json --by probe all.csv",  // a column the model reads
       "--by: \"probe\" is a channel of the model; --by needs a column the model does not read"},
      {"filter -m model.json --by sensor empty.csv",  // a row with an empty group name
       "empty.csv:3:3: the group column \"sensor\" (--by) is empty; every row needs the name of its group"},
      {"filter -m model.json --by sensor --plot p.html all.csv",
       "--plot: draws one log and cannot be combined with --by; run the group to plot on its own"},
  };
  for (const auto& c : cases) {
    INFO(c.arguments);
    const CommandResult result = run_statewise(folder, c.arguments);
    CHECK(result.status == 2);
    CHECK(result.err == std::string("statewise: error: ") + c.error + "\n");
    CHECK(result.out == "");
  }
}

TEST_CASE("--by with --format jsonl and tsv puts the group column first") {
  ScratchFolder folder;
  folder.write("model.json", kModel);
  folder.write("all.csv", "time,sensor,probe\n0,\"x\ty\",1\n");
  const CommandResult jsonl = run_statewise(folder, "smooth -m model.json --by sensor --format jsonl all.csv");
  CHECK(jsonl.status == 0);
  CHECK(jsonl.out.rfind("{\"sensor\":\"x\\ty\",\"time\":\"0\",", 0) == 0);
  const CommandResult tsv = run_statewise(folder, "smooth -m model.json --by sensor --format tsv all.csv");
  CHECK(tsv.status == 0);
  CHECK(tsv.out.rfind("sensor\ttime\tlevel\t", 0) == 0);
  CHECK(tsv.out.find("\nx\\ty\t0\t") != std::string::npos);  // a tab in text is written \t in TSV
}

TEST_CASE("--no-header leaves out the header line and a header-only table gives only the header") {
  ScratchFolder folder;
  folder.write("model.json", kModel);
  folder.write("all.csv", kInterleaved);
  folder.write("empty.csv", "time,sensor,probe\n");
  const CommandResult full = run_statewise(folder, "filter -m model.json --by sensor all.csv");
  const CommandResult bare = run_statewise(folder, "filter -m model.json --by sensor --no-header all.csv");
  const CommandResult header = run_statewise(folder, "filter -m model.json --by sensor empty.csv");
  CHECK(full.status == 0);
  CHECK(bare.status == 0);
  CHECK(header.status == 0);
  CHECK(header.out + bare.out == full.out);
  folder.write("one.csv", "time,probe\n0,1\n");
  const CommandResult single = run_statewise(folder, "filter -m model.json --no-header one.csv");
  CHECK(single.out.rfind("0,", 0) == 0);
  // Regression: the plot reads the table's header, which --no-header leaves out of the output only.
  CHECK(run_statewise(folder, "filter -m model.json --no-header --plot bare.html one.csv").status == 0);
  CHECK(run_statewise(folder, "filter -m model.json --plot full.html one.csv").status == 0);
  CHECK(folder.read("bare.html") == folder.read("full.html"));
}

namespace {

// The data rows of a table written by `filter --by sensor`, per group in the order they appear (the
// group is the first field, quoted when it holds a comma). The header lines are left out.
std::vector<std::pair<std::string, std::vector<std::string>>> rows_per_group(const std::string& table) {
  std::vector<std::pair<std::string, std::vector<std::string>>> groups;
  std::istringstream in(table);
  std::string line;
  while (std::getline(in, line)) {
    if (line.rfind("sensor,", 0) == 0) continue;  // a header
    const std::size_t end = line[0] == '"' ? line.find('"', 1) + 1 : line.find(',');
    const std::string group = line.substr(0, end);
    auto it = groups.begin();
    while (it != groups.end() && it->first != group) ++it;
    if (it == groups.end()) it = groups.insert(groups.end(), {group, {}});
    it->second.push_back(line);
  }
  std::sort(groups.begin(), groups.end());
  return groups;
}

}  // namespace

TEST_CASE("--by with --state: each group resumes where it stopped") {
  // First principles: one uninterrupted run is the reference. Split by time into three logs fed to
  // cron-like runs with --state --append, every group's rows must be exactly those of the
  // uninterrupted run, and a state entry per group carries each one across runs (group b has no row
  // in the middle part and resumes from its own saved time).
  ScratchFolder folder;
  folder.write("model.json", kModel);
  folder.write("all.csv", kInterleaved);
  const CommandResult whole = run_statewise(folder, "filter -m model.json --by sensor all.csv");
  REQUIRE(whole.status == 0);

  const std::string header = "time,sensor,probe\n";
  folder.write("part1.csv", header + "0,a,10.1\n0,b,20.3\n0,\"c,north\",5.0\n");
  folder.write("part2.csv", header + "60,a,10.4\n60,\"c,north\",\n");
  // The third part repeats the rows before it, as a growing log would: they are skipped.
  folder.write("part3.csv", kInterleaved);
  for (const char* part : {"part1.csv", "part2.csv", "part3.csv"}) {
    const CommandResult run = run_statewise(
        folder, std::string("filter -m model.json --by sensor --state state.json --append -o out.csv ") + part);
    INFO(part << ": " << run.err);
    REQUIRE(run.status == 0);
  }
  const std::string appended = folder.read("out.csv");
  CHECK(appended.rfind(whole.out.substr(0, whole.out.find('\n') + 1), 0) == 0);  // one header, first
  CHECK(rows_per_group(appended) == rows_per_group(whole.out));
  const std::string state = folder.read("state.json");
  CHECK(state.find("\"a\"") != std::string::npos);
  CHECK(state.find("\"c,north\"") != std::string::npos);

  // A state written with --by is refused by a run without it (other settings), naming --by.
  const CommandResult plain = run_statewise(folder, "filter -m model.json --state state.json --append -o out.csv all.csv");
  CHECK(plain.status == 2);
  CHECK(plain.err.find("by=sensor") != std::string::npos);
}
