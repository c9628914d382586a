// Reports built from real runs on the simulated rig: the HTML page is
// well-formed XHTML, holds each plot, and every figure in it equals the JSON.
#include <gtest/gtest.h>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include <cstdio>
#include <cstdlib>

#include "analysis/svg_plot.h"
#include "drivers/sim/cell_model.h"
#include "procedures/plan.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/analysis/xml_check.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/report/run_report.h"

namespace kp {
namespace {

using testing::Cell2500;
using testing::CompileForCell2500;

// Rest, then 0.2 It with a 1 It step of 10 s every 30 min, to the cutoff:
// gives DC-IR points across the depth of discharge.
Plan SteppedPlan(const CellSpec& cell) {
  Plan p = RatedCapacityPlan(cell);
  p.name = "stepped-0.2C";
  Step base = p.steps[0];
  p.steps.clear();
  Step rest;
  rest.kind = StepKind::kRest;
  rest.label = "rest";
  rest.sample_period_s = 10.0;
  rest.end.time_s = 600.0;
  p.steps.push_back(rest);
  for (int k = 0; k < 6; ++k) {
    Step low = base;
    low.label = "0.2 It";
    low.end.time_s = 1800.0;
    // IEC 61960-3 clause 7.7 two-current test (secondary source): 0.2 It for
    // 10 s, then 1 It for 1 s.
    Step dcir;
    dcir.kind = StepKind::kResistanceTest;
    dcir.label = "DC-IR";
    dcir.sample_period_s = 0.5;
    dcir.segments = {{"I1", LoadMode::kCurrent, cell.CRateToAmps(0.2), 10.0, 10.0},
                     {"I2", LoadMode::kCurrent, cell.CRateToAmps(1.0), 1.0, 1.0}};
    p.steps.push_back(low);
    p.steps.push_back(dcir);
  }
  p.steps.push_back(base);
  p.limits.max_current_a = cell.CRateToAmps(1.2);
  return p;
}

struct Fixture : testing::StoreFixture {
  int64_t Run(const Plan& plan) {
    SimRig rig(clock, sim::DemoLiIonCell(2.56));
    RunController rc(*store, clock, rig.roles());
    auto r = rc.Execute(plan, {});
    EXPECT_TRUE(r.ok()) << r.status().ToString();
    return r.ok() ? r->run_id : 0;
  }
};

// "1:02:03" -> 3723 s, "2 d 01:00:00" -> 176400 s: read back independently of
// the formatter.
double HmsSeconds(const std::string& text) {
  double days = 0;
  std::string rest = text;
  if (size_t d = text.find(" d "); d != std::string::npos) days = std::stod(text.substr(0, d)), rest = text.substr(d + 3);
  int h = 0, m = 0, sec = 0;
  EXPECT_EQ(std::sscanf(rest.c_str(), "%d:%d:%d", &h, &m, &sec), 3) << text;
  return days * 86400 + h * 3600.0 + m * 60.0 + sec;
}

// Every data-figure cell: its exact value equals the JSON at that pointer,
// and its shown text rounds it.
void ExpectFiguresMatchJson(const std::string& html, const nlohmann::json& j, int min_figures) {
  std::vector<testing::XmlElement> els;
  ASSERT_EQ(testing::CheckXml(html, &els), "");
  int figures = 0;
  for (const auto& e : els) {
    auto f = e.attributes.find("data-figure");
    if (e.name != "td" || f == e.attributes.end()) continue;
    ++figures;
    const nlohmann::json& v = j.at(nlohmann::json::json_pointer(f->second));
    double exact = std::stod(e.attributes.at("data-value"));
    EXPECT_EQ(exact, v.get<double>()) << f->second;
    if (e.text.find(':') != std::string::npos) {
      // A duration shown as h:mm:ss (with "N d " in front past a day).
      EXPECT_NEAR(HmsSeconds(e.text), exact, 0.5 + 1e-9) << f->second << " shown as " << e.text;
      continue;
    }
    EXPECT_NEAR(std::stod(e.text), exact, 0.5 * std::abs(exact) * 1e-3 + 0.5) << f->second << " shown as " << e.text;
  }
  EXPECT_GE(figures, min_figures);
}

std::vector<std::string> SvgIds(const std::string& html) {
  std::vector<testing::XmlElement> els;
  testing::CheckXml(html, &els);
  std::vector<std::string> ids;
  for (const auto& e : els)
    if (e.name == "svg") ids.push_back(e.attributes.at("id"));
  return ids;
}

TEST(ReportHtml, RatedCapacityRunPageIsWellFormedAndMatchesJson) {
  Fixture f;
  int64_t id = f.Run(RatedCapacityPlan(Cell2500()));
  auto rep = BuildRunReport(*f.store, id);
  ASSERT_TRUE(rep.ok()) << rep.status().ToString();
  nlohmann::json j = RunReportJson(*rep);
  // The fields `report --json` has always had.
  for (const char* k :
       {"run", "outcome", "reason", "charge_mAh", "energy_Wh", "mean_voltage_V", "duration_s", "rated_mAh", "percent_of_rated"})
    EXPECT_TRUE(j.contains(k)) << k;
  // The sim cell holds 2.56 Ah; at 0.5 A it delivers close to that.
  EXPECT_NEAR(j["charge_mAh"].get<double>(), 2560.0, 60.0);
  EXPECT_EQ(j["integration_method"], "sample-trapezoid");
  EXPECT_FALSE(j["time_to_cutoff_s"].is_null());
  std::string html = RunReportHtml(*rep);
  ExpectFiguresMatchJson(html, j, 12);
  auto ids = SvgIds(html);
  EXPECT_NE(std::find(ids.begin(), ids.end(), "plot-voltage-time"), ids.end());
  EXPECT_NE(std::find(ids.begin(), ids.end(), "plot-current-time"), ids.end());
  EXPECT_NE(std::find(ids.begin(), ids.end(), "plot-voltage-charge"), ids.end());
  EXPECT_NE(std::find(ids.begin(), ids.end(), "plot-temperature"), ids.end());
  EXPECT_NE(html.find("IEC 61960-3"), std::string::npos);
  // The CSV has one row per step.
  std::string csv = RunReportStepsCsv(*rep);
  EXPECT_EQ(std::count(csv.begin(), csv.end(), '\n'), 1 + static_cast<long>(j["steps"].size()));
}

TEST(ReportHtml, SteppedRunHasResistanceVersusDepthOfDischarge) {
  Fixture f;
  CellSpec cell = Cell2500();
  int64_t id = f.Run(SteppedPlan(cell));
  ReportOptions o;
  o.dcir.delay_s = 1.0;
  auto rep = BuildRunReport(*f.store, id, o);
  ASSERT_TRUE(rep.ok()) << rep.status().ToString();
  const RunAnalysis& a = rep->analysis;
  // One point per dcir step, none at the step boundaries (rest to discharge,
  // discharge to DC-IR test), all positive.
  ASSERT_EQ(a.dcir.size(), 6u);
  for (const DcirPoint& p : a.dcir) {
    EXPECT_GT(p.resistance_ohm, 0.0);
    EXPECT_LT(p.resistance_ohm, 1.0);
    // Each point is exactly the two-current formula on its readings (IEC 61960-3 7.7, secondary).
    EXPECT_DOUBLE_EQ(p.resistance_ohm, (p.u1_v - p.u2_v) / (p.i2_a - p.i1_a));
    EXPECT_NEAR(p.i1_a, cell.CRateToAmps(0.2), 1e-6);
    EXPECT_NEAR(p.i2_a, cell.CRateToAmps(1.0), 1e-6);
    EXPECT_NEAR(p.t_u2_s - p.t_edge_s, 1.0, 1e-6);  // U2 at the end of the 1 s second current
  }
  RecordProperty("dcir_first_mohm", std::to_string(a.dcir.front().resistance_ohm * 1000));
  RecordProperty("dcir_last_mohm", std::to_string(a.dcir.back().resistance_ohm * 1000));
  RecordProperty("dcir_last_dod", std::to_string(a.dcir.back().depth_of_discharge));
  for (size_t k = 1; k < a.dcir.size(); ++k) EXPECT_GT(a.dcir[k].depth_of_discharge, a.dcir[k - 1].depth_of_discharge);
  // A discharge with DC-IR tests in it is not pulsed, and not the capacity test.
  EXPECT_FALSE(a.pulsed);
  EXPECT_FALSE(a.verdict.judged) << a.verdict.text;
  // Charge per discharge = sum of the discharging steps.
  double sum = 0;
  for (const StepFigures& s : a.steps)
    if (s.discharging()) sum += s.charge_mah;
  EXPECT_NEAR(a.discharge_charge_mah, sum, 1e-9);
  nlohmann::json j = RunReportJson(*rep);
  std::string html = RunReportHtml(*rep);
  ExpectFiguresMatchJson(html, j, 40);
  auto ids = SvgIds(html);
  EXPECT_NE(std::find(ids.begin(), ids.end(), "plot-resistance-dod"), ids.end());

  // Compared with a continuous run: side-by-side table and overlays.
  int64_t id2 = f.Run(RatedCapacityPlan(cell));
  auto cmp = BuildCompareReport(*f.store, {id, id2}, 1.0);
  ASSERT_TRUE(cmp.ok()) << cmp.status().ToString();
  nlohmann::json cj = CompareReportJson(*cmp);
  ASSERT_EQ(cj["runs"].size(), 2u);
  std::string chtml = CompareReportHtml(*cmp);
  ExpectFiguresMatchJson(chtml, cj, 10);
  auto cids = SvgIds(chtml);
  EXPECT_NE(std::find(cids.begin(), cids.end(), "plot-overlay-voltage-charge"), cids.end());
  EXPECT_NE(std::find(cids.begin(), cids.end(), "plot-overlay-voltage-time"), cids.end());
}

// The elements of one plot, by the plot's id.
std::vector<testing::XmlElement> PlotElements(const std::string& html, const std::string& id) {
  std::vector<testing::XmlElement> els, out;
  testing::CheckXml(html, &els);
  bool in = false;
  for (const auto& e : els) {
    if (e.name == "svg") in = e.attributes.count("id") && e.attributes.at("id") == id;
    else if (in) out.push_back(e);
  }
  return out;
}

size_t CountNamed(const std::vector<testing::XmlElement>& els, const std::string& element, const std::string& cls) {
  size_t n = 0;
  for (const auto& e : els)
    if (e.name == element && e.attributes.count("class") && e.attributes.at("class") == cls) ++n;
  return n;
}

TEST(ReportHtml, VerdictIsEmphasisedAndThePageSaysWhoMadeItAndWhen) {
  Fixture f;
  // 0.2 It to the cutoff on a 2.56 Ah cell rated 2500 mAh: judged, passes.
  int64_t id = f.Run(RatedCapacityPlan(Cell2500()));
  auto rep = BuildRunReport(*f.store, id);
  ASSERT_TRUE(rep.ok()) << rep.status().ToString();
  ASSERT_TRUE(rep->analysis.verdict.judged) << rep->analysis.verdict.text;
  std::string html = RunReportHtml(*rep);
  std::vector<testing::XmlElement> els;
  ASSERT_EQ(testing::CheckXml(html, &els), "");
  std::string tone = rep->analysis.verdict.capacity_pass ? "callout pass" : "callout fail";
  bool callout = false, footer = false;
  for (const auto& e : els) {
    if (e.name == "div" && e.attributes.count("class") && e.attributes.at("class") == tone)
      callout = callout || e.text == XmlEscape(rep->analysis.verdict.text);
    if (e.name == "footer") footer = e.text.find("Generated by kneepoint") != std::string::npos && e.text.find("Z.") != std::string::npos;
  }
  EXPECT_TRUE(callout) << "the verdict in a '" << tone << "' box";
  EXPECT_TRUE(footer);
  // One temperature style in the page's own text (the procedure and rig file
  // are quoted verbatim in <pre> blocks, in their own syntax), no negative
  // zero, print styles.
  std::string prose = html;
  for (size_t a; (a = prose.find("<pre>")) != std::string::npos;) prose.erase(a, prose.find("</pre>", a) + 6 - a);
  EXPECT_EQ(prose.find("degC"), std::string::npos);
  EXPECT_EQ(html.find(">-0.0"), std::string::npos);
  EXPECT_NE(html.find("@media print"), std::string::npos);
  // The method and its source are in the page and the JSON, not in the terminal text.
  nlohmann::json j = RunReportJson(*rep);
  ASSERT_TRUE(j.contains("methods"));
  bool capacity_method = false;
  for (const auto& m : j["methods"]) capacity_method = capacity_method || m["figure"] == "capacity verdict";
  EXPECT_TRUE(capacity_method);
  // Cutoff drawn on the voltage plot, the temperature limit on the temperature plot.
  EXPECT_EQ(CountNamed(PlotElements(html, "plot-voltage-time"), "line", "level"), 1u);
  EXPECT_EQ(CountNamed(PlotElements(html, "plot-temperature"), "line", "level"), 1u);
  EXPECT_EQ(CountNamed(PlotElements(html, "plot-voltage-time"), "line", "mark"), 0u);  // not aborted
}

TEST(ReportHtml, AbortedRunMarksWhereItStopped) {
  Fixture f;
  sim::SimOptions so;
  so.runaway_start_s = 120.0;  // the cell heats itself two minutes in
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56), so);
  RunController rc(*f.store, f.clock, rig.roles());
  Plan plan = CompileForCell2500("safety max-temp=45degC\ndischarge 1C until voltage<=2.75V every=1s\n");
  auto r = rc.Execute(plan, {});
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  auto rep = BuildRunReport(*f.store, r->run_id);
  ASSERT_TRUE(rep.ok());
  ASSERT_EQ(rep->run.outcome, Outcome::kAborted) << rep->run.reason;
  ASSERT_TRUE(rep->abort_t_s.has_value());
  std::string html = RunReportHtml(*rep);
  ASSERT_EQ(testing::CheckXml(html), "");
  auto vt = PlotElements(html, "plot-voltage-time");
  EXPECT_EQ(CountNamed(vt, "line", "mark"), 1u) << "abort point on the voltage plot";
  EXPECT_EQ(CountNamed(vt, "line", "level"), 1u) << "cutoff on the voltage plot";
  auto tt = PlotElements(html, "plot-temperature");
  EXPECT_EQ(CountNamed(tt, "line", "mark"), 1u);
  EXPECT_EQ(CountNamed(tt, "line", "level"), 1u) << "temperature limit";
  EXPECT_NE(html.find("limit 45 °C"), std::string::npos);
  EXPECT_NE(html.find("callout warn"), std::string::npos);
}

