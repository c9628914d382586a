// End to end: the demo campaign runs once into a temporary folder; each test
// then reopens the database and checks what the campaign reported against the
// stored samples, the ordering the physics implies, and the report's links.
#include "ui/cli/demo_campaign.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <memory>
#include <regex>
#include <set>
#include <sstream>

#include "procedures/procedure_parser.h"
#include "tests/analysis/xml_check.h"
#include "tests/support/test_support.h"
#include "ui/cli/demo_procedures.h"
#include "ui/report/run_report.h"

namespace kp {
namespace {

class DemoCampaignTest : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    dir_ = new testing::TempDir();
    DemoOptions o;
    o.db_path = dir_->File("demo.db");
    o.report_dir = dir_->File("report");
    auto f = RunDemoCampaign(o);
    ASSERT_TRUE(f.ok()) << f.status().ToString();
    figures_ = new DemoFigures(*f);
  }
  static void TearDownTestSuite() {
    delete figures_;
    figures_ = nullptr;
    delete dir_;
    dir_ = nullptr;
  }
  void SetUp() override {
    ASSERT_NE(figures_, nullptr) << "the campaign itself failed";
    auto s = Store::Open(dir_->File("demo.db"), wall_);
    ASSERT_TRUE(s.ok()) << s.status().ToString();
    store_ = std::move(*s);
  }
  const DemoRun& RunById(int64_t id) {
    for (const DemoRun& r : figures_->runs)
      if (r.run_id == id) return r;
    ADD_FAILURE() << "no run " << id;
    return figures_->runs.front();
  }
  // Charge (mAh) from an independent trapezoid over the stored samples whose
  // interval closes in a step from `first` to `last` (the report counts an
  // interval for the step of its closing sample).
  double TrapezoidMah(int64_t run_id, int first, int last) {
    auto samples = store_->LoadSamples(run_id);
    EXPECT_TRUE(samples.ok());
    double as = 0.0;
    for (size_t i = 1; i < samples->size(); ++i) {
      const Sample& a = (*samples)[i - 1];
      const Sample& b = (*samples)[i];
      if (b.step < first || b.step > last) continue;
      as += 0.5 * (a.current_a + b.current_a) * (b.t_s - a.t_s);
    }
    return as / 3.6;
  }

  static testing::TempDir* dir_;
  static DemoFigures* figures_;
  SteadyClock wall_;
  std::unique_ptr<Store> store_;
};
testing::TempDir* DemoCampaignTest::dir_ = nullptr;
DemoFigures* DemoCampaignTest::figures_ = nullptr;

TEST_F(DemoCampaignTest, EveryRunIsStoredAndAllButTheFailingCellCompleted) {
  auto runs = store_->ListRuns();
  ASSERT_TRUE(runs.ok());
  ASSERT_EQ(runs->size(), figures_->runs.size());
  EXPECT_EQ(figures_->runs.size(), 14u);
  for (const DemoRun& r : figures_->runs) {
    auto row = store_->GetRun(r.run_id);
    ASSERT_TRUE(row.ok());
    EXPECT_EQ(row->outcome, r.outcome) << r.part;
    EXPECT_EQ(row->sample_count, r.samples) << r.part;
    if (r.run_id != figures_->failing_run) EXPECT_EQ(r.outcome, Outcome::kCompleted) << r.part << ": " << r.reason;
  }
}

// Q7: four cells at once on the four-channel bench; the batch figures are
// those of the four runs' own reports, recomputed here from the database.
TEST_F(DemoCampaignTest, BatchOfFourRanAtOnceAndItsStatisticsComeFromTheRuns) {
  const DemoFigures& f = *figures_;
  ASSERT_EQ(f.batch_runs.size(), 4u);
  std::vector<double> mah;
  std::set<std::string> uuids, slots;
  for (int64_t id : f.batch_runs) {
    auto row = store_->GetRun(id);
    ASSERT_TRUE(row.ok());
    EXPECT_EQ(row->outcome, Outcome::kCompleted) << row->reason;
    uuids.insert(row->uuid);
    for (const std::string& t : row->tags)
      if (t.rfind("slot=", 0) == 0) slots.insert(t);
    auto rep = BuildRunReport(*store_, id);
    ASSERT_TRUE(rep.ok());
    mah.push_back(rep->analysis.discharge_charge_mah);
  }
  EXPECT_EQ(uuids.size(), 4u);
  EXPECT_EQ(slots.size(), 4u);
  double mean = (mah[0] + mah[1] + mah[2] + mah[3]) / 4.0;
  EXPECT_NEAR(f.batch_capacity.mean, mean, 1e-9);
  EXPECT_DOUBLE_EQ(f.batch_capacity.min, *std::min_element(mah.begin(), mah.end()));
  EXPECT_DOUBLE_EQ(f.batch_capacity.max, *std::max_element(mah.begin(), mah.end()));
  EXPECT_GT(f.batch_capacity.max - f.batch_capacity.min, 1.0) << "four different cells of the lot";
  EXPECT_TRUE(std::filesystem::is_regular_file(dir_->path() / "report" / f.batch_page));
}

