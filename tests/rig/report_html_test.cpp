// Reports built from real runs on the simulated rig: the HTML page is
// well-formed XHTML, holds each plot, and every figure in it equals the JSON.
#include <gtest/gtest.h>

#include <nlohmann/json.hpp>

#include "drivers/sim/cell_model.h"
#include "procedures/plan.h"
#include "rig/run_controller.h"
#include "rig/run_report.h"
#include "rig/sim_rig.h"
#include "tests/analysis/xml_check.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using testing::Cell2500;

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
  EXPECT_NE(std::find(ids.begin(), ids.end(), "plot-voltage-current-time"), ids.end());
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

TEST(ReportHtml, MissingRunIsAnError) {
  Fixture f;
  EXPECT_FALSE(BuildRunReport(*f.store, 42).ok());
}

}  // namespace
}  // namespace kp