TEST(ReportHtml, PulseTrainIsDrawnAsEnvelopesWithTheCurrentOnItsOwnStrip) {
  Fixture f;
  int64_t id = f.Run(CompileForCell2500("pulse 2A/1s 0A/3s until time>=30min every=250ms\n"));
  auto rep = BuildRunReport(*f.store, id);
  ASSERT_TRUE(rep.ok());
  ASSERT_TRUE(rep->analysis.pulsed);
  std::string html = RunReportHtml(*rep);
  ASSERT_EQ(testing::CheckXml(html), "");
  auto vt = PlotElements(html, "plot-voltage-time");
  std::vector<std::string> names;
  for (const auto& e : vt)
    if (e.name == "polyline") {
      names.push_back(e.attributes.at("data-name"));
      EXPECT_EQ(e.attributes.at("stroke-width"), "0.9");
    }
  ASSERT_EQ(names.size(), 2u);
  EXPECT_EQ(names[0].rfind("under load", 0), 0u);
  EXPECT_EQ(names[1].rfind("recovered", 0), 0u);
  // Under load is below recovered at every pulse: 450 pulses in 30 min.
  ASSERT_GE(rep->analysis.pulses.size(), 400u);
  for (const PulseFigures& p : rep->analysis.pulses) EXPECT_LT(p.min_voltage_v, p.recovered_voltage_v);
  // The current has its own plot, on a time axis whose labels match its ticks (m:ss for 30 min).
  auto it = PlotElements(html, "plot-current-time");
  ASSERT_FALSE(it.empty());
  bool axis_label = false;
  for (const auto& e : it) axis_label = axis_label || e.text == "time (m:ss)";
  EXPECT_TRUE(axis_label);
}

