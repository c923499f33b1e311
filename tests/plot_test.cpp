// Checks of the plot report: the page is well-formed XML (by the checker in xml_check.h and, when it is
// installed, by libxml2's xmllint), fetches nothing, and what it draws is the table's data: every
// measured point, the estimate, the band, imputed stretches, rejected values, the histogram counts and
// the autocorrelations map back to the CSV's numbers through the axes.

#include "statewise/plot.h"

#include <doctest/doctest.h>

#include <charconv>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "statewise/statistics.h"
#include "xml_check.h"

using namespace statewise;
using statewise::testing::XmlChecker;
using statewise::testing::XmlElement;

namespace {

std::string number(double value) {
  if (std::isnan(value)) return "";
  char buffer[64];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value);
  return std::string(buffer, result.ptr);
}

// An invented estimates table: one state, one channel `y`, 40 rows at times 0, 10, 20, ...; rows 10–13
// missing, rows 20 and 25 rejected (z = +7.5 and -6), the rest measured.
struct SampleTable {
  std::vector<double> time, estimate, sd, filled, z;
  std::vector<int> imputed, rejected;
  std::string csv;
};

SampleTable sample_table(const std::string& channel = "y") {
  SampleTable s;
  s.csv = "time,level,level_sd," + channel + "_est," + channel + "_sd," + channel + "_filled," + channel +
          "_imputed," + channel + "_rejected," + channel + "_innov," + channel + "_z\n";
  for (int t = 0; t < 40; ++t) {
    const double estimate = 3.0 * std::sin(t / 5.0), sd = 0.2 + 0.01 * t;
    const bool missing = t >= 10 && t <= 13, rejected = t == 20 || t == 25;
    const double measured = estimate + 0.3 * std::cos(1.7 * t);
    const double z = rejected ? (t == 20 ? 7.5 : -6.0) : missing ? std::nan("") : 1.5 * std::cos(2.3 * t);
    s.time.push_back(10.0 * t);
    s.estimate.push_back(estimate);
    s.sd.push_back(sd);
    s.filled.push_back(missing || rejected ? estimate : measured);
    s.imputed.push_back(missing || rejected);
    s.rejected.push_back(rejected);
    s.z.push_back(z);
    s.csv += number(10.0 * t) + "," + number(estimate) + "," + number(sd) + "," + number(estimate) + "," +
             number(sd) + "," + number(s.filled.back()) + "," + (s.imputed.back() ? "1" : "0") + "," +
             (rejected ? "1" : "0") + "," + number(z * 0.5) + "," + number(z) + "\n";
  }
  return s;
}

std::string plot(const std::string& csv, PlotOptions options = {}) {
  CsvReader reader = CsvReader::from_string(csv, "table.csv", CsvOptions{});
  return write_plot_html(reader, options);
}

bool has_class(const XmlElement& e, const std::string& name) {
  const auto it = e.attributes.find("class");
  return it != e.attributes.end() && it->second == name;
}

bool inside(const std::vector<XmlElement>& elements, std::size_t index, std::size_t ancestor) {
  for (int p = elements[index].parent; p >= 0; p = elements[static_cast<std::size_t>(p)].parent)
    if (static_cast<std::size_t>(p) == ancestor) return true;
  return false;
}

std::vector<std::size_t> find(const std::vector<XmlElement>& elements, const std::string& name,
                              const std::string& css_class = "") {
  std::vector<std::size_t> found;
  for (std::size_t i = 0; i < elements.size(); ++i)
    if (elements[i].name == name && (css_class.empty() || has_class(elements[i], css_class)))
      found.push_back(i);
  return found;
}

double attribute(const XmlElement& e, const std::string& name) { return std::stod(e.attributes.at(name)); }

std::vector<std::pair<double, double>> points(const std::string& text) {
  std::vector<std::pair<double, double>> result;
  std::istringstream in(text);
  std::string pair;
  while (in >> pair) {
    const std::size_t comma = pair.find(',');
    result.emplace_back(std::stod(pair.substr(0, comma)), std::stod(pair.substr(comma + 1)));
  }
  return result;
}