TEST_F(DemoCampaignTest, ReportedChargeMatchesTheStoredSamples) {
  for (const DemoRun& r : figures_->runs) {
    auto rep = BuildRunReport(*store_, r.run_id);
    ASSERT_TRUE(rep.ok());
    // Same analysis of the same stored samples: identical figures.
    EXPECT_DOUBLE_EQ(rep->analysis.discharge_charge_mah, r.discharge_mah) << r.part;
    EXPECT_DOUBLE_EQ(rep->analysis.discharge_energy_wh, r.discharge_wh) << r.part;
    // An independent trapezoid over the discharge's steps agrees within 0.5 %
    // (the report may integrate pulse segments by their means instead).
    if (r.run_id == figures_->failing_run) continue;
    double mah = TrapezoidMah(r.run_id, rep->analysis.main_discharge_step, rep->analysis.last_discharge_step);
    EXPECT_NEAR(mah, r.discharge_mah, 0.005 * r.discharge_mah) << r.part;
    EXPECT_GT(r.discharge_mah, 500.0) << r.part;
  }
}

TEST_F(DemoCampaignTest, RatedCapacityVerdictFollowsTheMeasuredCharge) {
  const DemoFigures& f = *figures_;
  EXPECT_DOUBLE_EQ(f.rated_mah, 2500.0);  // the claim in rated-capacity.kpp
  EXPECT_NEAR(f.percent_of_rated, 100.0 * f.measured_mah / f.rated_mah, 1e-9);
  EXPECT_EQ(f.capacity_pass, f.measured_mah >= f.rated_mah);
  EXPECT_EQ(f.measured_mah, RunById(f.runs.front().run_id).discharge_mah);
  EXPECT_FALSE(f.verdict_text.empty());
  // The rated-capacity run is the method's own test, so it gets a verdict.
  auto rep = BuildRunReport(*store_, f.runs.front().run_id);
  ASSERT_TRUE(rep.ok());
  EXPECT_TRUE(rep->analysis.verdict.judged);
  // The batch mate: cell 2's Peukert run at 0.2 It (0.5 A), recomputed from its report.
  ASSERT_GT(f.batch_mate_run, 0);
  auto mate = BuildRunReport(*store_, f.batch_mate_run);
  ASSERT_TRUE(mate.ok());
  EXPECT_NEAR(mate->analysis.average_current_a, 0.5, 0.005);
  EXPECT_NEAR(f.batch_mate_percent, 100.0 * mate->analysis.discharge_charge_mah / 2500.0, 1e-9);
  EXPECT_TRUE(mate->analysis.verdict.judged);
  // The product-load runs are not rated-capacity tests: reported, not judged.
  for (int64_t id : {f.duty_run, f.pulsed_run, f.continuous_run}) {
    auto r = BuildRunReport(*store_, id);
    ASSERT_TRUE(r.ok());
    EXPECT_FALSE(r->analysis.verdict.judged) << "run " << id << ": " << r->analysis.verdict.text;
  }
}

// KiBaM recovery (Manwell & McGowan 1993, from memory): rests between pulses
// let the bound charge flow back, so 2 A in pulses delivers more than 2 A
// without pause, to the same end voltage.
TEST_F(DemoCampaignTest, PulsedAtPeakCurrentDeliversMoreThanContinuous) {
  const DemoFigures& f = *figures_;
  EXPECT_EQ(f.pulsed_mah, RunById(f.pulsed_run).discharge_mah);
  EXPECT_EQ(f.continuous_mah, RunById(f.continuous_run).discharge_mah);
  EXPECT_GT(f.pulsed_mah, f.continuous_mah * 1.01);
  bool found = false;
  for (const RatioFigures& r : f.ratios) {
    if (r.basis.find("peak") == std::string::npos || r.continuous_label.find(std::to_string(f.continuous_run)) == std::string::npos ||
        r.pulsed_label.find(std::to_string(f.pulsed_run)) == std::string::npos)
      continue;
    found = true;
    EXPECT_NEAR(r.capacity_ratio, f.pulsed_mah / f.continuous_mah, 1e-9);
  }
  EXPECT_TRUE(found) << "no equal-peak ratio between the pulsed and continuous runs";
}