TEST(ReportHtml, PagesPassAnIndependentXmlParser) {
  // xmllint (libxml2) as a second, independent well-formedness check beside
  // the test's own parser.
  Fixture f;
  int64_t a = f.Run(RatedCapacityPlan(Cell2500()));
  int64_t b = f.Run(CompileForCell2500("pulse 2A/1s 0A/3s until voltage<=2.75V every=1s\n"));
  auto ra = BuildRunReport(*f.store, a);
  auto cmp = BuildCompareReport(*f.store, {a, b}, std::nullopt);
  ASSERT_TRUE(ra.ok() && cmp.ok());
  auto lint = [&](const std::string& name, const std::string& text) {
    std::string path = (f.dir.path() / name).string();
    FILE* out = std::fopen(path.c_str(), "wb");
    EXPECT_NE(out, nullptr);
    if (out == nullptr) return -1;
    std::fwrite(text.data(), 1, text.size(), out);
    std::fclose(out);
    return std::system(("xmllint --noout '" + path + "' 2>/dev/null").c_str());
  };
  EXPECT_EQ(lint("run.html", RunReportHtml(*ra)), 0);
  std::string compare = CompareReportHtml(*cmp);
  EXPECT_EQ(lint("compare.html", compare), 0);
  // Each curve is labelled by what differs, not only by its run number.
  EXPECT_NE(compare.find(fmt::format("run {}: continuous 0.5 A", a)), std::string::npos);
  EXPECT_NE(compare.find(fmt::format("run {}: pulsed 2 A peak", b)), std::string::npos);
  // The check itself fails on broken markup.
  EXPECT_NE(lint("broken.html", "<html><p>x</html>"), 0);
}

TEST(ReportHtml, MissingRunIsAnError) {
  Fixture f;
  EXPECT_FALSE(BuildRunReport(*f.store, 42).ok());
}

}  // namespace
}  // namespace kp