// The data-to-page transform of a time panel, read from its data- attributes, and back.
struct Axes {
  double x_min, x_max, y_min, y_max, left, top, width, height;
  explicit Axes(const XmlElement& g)
      : x_min(attribute(g, "data-x-min")),
        x_max(attribute(g, "data-x-max")),
        y_min(attribute(g, "data-y-min")),
        y_max(attribute(g, "data-y-max")),
        left(attribute(g, "data-left")),
        top(attribute(g, "data-top")),
        width(attribute(g, "data-width")),
        height(attribute(g, "data-height")) {}
  double time(double px) const { return x_min + (px - left) / width * (x_max - x_min); }
  double value(double py) const { return y_min + (top + height - py) / height * (y_max - y_min); }
  // Coordinates are written with two decimals: half a hundredth of a unit, in data units.
  double time_tolerance() const { return 0.0051 * (x_max - x_min) / width; }
  double value_tolerance() const { return 0.0051 * (y_max - y_min) / height; }
};

// Runs libxml2's xmllint on the page when it is installed (Debian package libxml2-utils).
void check_with_xmllint(const std::string& page) {
  const std::string xmllint = STATEWISE_XMLLINT;
  if (xmllint.empty()) {
    MESSAGE("xmllint not found at configure time; the page was checked by tests/xml_check.h only");
    return;
  }
  const std::string path = std::string(STATEWISE_TEST_OUTPUT_DIR) + "/plot_test_page.html";
  std::ofstream(path, std::ios::binary) << page;
  const std::string command = "\"" + xmllint + "\" --noout --nonet \"" + path + "\" 2>&1";
  CHECK_MESSAGE(std::system(command.c_str()) == 0, "xmllint rejected " << path);
}

}  // namespace

TEST_CASE("the plot page is well-formed XHTML and fetches nothing") {
  const SampleTable table = sample_table();
  PlotOptions options;
  options.title = "Tank <3> & \"friends\"";
  options.verdicts = {"probe: mean square 9.7 > 1 & correlated"};
  options.warnings = {"channel \"y\" repeats <the> value"};
  const std::string page = plot(table.csv, options);
  std::vector<XmlElement> elements;
  REQUIRE_NOTHROW(elements = XmlChecker::parse(page));
  check_with_xmllint(page);
  CHECK(page.rfind("<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\"", 0) == 0);
  // Self-contained: no scripts, no links, no external images, styles or fonts.
  for (const char* forbidden : {"<script", "<link", "src=", "href=", "url(", "@import", "@font-face", "<img"})
    CHECK_MESSAGE(page.find(forbidden) == std::string::npos, "the page contains " << forbidden);
  // Text is escaped, and comes back intact through the parser.
  const std::vector<std::size_t> titles = find(elements, "title");
  REQUIRE(!titles.empty());
  CHECK(elements[titles[0]].text == "Tank <3> & \"friends\"");
  CHECK(page.find("Tank &lt;3&gt; &amp; &quot;friends&quot;") != std::string::npos);
}