TEST_F(DemoCampaignTest, DcirPointsSpanTheDischargeAndRiseTowardsEmpty) {
  const DemoFigures& f = *figures_;
  ASSERT_GE(f.dcir.size(), 8u);
  for (const DcirPoint& p : f.dcir) {
    // IEC 61960-3 clause 7.7 (secondary source): R = (U1 - U2) / (I2 - I1).
    EXPECT_NEAR(p.resistance_ohm, (p.u1_v - p.u2_v) / (p.i2_a - p.i1_a), 1e-12);
    EXPECT_NEAR(p.i1_a, 0.5, 0.01);  // 0.2 It of 2500 mAh
    EXPECT_NEAR(p.i2_a, 2.5, 0.01);  // 1 It
    EXPECT_GT(p.resistance_ohm, 0.02);
    EXPECT_LT(p.resistance_ohm, 0.3);
  }
  // The engine measured each point itself at the pulse's end and logged it as
  // a `result` event: the analysis of the stored samples agrees within 2 %.
  auto events = store_->LoadEvents(RunById(f.runs[4].run_id).run_id);
  ASSERT_TRUE(events.ok());
  std::vector<double> engine_ohm;
  for (const EventRow& e : *events)
    if (e.kind == "result") engine_ohm.push_back(std::stod(e.message.substr(e.message.find("= ") + 2)));
  ASSERT_EQ(engine_ohm.size(), f.dcir.size());
  // One point per dcir step the run recorded: none at the charge, rest or
  // discharge boundaries.
  auto steps = store_->LoadSteps(RunById(f.runs[4].run_id).run_id);
  ASSERT_TRUE(steps.ok());
  size_t dcir_steps = 0;
  for (const StepRow& s : *steps) dcir_steps += s.kind == "dc resistance";
  EXPECT_EQ(dcir_steps, f.dcir.size());
  for (size_t i = 0; i < f.dcir.size(); ++i) EXPECT_NEAR(f.dcir[i].resistance_ohm, engine_ohm[i], 0.02 * engine_ohm[i]) << i;
  EXPECT_LT(f.dcir.front().depth_of_discharge, 0.05);
  EXPECT_GT(f.dcir.back().depth_of_discharge, 0.8);
  EXPECT_GT(f.dcir.back().resistance_ohm, f.dcir.front().resistance_ohm);
}

// Peukert (1897): ln t = ln C_p - k ln I, refitted here by hand from the
// stored steps: t = end of the discharge step minus its start.
TEST_F(DemoCampaignTest, PeukertExponentMatchesAFitOfTheStoredTimes) {
  const DemoFigures& f = *figures_;
  ASSERT_TRUE(f.peukert.has_value());
  std::vector<double> x, y;
  for (const DemoRun& r : f.runs) {
    if (r.part.rfind("Q4 ", 0) != 0) continue;
    auto steps = store_->LoadSteps(r.run_id);
    auto samples = store_->LoadSamples(r.run_id);
    ASSERT_TRUE(steps.ok() && samples.ok());
    const StepRow& d = steps->back();  // the discharge
    double end_s = 0.0, sum_i = 0.0;
    int n = 0;
    for (const Sample& s : *samples)
      if (s.step == d.index) {
        end_s = s.t_s;
        if (s.current_a > 0.1) sum_i += s.current_a, ++n;
      }
    ASSERT_GT(n, 0);
    x.push_back(std::log(sum_i / n));
    y.push_back(std::log((end_s - d.started_s) / 3600.0));
  }
  ASSERT_EQ(x.size(), 4u);
  double mx = 0, my = 0;
  for (size_t i = 0; i < x.size(); ++i) mx += x[i] / x.size(), my += y[i] / y.size();
  double sxy = 0, sxx = 0;
  for (size_t i = 0; i < x.size(); ++i) sxy += (x[i] - mx) * (y[i] - my), sxx += (x[i] - mx) * (x[i] - mx);
  double k = -sxy / sxx;
  EXPECT_NEAR(f.peukert->exponent_k, k, 0.01);
  // A Li-ion cell loses little to rate: k a little above 1 (from memory).
  EXPECT_GT(f.peukert->exponent_k, 1.0);
  EXPECT_LT(f.peukert->exponent_k, 1.2);
}

