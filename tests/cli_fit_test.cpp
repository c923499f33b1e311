// End-to-end checks of `statewise fit` and `statewise expand` through the built binary
// (STATEWISE_BINARY): a fitted model file must run unchanged through `smooth`.

#include <doctest/doctest.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cstdlib>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>

namespace {

struct Folder {
  std::string path;
  Folder() {
    char pattern[] = "/tmp/statewise-fit-test-XXXXXX";
    path = mkdtemp(pattern);
  }
  ~Folder() { (void)std::system(("rm -rf '" + path + "'").c_str()); }
  std::string file(const std::string& name) const { return path + "/" + name; }
};

void write(const std::string& path, const std::string& text) { std::ofstream(path) << text; }

std::string read(const std::string& path) {
  std::ifstream file(path);
  std::ostringstream text;
  text << file.rdbuf();
  return text.str();
}

// Runs the binary with `arguments`; standard output and error go to files in `folder`.
int run(const Folder& folder, const std::string& arguments) {
  const std::string command = std::string(STATEWISE_BINARY) + " " + arguments + " >'" +
                              folder.file("stdout") + "' 2>'" + folder.file("stderr") + "'";
  const int status = std::system(command.c_str());
  return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

const char* kLevelModel = R"({
  "description": "Nile: a level seen with noise",
  "observations": ["flow"],
  "time": {"column": "year"},
  "components": [{"type": "level", "variance": "estimate"}],
  "R": "estimate"
})";

const std::string kNile = STATEWISE_TEST_DATA_DIR "/nile.csv";

}  // namespace

TEST_CASE("cli: a fitted model file runs unchanged through smooth") {
  Folder folder;
  write(folder.file("model.json"), kLevelModel);
  REQUIRE(run(folder, "fit -m '" + folder.file("model.json") + "' '" + kNile + "' -o '" +
                          folder.file("fitted.json") + "' --report '" + folder.file("report.json") + "'") ==
          0);
  const auto report = nlohmann::json::parse(read(folder.file("report.json")));
  CHECK(report["converged"] == true);
  CHECK(report["parameters"] == 2);
  CHECK(report["diffuse_states"] == 1);
  CHECK(report["observed_values"] == 100);
  // AIC and BIC from the reported log-likelihood: -2 log L + 2 (k + q), -2 log L + (k + q) log N.
  const double log_likelihood = report["log_likelihood"];
  CHECK(report["aic"].get<double>() == doctest::Approx(-2 * log_likelihood + 2 * 3));
  CHECK(report["bic"].get<double>() == doctest::Approx(-2 * log_likelihood + 3 * std::log(100.0)));
  CHECK(report["estimates"][0]["name"] == "components[0].variance");
  CHECK(report["estimates"][0]["standard_error"].is_number());
  CHECK(report["iterations"]["mle"].get<int>() > 0);
  CHECK(read(folder.file("fitted.json")).find("\"description\": \"Nile: a level seen with noise\"") !=
        std::string::npos);

  REQUIRE(run(folder, "smooth -m '" + folder.file("fitted.json") + "' '" + kNile + "' -o '" +
                          folder.file("smoothed.csv") + "'") == 0);
  const std::string smoothed = read(folder.file("smoothed.csv"));
  CHECK(std::count(smoothed.begin(), smoothed.end(), '\n') == 101);
  CHECK(smoothed.rfind("year,level,level_sd,flow_est,flow_sd,flow_filled,flow_imputed\n", 0) == 0);
  CHECK(smoothed.find("inf") == std::string::npos);
  CHECK(smoothed.find("nan") == std::string::npos);
  // filter shows the unknown initial level's unbounded spread before the first value only.
  REQUIRE(run(folder, "filter -m '" + folder.file("fitted.json") + "' '" + kNile + "'") == 0);
  CHECK(read(folder.file("stdout")).find("inf") == std::string::npos);  // resolved by the first value
}

TEST_CASE("cli: filter refuses a model that still has markers, naming the key and the command") {
  Folder folder;
  write(folder.file("model.json"), kLevelModel);
  CHECK(run(folder, "filter -m '" + folder.file("model.json") + "' '" + kNile + "'") == 2);
  CHECK(read(folder.file("stderr")) ==
        "statewise: error: " + folder.file("model.json") +
            ": components[0].variance: is marked \"estimate\"; estimate it first with `statewise fit -m " +
            folder.file("model.json") + " data.csv -o fitted.json` and use the fitted model file\n");
}

TEST_CASE("cli: several models are ranked by AIC in one table") {
  // Durbin and Koopman (2012), section 2.10 and 3.2.1: on the Nile data the local level model beats
  // the local linear trend, whose slope variance goes to zero.
  Folder folder;
  write(folder.file("level.json"), kLevelModel);
  write(folder.file("trend.json"), R"({"observations": ["flow"], "R": "estimate",
    "components": [{"type": "trend", "level_variance": "estimate", "slope_variance": "estimate"}]})");
  REQUIRE(run(folder, "fit -m '" + folder.file("trend.json") + "' -m '" + folder.file("level.json") + "' '" +
                          kNile + "'") == 0);
  const std::string table = read(folder.file("stdout"));
  std::istringstream lines(table);
  std::string header, first, second;
  std::getline(lines, header);
  std::getline(lines, first);
  std::getline(lines, second);
  CHECK(header.rfind("rank  model", 0) == 0);
  CHECK(first.rfind("1     " + folder.file("level.json"), 0) == 0);
  CHECK(second.rfind("2     " + folder.file("trend.json"), 0) == 0);
  CHECK(read(folder.file("stderr")).find("components[0].slope_variance went to zero") != std::string::npos);
}

TEST_CASE("cli: expand prints the plain-matrix model") {
  Folder folder;
  write(folder.file("model.json"), R"({"observations": ["flow"], "R": 100,
    "components": [{"type": "trend", "level_variance": 1, "slope_variance": 0}]})");
  REQUIRE(run(folder, "expand -m '" + folder.file("model.json") + "'") == 0);
  const auto expanded = nlohmann::json::parse(read(folder.file("stdout")));
  CHECK(expanded["states"] == nlohmann::json({"level", "slope"}));
  CHECK(expanded["A"] == nlohmann::json::parse("[[1.0, 1.0], [0.0, 1.0]]"));
  CHECK(expanded["initial"]["diffuse"] == true);
  CHECK_FALSE(expanded.contains("components"));
}