TEST_CASE("what the plot draws is the table's data") {
  const SampleTable table = sample_table();
  const std::vector<XmlElement> elements = XmlChecker::parse(plot(table.csv));
  const std::vector<std::size_t> areas = find(elements, "g", "plot-area");
  REQUIRE(areas.size() == 1);
  const Axes axes(elements[areas[0]]);
  CHECK(axes.x_min == 0.0);
  CHECK(axes.x_max == 390.0);

  SUBCASE("measured points: one per measured row, at (time, value)") {
    std::vector<std::size_t> measured_rows;
    for (std::size_t t = 0; t < table.time.size(); ++t)
      if (!table.imputed[t]) measured_rows.push_back(t);
    std::vector<std::size_t> circles;
    for (const std::size_t i : find(elements, "circle"))
      if (inside(elements, i, areas[0])) circles.push_back(i);
    REQUIRE(circles.size() == measured_rows.size());
    for (std::size_t k = 0; k < circles.size(); ++k) {
      const std::size_t t = measured_rows[k];
      INFO("row " << t);
      CHECK(std::abs(axes.time(attribute(elements[circles[k]], "cx")) - table.time[t]) <=
            axes.time_tolerance());
      CHECK(std::abs(axes.value(attribute(elements[circles[k]], "cy")) - table.filled[t]) <=
            axes.value_tolerance());
    }
  }
  SUBCASE("the estimate line and the 95% band") {
    const std::vector<std::size_t> lines = find(elements, "polyline", "estimate");
    REQUIRE(lines.size() == 1);
    const auto line = points(elements[lines[0]].attributes.at("points"));
    REQUIRE(line.size() == table.time.size());
    for (std::size_t t = 0; t < line.size(); ++t) {
      CHECK(std::abs(axes.time(line[t].first) - table.time[t]) <= axes.time_tolerance());
      CHECK(std::abs(axes.value(line[t].second) - table.estimate[t]) <= axes.value_tolerance());
    }
    const std::vector<std::size_t> bands = find(elements, "polygon", "band");
    REQUIRE(bands.size() == 1);
    const auto band = points(elements[bands[0]].attributes.at("points"));
    REQUIRE(band.size() == 2 * table.time.size());
    const std::size_t n = table.time.size();
    for (std::size_t t = 0; t < n; ++t) {
      CHECK(std::abs(axes.value(band[t].second) - (table.estimate[t] + 1.96 * table.sd[t])) <=
            axes.value_tolerance());
      CHECK(std::abs(axes.value(band[2 * n - 1 - t].second) - (table.estimate[t] - 1.96 * table.sd[t])) <=
            axes.value_tolerance());
    }
  }
  SUBCASE("imputed stretches and rejected values") {
    // Runs of imputed rows: 10–13, 20, 25; each drawn from halfway to the row before to halfway to the
    // row after.
    std::vector<std::size_t> rects;
    for (const std::size_t i : find(elements, "rect"))
      if (inside(elements, i, areas[0])) rects.push_back(i);
    REQUIRE(rects.size() == 3);
    CHECK(std::abs(axes.time(attribute(elements[rects[0]], "x")) - 95.0) <= axes.time_tolerance());
    CHECK(std::abs(axes.time(attribute(elements[rects[0]], "x") + attribute(elements[rects[0]], "width")) -
                   135.0) <= 2 * axes.time_tolerance());
    // Rejected: a cross at the top edge for row 20 (z > 0), at the bottom edge for row 25 (z < 0).
    std::vector<std::size_t> crosses;
    for (const std::size_t i : find(elements, "path"))
      if (inside(elements, i, areas[0])) crosses.push_back(i);
    REQUIRE(crosses.size() == 2);
    const std::string first = elements[crosses[0]].attributes.at("d");
    const std::string second = elements[crosses[1]].attributes.at("d");
    const double first_y = std::stod(first.substr(first.find(' ') + 1));
    const double second_y = std::stod(second.substr(second.find(' ') + 1));
    CHECK(first_y < axes.top + 0.2 * axes.height);
    CHECK(second_y > axes.top + 0.8 * axes.height);
  }
  SUBCASE("histogram counts of the standardized innovations") {
    // Bins of width 0.5 on [-5, 5): accepted values in rect.bar, rejected ones in rect.bar-rejected.
    std::vector<std::size_t> expected(20, 0);
    std::size_t rejected_beyond = 0;
    for (std::size_t t = 0; t < table.z.size(); ++t) {
      if (std::isnan(table.z[t])) continue;
      if (table.rejected[t]) {
        rejected_beyond += std::abs(table.z[t]) >= 5.0;
        continue;
      }
      ++expected[static_cast<std::size_t>(std::floor((table.z[t] + 5.0) / 0.5))];
    }
    std::vector<std::size_t> drawn(20, 0);
    for (const std::size_t i : find(elements, "rect", "bar")) {
      const double x = attribute(elements[i], "x");
      // Bin index from the bar's left edge: the histogram spans 48 .. 458 for z in [-5, 5].
      const auto bin = static_cast<std::size_t>(std::lround((x - 48.0) / (410.0 / 20.0)));
      drawn[bin] += static_cast<std::size_t>(attribute(elements[i], "data-count"));
    }
    CHECK(drawn == expected);
    CHECK(find(elements, "rect", "bar-rejected").empty());  // both rejected values are beyond ±5
    CHECK(rejected_beyond == 2);
  }
  SUBCASE("autocorrelation stems") {
    std::vector<double> z = table.z;
    for (std::size_t t = 0; t < z.size(); ++t)
      if (table.rejected[t]) z[t] = std::nan("");
    const std::vector<double> r = autocorrelation(z, 20);
    const std::vector<std::size_t> groups = find(elements, "g", "autocorrelation");
    REQUIRE(groups.size() == 1);
    const XmlElement& g = elements[groups[0]];
    const double y_min = attribute(g, "data-y-min"), y_max = attribute(g, "data-y-max");
    const double top = attribute(g, "data-top"), height = attribute(g, "data-height");
    const std::vector<std::size_t> stems = find(elements, "line", "stem");
    REQUIRE(stems.size() == 6);  // 34 values used: lags 1 .. 34/5
    for (const std::size_t i : stems) {
      const auto lag = static_cast<std::size_t>(attribute(elements[i], "data-lag"));
      const double value = y_min + (top + height - attribute(elements[i], "y2")) / height * (y_max - y_min);
      INFO("lag " << lag);
      CHECK(std::abs(value - r[lag]) <= 0.0051 * (y_max - y_min) / height);
    }
  }
}