TEST_F(DemoCampaignTest, LifeProjectionUsesTheMeasuredDutyCycleCapacity) {
  const DemoFigures& f = *figures_;
  ASSERT_TRUE(f.life.has_value());
  // The profile of node-duty-cycle.kpp, by hand: 35 uA for 3590 s, 18 mA for
  // 3 s, 220 mA for 6 s, 2 A for 1 s, per hour.
  double mean_a = (35e-6 * 3590 + 0.018 * 3 + 0.220 * 6 + 2.0 * 1) / 3600.0;
  EXPECT_NEAR(f.life->average_current_a, mean_a, 1e-12);
  EXPECT_DOUBLE_EQ(f.life->capacity_mah, f.duty_mah);
  // Q = I t with self-discharge as a constant drain of a share of the starting
  // capacity per month (common practice, no source).
  double drain_ma = f.self_discharge_per_month * f.duty_mah / kHoursPerMonth;
  EXPECT_NEAR(f.life->hours, f.duty_mah / (mean_a * 1000.0 + drain_ma), 1e-6 * f.life->hours);
  EXPECT_FALSE(f.life->assumptions.empty());
}

TEST_F(DemoCampaignTest, OverTemperatureAbortsTheFailingCellWithTheLoadOff) {
  const DemoFigures& f = *figures_;
  EXPECT_EQ(f.failing_outcome, Outcome::kAborted);
  EXPECT_NE(f.failing_reason.find("temp"), std::string::npos) << f.failing_reason;
  EXPECT_FALSE(f.failing_load_on_after);
  EXPECT_EQ(f.failing_load_current_after_a, 0.0);
  EXPECT_GE(f.failing_max_temperature_c, 50.0);  // the procedure's max-temp
  auto events = store_->LoadEvents(f.failing_run);
  ASSERT_TRUE(events.ok());
  ASSERT_FALSE(events->empty());
  EXPECT_EQ(events->back().kind, "abort");
  auto row = store_->GetRun(f.failing_run);
  ASSERT_TRUE(row.ok());
  EXPECT_EQ(row->reason, f.failing_reason);
}

TEST_F(DemoCampaignTest, EveryLinkInTheReportResolves) {
  std::filesystem::path dir = dir_->path() / "report";
  std::ifstream in(dir / "index.html");
  std::stringstream ss;
  ss << in.rdbuf();
  std::string html = ss.str();
  EXPECT_EQ(testing::CheckXml(html), "") << "index.html is not well-formed XHTML";
  std::regex href("href=\"([^\"]+)\"");
  int links = 0;
  for (auto it = std::sregex_iterator(html.begin(), html.end(), href); it != std::sregex_iterator(); ++it) {
    ++links;
    EXPECT_TRUE(std::filesystem::is_regular_file(dir / (*it)[1].str())) << (*it)[1].str();
  }
  EXPECT_EQ(links, static_cast<int>(figures_->runs.size()) + 3);  // each run, two comparisons, the batch report
  for (const std::string& page : figures_->pages) EXPECT_TRUE(std::filesystem::is_regular_file(dir / page)) << page;
}

// Every procedure under procedures/library/demo is compiled in (the demo runs
// from any folder) byte for byte, and compiles.
TEST(DemoCampaign, ShippedProceduresAreTheBuiltInsAndCompile) {
  std::set<std::string> files;
  for (const auto& entry : std::filesystem::directory_iterator(testing::SourcePath("procedures/library/demo"))) {
    if (entry.path().extension() != ".kpp") continue;
    files.insert(entry.path().filename().string());
    std::ifstream in(entry.path());
    std::stringstream ss;
    ss << in.rdbuf();
    const embedded::EmbeddedText* built_in = nullptr;
    for (const embedded::EmbeddedText& p : embedded::kDemoProcedures)
      if (p.file == entry.path().filename().string()) built_in = &p;
    ASSERT_NE(built_in, nullptr) << entry.path();
    EXPECT_EQ(ss.str(), std::string(built_in->text)) << entry.path();
    EXPECT_TRUE(CompileProcedure(built_in->text, entry.path().filename().string()).ok()) << entry.path();
  }
  EXPECT_EQ(files.size(), std::size(embedded::kDemoProcedures));
}

TEST(DemoCampaign, RefusesToReplaceAFileThatIsNotAKneepointDatabase) {
  testing::TempDir dir;
  std::string path = dir.File("notes.db");
  {
    std::ofstream f(path);
    f << "lab notes, not a database\n";
  }
  Status st = PrepareDemoDb(path);
  EXPECT_EQ(st.code(), StatusCode::kInvalidInput);
  EXPECT_TRUE(std::filesystem::exists(path));
}

}  // namespace
}  // namespace kp
