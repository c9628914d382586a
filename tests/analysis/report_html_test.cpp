#include <gtest/gtest.h>

#include <algorithm>
#include <cctype>
#include <sstream>

#include "analysis/compare.h"
#include "analysis/html_report.h"
#include "analysis/svg_plot.h"
#include "tests/analysis/xml_check.h"

namespace kp {
namespace {

TEST(SvgPlot, WellFormedWithLabelledAxes) {
  PlotSpec p;
  p.id = "plot-v";
  p.title = "Voltage & current <vs> time";
  p.x_label = "time (h)";
  p.y_label = "voltage (V)";
  p.y2_label = "current (A)";
  PlotSeries v{"voltage", {}, {}, false, false}, i{"current", {}, {}, true, false};
  for (int k = 0; k < 5000; ++k) {
    v.x.push_back(k / 1000.0), v.y.push_back(4.1 - k * 1e-4);
    i.x.push_back(k / 1000.0), i.y.push_back(0.5);
  }
  p.series = {v, i};
  std::string svg = RenderSvgPlot(p);
  std::vector<testing::XmlElement> els;
  EXPECT_EQ(testing::CheckXml(svg, &els), "");
  int labels = 0, lines = 0;
  for (const auto& e : els) {
    if (e.name == "text" && (e.text == "time (h)" || e.text == "voltage (V)" || e.text == "current (A)")) ++labels;
    if (e.name == "polyline") ++lines;
  }
  EXPECT_EQ(labels, 3);
  EXPECT_EQ(lines, 2);
  // Every plotted point lies inside the plot frame (the first <rect>).
  const testing::XmlElement* frame = nullptr;
  for (const auto& e : els)
    if (e.name == "rect" && !frame) frame = &e;
  ASSERT_NE(frame, nullptr);
  double fx = std::stod(frame->attributes.at("x")), fy = std::stod(frame->attributes.at("y"));
  double fw = std::stod(frame->attributes.at("width")), fh = std::stod(frame->attributes.at("height"));
  int points = 0;
  for (const auto& e : els) {
    if (e.name != "polyline") continue;
    std::istringstream in(e.attributes.at("points"));
    double x, y;
    char comma;
    while (in >> x >> comma >> y) {
      ++points;
      EXPECT_GE(x, fx - 0.05);
      EXPECT_LE(x, fx + fw + 0.05);
      EXPECT_GE(y, fy - 0.05);
      EXPECT_LE(y, fy + fh + 0.05);
    }
  }
  EXPECT_GT(points, 100);
  EXPECT_NE(svg.find("Voltage &amp; current &lt;vs&gt; time"), std::string::npos);
}

TEST(SvgPlot, ReductionKeepsExtremes) {
  std::vector<double> y(100000, 3.7);
  y[54321] = 2.9;  // a sag
  y[77777] = 4.0;
  auto idx = ReducePoints(y, 1000);
  EXPECT_LE(idx.size(), 1002u);
  EXPECT_NE(std::find(idx.begin(), idx.end(), 54321u), idx.end());
  EXPECT_NE(std::find(idx.begin(), idx.end(), 77777u), idx.end());
  EXPECT_EQ(idx.front(), 0u);
  EXPECT_EQ(idx.back(), 99999u);
}

// A step of 0.025 needs three decimals: rounded to two, 0.975 and 0.98 would
// read the same as their neighbours.
TEST(SvgPlot, NeighbouringTicksNeverShareALabel) {
  PlotSpec p;
  p.id = "plot-q";
  p.series = {{"q", {0.95, 1.05}, {1.0, 2.0}, false, false}};
  std::string svg = RenderSvgPlot(p);
  std::vector<testing::XmlElement> els;
  ASSERT_EQ(testing::CheckXml(svg, &els), "");
  std::vector<std::string> labels;
  for (const auto& e : els)
    if (e.name == "text" && e.attributes.count("text-anchor") && e.attributes.at("text-anchor") == "middle" &&
        !e.text.empty() && (std::isdigit(static_cast<unsigned char>(e.text[0])) != 0))
      labels.push_back(e.text);
  ASSERT_GE(labels.size(), 3u);
  for (size_t a = 0; a < labels.size(); ++a)
    for (size_t b = a + 1; b < labels.size(); ++b) EXPECT_NE(labels[a], labels[b]);
  EXPECT_NE(std::find(labels.begin(), labels.end(), "0.975"), labels.end());
}

TEST(SvgPlot, NiceTicks) {
  auto t = NiceTicks(2.71, 4.19);
  ASSERT_GE(t.size(), 3u);
  EXPECT_GE(t.front(), 2.71);
  EXPECT_LE(t.back(), 4.19 + 1e-12);
  for (size_t k = 1; k < t.size(); ++k) EXPECT_NEAR(t[k] - t[k - 1], 0.25, 1e-12);  // 1.48 / 6 = 0.247 rounds up to 0.25
}

TEST(HtmlPage, WellFormedAndCarriesExactValues) {
  HtmlSection s;
  s.title = "Figures";
  s.paragraphs = {"Method: trapezoid & co."};
  HtmlTable t;
  t.header = {"figure", "value"};
  t.rows = {{TextCell("charge"), FigureCell("charge_mAh", 2561.234567, 1, "mAh")}};
  s.tables = {t};
  std::string html = RenderHtmlPage("Run <1>", {s});
  std::vector<testing::XmlElement> els;
  ASSERT_EQ(testing::CheckXml(html, &els), "");
  bool found = false;
  for (const auto& e : els)
    if (e.name == "td" && e.attributes.count("data-figure")) {
      found = true;
      EXPECT_EQ(std::stod(e.attributes.at("data-value")), 2561.234567);
      EXPECT_EQ(e.text, "2561.2 mAh");
    }
  EXPECT_TRUE(found);
  EXPECT_EQ(html.find("<script"), std::string::npos);
  // The checker does catch broken markup.
  EXPECT_NE(testing::CheckXml("<html><p>x</html>"), "");
  EXPECT_NE(testing::CheckXml("<html a=b></html>"), "");
  EXPECT_NE(testing::CheckXml("<html>&nbsp;</html>"), "");
}

TEST(Compare, PulsedVersusContinuousRatios) {
  std::vector<RunSummary> runs(3);
  runs[0] = {"run 1", 1800, 6.3, 3.5, 0.1, 1.0, 64800, true, {}, ""};
  runs[1] = {"run 2", 2000, 7.2, 3.6, 0.1, 0.1, 72000, false, {}, ""};
  runs[2] = {"run 3", 1500, 5.0, 3.33, 1.0, 1.0, 5400, false, {}, ""};
  auto r = PulsedVersusContinuous(runs);
  ASSERT_EQ(r.size(), 2u);
  EXPECT_EQ(r[0].basis, "equal average current");
  EXPECT_EQ(r[0].continuous_label, "run 2");
  EXPECT_DOUBLE_EQ(r[0].capacity_ratio, 1800.0 / 2000.0);
  EXPECT_DOUBLE_EQ(r[0].energy_ratio, 6.3 / 7.2);
  EXPECT_EQ(r[1].basis, "equal peak current");
  EXPECT_DOUBLE_EQ(r[1].capacity_ratio, 1800.0 / 1500.0);
  auto pts = RatePointsFromRuns(runs);
  ASSERT_EQ(pts.size(), 2u);
  EXPECT_DOUBLE_EQ(pts[0].hours, 20.0);
  EXPECT_DOUBLE_EQ(pts[1].current_a, 1.0);
}

}  // namespace
}  // namespace kp