TEST_CASE("ISO 8601 times become seconds on the time axis") {
  // Reference: Python's datetime: datetime(2026, 11, 2, tzinfo=timezone.utc).timestamp() = 1793577600;
  // 2026-11-02T01:30+02:00 is 1793575800.
  const std::string header = "time,x,x_sd,y_est,y_sd,y_filled,y_imputed\n";
  auto x_range = [&](const std::string& first, const std::string& last) {
    const std::vector<XmlElement> elements =
        XmlChecker::parse(plot(header + first + ",1,0.1,1,0.1,1,0\n" + last + ",2,0.1,2,0.1,2,0\n"));
    const XmlElement& g = elements[find(elements, "g", "plot-area").at(0)];
    return std::pair{attribute(g, "data-x-min"), attribute(g, "data-x-max")};
  };
  CHECK(x_range("2026-11-02T00:00:00Z", "2026-11-02T00:10:00Z") == std::pair{1793577600.0, 1793578200.0});
  CHECK(x_range("2026-11-02T01:30+02:00", "2026-11-02T02:30:00.5+02:00") ==
        std::pair{1793575800.0, 1793579400.5});
  // Neither numbers nor date-times: the row number.
  CHECK(x_range("monday", "tuesday") == std::pair{1.0, 2.0});
}

TEST_CASE("a long table is drawn per column, keeping every extreme") {
  // 20 000 rows: drawing each would make a page of megabytes; per column the lowest and highest measured
  // values are drawn, so the single spike at row 12 345 must be there.
  std::string csv = "t,y_est,y_sd,y_filled,y_imputed\n";
  for (int t = 0; t < 20000; ++t) {
    const double value = t == 12345 ? 50.0 : std::sin(t / 300.0);
    csv += std::to_string(t) + "," + number(std::sin(t / 300.0)) + ",0.1," + number(value) + ",0\n";
  }
  const std::string page = plot(csv);
  const std::vector<XmlElement> elements = XmlChecker::parse(page);
  const XmlElement& g = elements[find(elements, "g", "plot-area").at(0)];
  const Axes axes(g);
  std::size_t circles = 0;
  bool spike = false;
  for (const std::size_t i : find(elements, "circle")) {
    if (elements[i].attributes.count("cy") == 0 || elements[i].attributes.at("r") != "1.5") continue;
    ++circles;
    spike = spike || std::abs(axes.value(attribute(elements[i], "cy")) - 50.0) <= axes.value_tolerance();
  }
  CHECK(circles <= 2 * kPlotColumns);
  CHECK(spike);
  CHECK(page.size() < 400000);
}

TEST_CASE("a table without innovations gets no histogram, and one without channels is refused") {
  const std::string page = plot("t,y_est,y_sd,y_filled,y_imputed\n1,2,0.1,2,0\n2,3,0.1,3,0\n");
  CHECK(page.find("This table has no standardized innovations (y_z)") != std::string::npos);
  CHECK(page.find("class=\"bar\"") == std::string::npos);
  CHECK_NOTHROW(XmlChecker::parse(page));
  try {
    plot("time,value\n1,2\n");
    FAIL("expected an InputError");
  } catch (const InputError& e) {
    CHECK(std::string(e.what()) ==
          "table.csv:1: no channel columns in the header; expected an estimates table of statewise filter or "
          "smooth "
          "with columns such as \"c_est\", \"c_sd\", \"c_filled\" and \"c_imputed\"");
  }
}

TEST_CASE("the XML checker itself rejects what is not well-formed") {
  // The checker must be able to fail, or the tests above would prove nothing.
  for (const char* bad : {"<a><b></a></b>", "<a x=\"1\" x=\"2\"/>", "<a>&nbsp;</a>", "<a>1 < 2</a>", "<a>",
                          "<a/><b/>", "<a x=1/>", "<a>&amp</a>"})
    CHECK_THROWS_AS(XmlChecker::parse(bad), std::runtime_error);
  CHECK(XmlChecker::parse("<!DOCTYPE html>\n<a x='&lt;&#233;'>t&amp;<b/></a>\n")[0].attributes.at("x") ==
        "<é");
}
