// "Figures you can sign": each figure of a report checked against an
// independent computation named beside it, on procedures that mix step kinds,
// sample sparsely, rest after the discharge, charge before it, or cycle.
// Every case first reproduced a wrong figure of the analysis that re-inferred
// the run's structure from the samples.
#include <gtest/gtest.h>

#include <fmt/format.h>

#include <cmath>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "analysis/peukert.h"
#include "drivers/sim/cell_model.h"
#include "procedures/procedure_parser.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "rig/store.h"
#include "tests/support/batch_analysis.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/report/run_report.h"

namespace kp {
namespace {

// The procedures describe the 2500 mAh cell that sim::DemoLiIonCell(2.56) simulates.
const char* const kCell = testing::kCell2500Line;
Plan Compile(const std::string& body) { return testing::CompileForCell2500(body); }

struct Rig {
  testing::TempDir dir;
  SteadyClock wall;
  VirtualClock clock;
  std::unique_ptr<Store> store;
  explicit Rig() {
    auto s = Store::Open(dir.File("run.db"), wall);
    EXPECT_TRUE(s.ok()) << s.status().ToString();
    store = std::move(*s);
  }
  // Each run on a fresh full cell of the same type.
  RunResult Run(const Plan& plan, double initial_soc = 1.0, std::optional<double> thermometer_tolerance_c = std::nullopt) {
    sim::CellParams cell = sim::DemoLiIonCell(2.56);
    cell.initial_soc = initial_soc;
    SimRig rig(clock, cell);
    RigRoles roles = rig.roles();
    if (thermometer_tolerance_c) roles.thermometer_tolerance_c = *thermometer_tolerance_c;
    RunController rc(*store, clock, roles);
    RunOptions o;
    o.cell_name = "figures-cell";
    auto r = rc.Execute(plan, o);
    EXPECT_TRUE(r.ok()) << r.status().ToString();
    EXPECT_FALSE(rig.bench().load_input_on());
    return r.ok() ? *r : RunResult{};
  }
  std::vector<Sample> Samples(int64_t id) {
    auto s = store->LoadSamples(id);
    EXPECT_TRUE(s.ok());
    return s.ok() ? *s : std::vector<Sample>{};
  }
  RunReport Report(int64_t id) {
    auto r = BuildRunReport(*store, id);
    EXPECT_TRUE(r.ok()) << r.status().ToString();
    return r.ok() ? *r : RunReport{};
  }
};

// Q = I·t for what the procedure commanded (common practice, no source), from
// the step records alone: constant-current steps give level × duration, pulse
// trains (HIGH/T1 LOW/T2) give the commanded timeline's charge.
double CommandedMah(const Plan& plan, const std::vector<StepRow>& steps, size_t first, size_t last) {
  double as = 0.0;
  for (size_t k = first; k <= last; ++k) {
    const StepRow& r = steps[k];
    const Step& st = plan.steps[static_cast<size_t>(r.index)];
    const double len = *r.ended_s - r.started_s;
    if (st.kind == StepKind::kConstantCurrent) as += st.current_a * len;
    if (st.kind == StepKind::kPulseTrain) {
      double t = 0;
      while (t < len - 1e-9)
        for (const Segment& g : st.segments) {
          double d = std::min(g.duration_s, len - t);
          if (d <= 0) break;
          as += g.level * d;
          t += d;
        }
    }
  }
  return as / 3.6;
}

// A trapezoid written here (common practice, no source): ∫ I dt over the
// samples with t in (a, b], bridging from the reading before the first.
double TrapezoidMah(const std::vector<Sample>& s, double a, double b) {
  double as = 0;
  for (size_t i = 1; i < s.size(); ++i)
    if (s[i].t_s > a && s[i].t_s <= b) as += 0.5 * (s[i].current_a + s[i - 1].current_a) * (s[i].t_s - s[i - 1].t_s);
  return as / 3.6;
}

double TrapezoidMeanV(const std::vector<Sample>& s, double a, double b) {
  double vs = 0, span = 0;
  for (size_t i = 1; i < s.size(); ++i)
    if (s[i].t_s > a && s[i].t_s <= b) {
      double dt = s[i].t_s - s[i - 1].t_s;
      vs += 0.5 * (s[i].voltage_v + s[i - 1].voltage_v) * dt;
      span += dt;
    }
  return vs / span;
}

// Symptom 1: pulses then constant current, logged every 60 s: the constant
// current vanished from the delivered charge.
TEST(Figures, PulsesThenConstantCurrentCountBoth) {
  Rig rig;
  Plan p = Compile(
      "pulse 2A/2s 0A/2s until time>=20min every=60s\n"
      "discharge 0.5A until voltage<=2.75V every=60s\n");
  RunResult r = rig.Run(p);
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  RunReport rep = rig.Report(r.run_id);
  const double commanded = CommandedMah(p, rep.steps, 0, 1);
  EXPECT_GT(commanded, 2000.0);
  EXPECT_NEAR(rep.analysis.discharge_charge_mah, commanded, 0.005 * commanded);
  // Each step integrated on its own, and they add up.
  ASSERT_EQ(rep.analysis.instances.size(), 2u);
  EXPECT_NEAR(rep.analysis.instances[0].f.charge_mah + rep.analysis.instances[1].f.charge_mah,
              rep.analysis.discharge_charge_mah, 1e-9);
  EXPECT_NEAR(rep.analysis.instances[1].f.charge_mah, TrapezoidMah(rig.Samples(rep.run.id), rep.steps[1].started_s, *rep.steps[1].ended_s),
              1e-9);
  EXPECT_TRUE(rep.analysis.pulsed);
}

// Symptom 1 (loops): an HPPC-like loop of pulses, 10 % discharges and rests.
TEST(Figures, HppcLikeLoopDeliversEveryStep) {
  Rig rig;
  Plan p = Compile(
      "repeat 3\n"
      "  pulse 2C/10s 0A/40s until time>=50s every=5s\n"
      "  discharge 1C until charge>=10% every=30s\n"
      "  rest 10min every=60s\n"
      "end\n");
  RunResult r = rig.Run(p);
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  RunReport rep = rig.Report(r.run_id);
  ASSERT_EQ(rep.steps.size(), 9u);
  // One discharge: from the first pulse to the last 10 % step; the trailing rest is not in it.
  ASSERT_EQ(rep.analysis.discharges.size(), 1u);
  const DischargeFigures& d = rep.analysis.discharges[0];
  EXPECT_EQ(rep.analysis.instances[d.first].number, 1);
  EXPECT_EQ(rep.analysis.instances[d.last].number, 2);
  EXPECT_DOUBLE_EQ(d.end_s, *rep.steps[7].ended_s);
  const double commanded = CommandedMah(p, rep.steps, 0, 7);
  EXPECT_NEAR(commanded, 3 * (5.0 * 10 / 3.6 + 250.0), 3.0);  // 3 × (2C for 10 s + 10 % of 2500 mAh)
  EXPECT_NEAR(rep.analysis.discharge_charge_mah, commanded, 0.005 * commanded);
  // The loop passes are recorded.
  EXPECT_EQ(rep.steps[0].pass, 1);
  EXPECT_EQ(rep.steps[3].pass, 2);
  EXPECT_EQ(rep.steps[8].pass, 3);
}

// Symptom 1: two pulse trains separated by a charge: each discharge's charge
// does not depend on the logging period.
TEST(Figures, PulseTrainsAroundAChargeDoNotDependOnTheLoggingPeriod) {
  std::vector<double> first, second;
  for (const char* every : {"1s", "30s"}) {
    Rig rig;
    Plan p = Compile(fmt::format(
        "pulse 1A/3s 0.1A/3s until time>=30min every={0}\n"
        "charge 0.5C to 4.2V until current<=0.05C every={0}\n"
        "pulse 1A/3s 0.1A/3s until time>=30min every={0}\n",
        every));
    RunResult r = rig.Run(p, 0.6);
    ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
    RunReport rep = rig.Report(r.run_id);
    ASSERT_EQ(rep.analysis.discharges.size(), 2u);
    // Q = I·t of the commanded timeline: 30 min at a mean of 0.55 A.
    for (const DischargeFigures& d : rep.analysis.discharges) EXPECT_NEAR(d.charge_mah, 0.55 * 1800 / 3.6, 0.5);
    first.push_back(rep.analysis.discharges[0].charge_mah);
    second.push_back(rep.analysis.discharges[1].charge_mah);
    // Two cycles: before the charge (0) and after it (1).
    ASSERT_EQ(rep.analysis.cycles.size(), 2u);
    EXPECT_GT(rep.analysis.cycles[1].charge_in_mah, 100.0);
  }
  EXPECT_NEAR(first[0], first[1], 0.5);
  EXPECT_NEAR(second[0], second[1], 0.5);
}

// Symptom 2 and 3: a rest after the discharge (and none before it): the rest
// is not discharging and the t = 0 reading is not in the discharge.
TEST(Figures, TrailingRestAndOpenCircuitReadingAreNotTheDischarge) {
  Rig rig;
  Plan p = Compile("discharge 0.2C until voltage<=2.75V every=10s\nrest 1h every=10s\n");
  RunResult r = rig.Run(p);
  ASSERT_EQ(r.outcome, Outcome::kCompleted);
  RunReport rep = rig.Report(r.run_id);
  const RunAnalysis& a = rep.analysis;
  const StepRow& d = rep.steps[0];
  // Q = I·t over the discharge step (the first 0.05 s ramp from the t = 0
  // reading costs 0.025 s of 0.5 A).
  const double dur = *d.ended_s - d.started_s;
  EXPECT_NEAR(a.discharge_charge_mah, 0.5 * (dur - 0.025) / 3.6, 0.01);
  EXPECT_NEAR(a.average_current_a, 0.5, 0.001);
  EXPECT_DOUBLE_EQ(a.discharge_duration_s, dur);
  EXPECT_NEAR(a.mean_voltage_v, TrapezoidMeanV(rig.Samples(rep.run.id), d.started_s, *d.ended_s), 1e-9);
  // The 0.2 It run is judged at 0.2 It, and its current condition holds.
  EXPECT_TRUE(a.verdict.judged) << a.verdict.text;
  ASSERT_FALSE(a.verdict.conditions.empty());
  EXPECT_EQ(a.verdict.conditions[0].name, "discharge current");
  EXPECT_TRUE(a.verdict.conditions[0].met) << a.verdict.conditions[0].observed;
}

// Symptom 2: a Peukert series with a rest after each discharge. The exponent
// is checked against a least-squares fit done here by hand on the step
// records (ln t = ln C_p − k ln I; Peukert 1897 form C_p = I^k t).
TEST(Figures, PeukertSeriesWithRestsFitsTheDischargesOnly) {
  Rig rig;
  std::vector<int64_t> ids;
  std::vector<double> ln_i, ln_t;
  for (const char* rate : {"0.5A", "1A", "2A"}) {
    RunResult r = rig.Run(Compile(fmt::format("discharge {} until voltage<=2.75V every=10s\nrest 1h every=30s\n", rate)));
    ASSERT_EQ(r.outcome, Outcome::kCompleted);
    ids.push_back(r.run_id);
    auto steps = *rig.store->LoadSteps(r.run_id);
    ln_i.push_back(std::log(std::stod(rate)));
    ln_t.push_back(std::log((*steps[0].ended_s - steps[0].started_s) / 3600.0));
  }
  double mx = (ln_i[0] + ln_i[1] + ln_i[2]) / 3, my = (ln_t[0] + ln_t[1] + ln_t[2]) / 3, sxy = 0, sxx = 0;
  for (int k = 0; k < 3; ++k) sxy += (ln_i[k] - mx) * (ln_t[k] - my), sxx += (ln_i[k] - mx) * (ln_i[k] - mx);
  const double k_hand = -sxy / sxx;
  auto cmp = BuildCompareReport(*rig.store, ids, std::nullopt);
  ASSERT_TRUE(cmp.ok());
  ASSERT_TRUE(cmp->peukert.fit.has_value()) << cmp->peukert.error;
  EXPECT_NEAR(cmp->peukert.fit->exponent_k, k_hand, 0.002);
  // Li-ion k about 1.05 (secondary source): well under the 1.59 the rests gave.
  EXPECT_LT(cmp->peukert.fit->exponent_k, 1.15);
  EXPECT_GT(cmp->peukert.fit->exponent_k, 1.0);
}

// Symptom 4: the demo's DC-IR sweep gives one positive point per dcir step,
// none at the charge start or the rest boundaries, each U1 read at the end of
// I1 and U2 at the end of I2; the value matches the simulated cell's own
// R0 + RC algebra.
TEST(Figures, DcirSweepOnePointPerDcirStep) {
  Rig rig;
  Plan p = Compile(
      "charge 0.5C to 4.2V until current<=0.05C every=10s\n"
      "rest 10min every=10s\n"
      "repeat until voltage<=2.75V\n"
      "  dcir 0.2C/10s 1C/1s every=100ms\n"
      "  discharge 0.5C until charge>=20% or voltage<=2.75V every=5s\n"
      "  rest 10min every=10s\n"
      "end\n");
  RunResult r = rig.Run(p, 0.9);
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  RunReport rep = rig.Report(r.run_id);
  int dcir_steps = 0;
  for (const StepRow& s : rep.steps) dcir_steps += s.kind == "dc resistance";
  EXPECT_GE(dcir_steps, 4);
  ASSERT_EQ(static_cast<int>(rep.analysis.dcir.size()), dcir_steps);
  // R0 + RC algebra of the simulated cell (its parameters; a fresh cell at rest):
  // after 10 s at I1 the fast and slow RC voltages are I1·R·(1 − e^(−10/τ)); 1 s
  // at I2 moves them towards I2·R; R_dc = ΔU / ΔI.
  const sim::CellParams c = sim::DemoLiIonCell(2.56);
  const double i1 = 0.5, i2 = 2.5;
  auto rc = [&](double r, double tau) {
    double v10 = i1 * r * (1 - std::exp(-10 / tau));
    double v11 = v10 * std::exp(-1 / tau) + i2 * r * (1 - std::exp(-1 / tau));
    return v11 - v10;
  };
  const double expected = ((i2 - i1) * c.r0_ohm + rc(c.r1_ohm, c.tau1_s) + rc(c.r2_ohm, c.tau2_s)) / (i2 - i1);
  const DcirPoint& first = rep.analysis.dcir.front();
  EXPECT_NEAR(first.resistance_ohm, expected, 0.05 * expected);
  for (const DcirPoint& pt : rep.analysis.dcir) {
    EXPECT_GT(pt.resistance_ohm, 0.0);
    EXPECT_NEAR(pt.i1_a, i1, 1e-6);
    EXPECT_NEAR(pt.i2_a, i2, 1e-6);
    EXPECT_NEAR(pt.t_u2_s - pt.t_edge_s, 1.0, 1e-6);
  }
  EXPECT_TRUE(rep.analysis.dcir_left_out.empty());
  nlohmann::json j = RunReportJson(rep);
  EXPECT_EQ(j["schema_version"], kReportSchemaVersion);
  EXPECT_EQ(j["dcir"][0]["source"], "dcir step");
}

// Symptom 4: edges inside a pulse train logged every 30 s: U1 is the reading
// at the edge and U2 the one a second after it, whatever the logging period.
TEST(Figures, PulseEdgesAreMeasuredAtTheEdgeWhateverTheLoggingPeriod) {
  Rig rig;
  Plan p = Compile("pulse 1A/10s 0.2A/10s until time>=10min every=30s\n");
  RunResult r = rig.Run(p);
  ASSERT_EQ(r.outcome, Outcome::kCompleted);
  RunReport rep = rig.Report(r.run_id);
  // 60 segments: 59 edges inside the step (the step's own start is not one).
  EXPECT_EQ(rep.analysis.dcir.size(), 59u);
  for (const DcirPoint& pt : rep.analysis.dcir) {
    EXPECT_NEAR(pt.t_u2_s - pt.t_edge_s, 1.0, 1e-6);
    EXPECT_GT(pt.resistance_ohm, 0.0);
    EXPECT_NEAR(std::abs(pt.i2_a - pt.i1_a), 0.8, 1e-6);
  }
  // The U1 and U2 readings are stored even though the period is 30 s.
  size_t at_edges = 0;
  const std::vector<Sample> stored = rig.Samples(rep.run.id);
  for (const Sample& s : stored)
    for (const DcirPoint& pt : rep.analysis.dcir) at_edges += std::abs(s.t_s - pt.t_u2_s) < 1e-9;
  EXPECT_EQ(at_edges, rep.analysis.dcir.size());
}

// A pulse too short for the delay: the points are left out with their reason.
TEST(Figures, PulsesShorterThanTheDelayAreCountedAsLeftOut) {
  Rig rig;
  RunResult r = rig.Run(Compile("pulse 1A/500ms 0A/2s until time>=25s every=1s\n"));
  ASSERT_EQ(r.outcome, Outcome::kCompleted);
  RunReport rep = rig.Report(r.run_id);
  ASSERT_FALSE(rep.analysis.dcir_left_out.empty());
  int left = 0;
  for (const auto& [why, n] : rep.analysis.dcir_left_out) {
    left += n;
    EXPECT_NE(why.find("shorter than"), std::string::npos) << why;
  }
  // 10 periods of 2.5 s: the edges into the 0.5 s pulses (t = 2.5, 5 ... 22.5 s)
  // are left out; the 10 edges into the 2 s rests give points.
  EXPECT_EQ(left, 9);
  EXPECT_EQ(rep.analysis.dcir.size(), 10u);
}

// Symptom 5: constant power and constant resistance are not pulsed, and a
// constant-resistance run is described as such; neither is judged as the
// constant-current test nor enters a Peukert fit.
TEST(Figures, ConstantPowerAndResistanceAreClassifiedByTheirSteps) {
  Rig rig;
  RunResult cp = rig.Run(Compile("discharge 2W until voltage<=2.75V every=30s\n"));
  RunResult cr = rig.Run(Compile("discharge 6Ohm until voltage<=2.75V every=30s\n"));
  RunReport a = rig.Report(cp.run_id), b = rig.Report(cr.run_id);
  EXPECT_FALSE(a.analysis.pulsed);
  EXPECT_FALSE(b.analysis.pulsed);
  EXPECT_NE(b.analysis.discharge_description.find("constant resistance 6 Ohm"), std::string::npos)
      << b.analysis.discharge_description;
  EXPECT_EQ(b.analysis.verdict.not_judged_why, "constant-resistance discharge");
  EXPECT_EQ(a.analysis.verdict.not_judged_why, "constant-power discharge");
  EXPECT_FALSE(a.analysis.constant_current);
  auto cmp = BuildCompareReport(*rig.store, {cp.run_id, cr.run_id}, std::nullopt);
  ASSERT_TRUE(cmp.ok());
  EXPECT_FALSE(cmp->peukert.fit.has_value());  // no constant-current run
}

// Symptom 5: plain CC cycling is not pulsed; cycles get their own table.
TEST(Figures, ConstantCurrentCyclingHasACycleTable) {
  Rig rig;
  Plan p = Compile(
      "repeat 2\n"
      "  charge 0.5C to 4.2V until current<=0.05C every=30s\n"
      "  rest 10min every=60s\n"
      "  discharge 0.5C until voltage<=2.75V every=30s\n"
      "end\n");
  RunResult r = rig.Run(p, 0.5);
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  RunReport rep = rig.Report(r.run_id);
  const RunAnalysis& a = rep.analysis;
  EXPECT_FALSE(a.pulsed);
  ASSERT_EQ(a.cycles.size(), 2u);
  for (size_t k = 0; k < 2; ++k) {
    const CycleFigures& c = a.cycles[k];
    EXPECT_EQ(c.cycle, static_cast<int>(k) + 1);
    // Charge in: a trapezoid over the charge step's samples (charging is negative current).
    const StepRow& ch = rep.steps[3 * k];
    EXPECT_NEAR(c.charge_in_mah, -TrapezoidMah(rig.Samples(rep.run.id), ch.started_s, *ch.ended_s), 1e-6);
    const StepRow& dis = rep.steps[3 * k + 2];
    EXPECT_NEAR(c.discharge_mah, TrapezoidMah(rig.Samples(rep.run.id), dis.started_s, *dis.ended_s), 1e-6);
    ASSERT_TRUE(c.coulombic_efficiency.has_value());
    EXPECT_NEAR(*c.coulombic_efficiency, c.discharge_mah / c.charge_in_mah, 1e-12);
  }
  // The first charge starts from half full; the second from empty: charged
  // in and discharged out match to within a few percent.
  EXPECT_GT(*a.cycles[0].coulombic_efficiency, 1.5);
  EXPECT_GT(*a.cycles[1].coulombic_efficiency, 0.9);
  EXPECT_LT(*a.cycles[1].coulombic_efficiency, 1.05);
  EXPECT_DOUBLE_EQ(*a.cycles[0].retention, 1.0);
  EXPECT_NEAR(*a.cycles[1].retention, a.cycles[1].discharge_mah / a.cycles[0].discharge_mah, 1e-12);
  // Two attempts at the capacity; the verdict says which one it judged.
  EXPECT_EQ(a.attempts.size(), 2u);
  EXPECT_NE(a.verdict.text.find("attempt"), std::string::npos) << a.verdict.text;
  // The runs row holds the last discharge and the charge put in, and the net beside them.
  auto totals = rig.store->LoadRunTotals(r.run_id);
  ASSERT_TRUE(totals.ok());
  ASSERT_TRUE(totals->delivered_mah.has_value());
  EXPECT_NEAR(*totals->delivered_mah, a.cycles[1].discharge_mah, 0.5);
  EXPECT_NEAR(*totals->charged_mah, a.cycles[0].charge_in_mah + a.cycles[1].charge_in_mah, 0.5);
  EXPECT_NEAR(totals->net_mah, a.totals.charge_mah, 0.5);
  // Cycle index in every per-step export.
  std::string steps_csv = RunReportStepsCsv(rep);
  EXPECT_NE(steps_csv.find(",number,pass,cycle,"), std::string::npos);
  nlohmann::json j = RunReportJson(rep);
  EXPECT_EQ(j["steps"][3]["cycle"], 2);
  EXPECT_EQ(j["steps"][3]["number"], 1);
  EXPECT_EQ(j["cycles"].size(), 2u);
  std::string cycles_csv = RunReportCyclesCsv(rep);
  EXPECT_EQ(std::count(cycles_csv.begin(), cycles_csv.end(), '\n'), 3);
  EXPECT_NE(cycles_csv.find(fmt::format("\n2,{},", a.cycles[1].charge_in_mah)), std::string::npos) << cycles_csv;
  EXPECT_NE(RunReportHtml(rep).find("plot-capacity-cycle"), std::string::npos);
}

// Symptom 5: two runs always fit a line: R^2 is marked not meaningful.
TEST(Figures, TwoRunPeukertFitHasNoMeaningfulRSquared) {
  Rig rig;
  RunResult a = rig.Run(Compile("discharge 1A until voltage<=2.75V every=10s\n"));
  RunResult b = rig.Run(Compile("discharge 2A until voltage<=2.75V every=10s\n"));
  auto cmp = BuildCompareReport(*rig.store, {a.run_id, b.run_id}, std::nullopt);
  ASSERT_TRUE(cmp.ok());
  nlohmann::json j = CompareReportJson(*cmp);
  EXPECT_EQ(j["peukert"]["r_squared_meaningful"], false);
  EXPECT_NE(CompareReportText(*cmp).find("not meaningful"), std::string::npos);
}

// Symptom 6: CSV keeps full precision (a 1.5 uA run), and the HTML DC-IR
// table headed mOhm and % prints milliohms and percent.
TEST(Figures, ExportsKeepMicroampsAndTheDcirTableItsUnits) {
  Rig rig;
  RunResult r = rig.Run(Compile("discharge 1.5uA until time>=1h every=60s\n"));
  ASSERT_EQ(r.outcome, Outcome::kCompleted);
  std::string csv = rig.dir.File("s.csv");
  ASSERT_EQ(testing::RunKneepoint({"export", std::to_string(r.run_id), "--db", rig.dir.File("run.db"), "--csv", csv}), 0);
  std::ifstream in(csv);
  std::string line;
  std::getline(in, line);
  EXPECT_EQ(line, "t_s,voltage_V,current_A,temperature_C,step,step_number,cycle,time_utc,step_kind,charge_Ah,energy_Wh\r");
  std::vector<Sample> s;
  while (std::getline(in, line)) {
    std::stringstream ls(line);
    std::string f[7];
    for (auto& x : f) std::getline(ls, x, ',');
    s.push_back({std::stod(f[0]), std::stod(f[1]), std::stod(f[2]), std::stod(f[3]), std::stoi(f[4])});
    EXPECT_EQ(std::stoi(f[5]), 1);
    EXPECT_EQ(std::stoi(f[6]), 0);
  }
  // Q = I·t: 1.5 uA for 1 h = 0.0015 mAh, from the exported rows.
  EXPECT_NEAR(TrapezoidMah(s, 0.0, 3600.0), 0.0015, 0.0015 * 0.01);

  RunResult d = rig.Run(Compile("rest 1min\ndcir 0.2C/10s 1C/1s every=100ms\n"));
  RunReport rep = rig.Report(d.run_id);
  ASSERT_EQ(rep.analysis.dcir.size(), 1u);
  std::string html = RunReportHtml(rep);
  EXPECT_NE(html.find("R (mOhm)"), std::string::npos);
  EXPECT_NE(html.find(fmt::format("{:.2f}", rep.analysis.dcir[0].resistance_ohm * 1000.0)), std::string::npos);
}

// Symptom 8: a charge before the discharge: the runs row's delivered figure
// is the discharge, the net is labelled net.
TEST(Figures, RunsRowHoldsTheDischargeNotTheNet) {
  Rig rig;
  RunResult r = rig.Run(Compile("charge 0.5C to 4.2V until current<=0.05C every=30s\ndischarge 0.2C until voltage<=2.75V every=30s\n"),
                        0.2);
  ASSERT_EQ(r.outcome, Outcome::kCompleted);
  RunReport rep = rig.Report(r.run_id);
  auto totals = rig.store->LoadRunTotals(r.run_id);
  ASSERT_TRUE(totals.ok());
  EXPECT_NEAR(*totals->delivered_mah, rep.analysis.discharge_charge_mah, 0.005 * rep.analysis.discharge_charge_mah);
  EXPECT_LT(totals->net_mah, 0.5 * rep.analysis.discharge_charge_mah);
  EXPECT_NEAR(totals->net_mah, *totals->delivered_mah - *totals->charged_mah, 1.0);
  // Mean voltage of the discharge only (a trapezoid here), not the charge's.
  const StepRow& d = rep.steps[1];
  EXPECT_NEAR(rep.analysis.mean_voltage_v, TrapezoidMeanV(rig.Samples(rep.run.id), d.started_s, *d.ended_s), 1e-9);
}

// Symptom 9: logged every 10 s at 1C, the discharge still ends within 10 mV
// of its cutoff (limit checks between logs).
TEST(Figures, CutoffIsMetBetweenLogs) {
  Rig rig;
  RunResult r = rig.Run(Compile("discharge 1C until voltage<=3.0V every=10s\n"));
  ASSERT_EQ(r.outcome, Outcome::kCompleted);
  auto s = rig.store->LoadSamples(r.run_id);
  ASSERT_TRUE(s.ok());
  EXPECT_LE(s->back().voltage_v, 3.0);
  EXPECT_GT(s->back().voltage_v, 3.0 - 0.010);
  // Logged at the period, not at every check.
  EXPECT_LT(s->size(), 3600u / 10u + 20u);
}

// Symptom 9: a step whose cutoff lies below what the load will hold never
// sits powerless until max-time: it either reaches its cutoff or the run
// aborts for lost regulation within the stated bound.
TEST(Figures, ALoadThatCannotHoldTheLevelNeverSitsUntilMaxTime) {
  Rig rig;
  RunResult r = rig.Run(Compile("safety max-time=10h min-voltage=2.0V\ndischarge 1C until voltage<=2.2V every=10s\n"));
  auto s = *rig.store->LoadSamples(r.run_id);
  ASSERT_FALSE(s.empty());
  if (r.outcome == Outcome::kAborted) {
    EXPECT_NE(r.reason.find("lost regulation"), std::string::npos) << r.reason;
    // From the first reading at under half the current to the end: within the
    // 10 s grace and one reading.
    double first_low = -1;
    for (const Sample& x : s)
      if (x.t_s > 1 && x.current_a < 1.25 && first_low < 0) first_low = x.t_s;
    ASSERT_GT(first_low, 0);
    EXPECT_LE(s.back().t_s - first_low, 10.0 + 10.0);
  } else {
    ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
    EXPECT_LE(s.back().voltage_v, 2.2);
  }
  EXPECT_LT(s.back().t_s, 2.0 * 3600);
}

// Engine level: a load that stops drawing aborts after the grace, naming the step.
TEST(Figures, LostRegulationAbortsAfterTheGrace) {
  Plan p = Compile("discharge 0.5A until time>=1h every=1s\n");
  StepEngine e(p);
  (void)e.Start(0);
  EngineOutput out;
  double t = 0;
  for (int k = 0; k < 5; ++k) out = e.OnReading({t = e.NextWakeup(), 3.9, 0.5, 25});
  EXPECT_FALSE(out.abort_reason);
  const double low_from = e.NextWakeup();
  while (!out.abort_reason && t < 100) out = e.OnReading({t = e.NextWakeup(), 3.9, 0.0, 25});
  ASSERT_TRUE(out.abort_reason.has_value());
  EXPECT_NEAR(t - low_from, p.regulation_grace_s, 1e-6);
  EXPECT_NE(out.abort_reason->find("step 1"), std::string::npos);
}

// The thermometer's tolerance the rig states is stored with the run and
// used by its verdict.
TEST(Figures, ThermometerToleranceTravelsWithTheRun) {
  Rig rig;
  RunResult r = rig.Run(Compile("rest 1h every=60s\ndischarge 0.2C until voltage<=2.75V every=60s\n"), 1.0, 0.2);
  ASSERT_EQ(r.outcome, Outcome::kCompleted);
  auto totals = rig.store->LoadRunTotals(r.run_id);
  ASSERT_TRUE(totals.ok());
  ASSERT_TRUE(totals->thermometer_tolerance_c.has_value());
  EXPECT_DOUBLE_EQ(*totals->thermometer_tolerance_c, 0.2);
  RunReport rep = rig.Report(r.run_id);
  ASSERT_GE(rep.analysis.verdict.conditions.size(), 2u);
  EXPECT_NE(rep.analysis.verdict.conditions[1].required.find("± 0.20 °C"), std::string::npos)
      << rep.analysis.verdict.conditions[1].required;
}

// Symptom 7: the start temperature is judged with the thermometer's
// tolerance and shown to 0.01 degC.
TEST(Figures, StartTemperatureHasATolerance) {
  CapacityMethod m = MethodForChemistry("li-ion");
  DischargeConditions d;
  d.rated_mah = 2500;
  d.delivered_mah = 2550;
  d.mean_current_a = 0.5;
  d.commanded_current_a = 0.5;
  d.rest_before_s = 7200;
  d.start_temperature_c = d.min_temperature_c = d.max_temperature_c = 25.04;
  d.temperature_tolerance_c = 0.1;
  CapacityJudgement j = JudgeCapacityByMethod(m, d);
  EXPECT_TRUE(j.conditions[1].met) << j.conditions[1].observed;
  EXPECT_NE(j.conditions[1].observed.find("25.04"), std::string::npos);
  d.start_temperature_c = 25.2;
  j = JudgeCapacityByMethod(m, d);
  EXPECT_FALSE(j.conditions[1].met);
  EXPECT_NE(j.conditions[1].observed.find("25.20"), std::string::npos);
}

// `check`: the default current limit covers constant resistance (max voltage
// / R) and constant power (P / min voltage); cutoffs below the cell's warn;
// a plan longer than its max-time is refused.
TEST(Figures, CheckCoversResistancePowerAndMaxTime) {
  auto cr = ParseProcedure(std::string(kCell) + "discharge 1Ohm until voltage<=2.75V\n", "t");
  ASSERT_TRUE(cr.ok());
  EXPECT_GE(cr.plan.limits.max_current_a, 4.2 / 1.0);  // a full cell (4.2 V) into 1 Ohm
  auto cp = ParseProcedure(std::string(kCell) + "discharge 10W until voltage<=2.75V\n", "t");
  ASSERT_TRUE(cp.ok());
  EXPECT_GE(cp.plan.limits.max_current_a, 10.0 / cp.plan.limits.min_voltage_v);
  auto low = ParseProcedure(std::string(kCell) + "discharge 0.2C until voltage<=2.6V\n", "t");
  ASSERT_TRUE(low.ok());
  ASSERT_EQ(low.warnings.size(), 1u);
  EXPECT_EQ(low.warnings[0].line, 2);
  EXPECT_NE(low.warnings[0].message.find("below the cell's cutoff"), std::string::npos);
  auto below_min = ParseProcedure(std::string(kCell) + "safety min-voltage=2.5V\ndischarge 0.2C until voltage<=2.4V\n", "t");
  EXPECT_FALSE(below_min.ok());

  testing::TempDir dir;
  std::string f = dir.File("long.kpp");
  std::ofstream(f) << kCell << "safety max-time=2h\ndischarge 0.2C until time>=5h\n";
  EXPECT_EQ(testing::RunKneepoint({"check", f}), 2);  // 5 h at 0.2C cannot fit in 2 h
  std::ofstream(f, std::ios::trunc) << kCell << "safety max-time=6h\ndischarge 0.2C until time>=5h\n";
  EXPECT_EQ(testing::RunKneepoint({"check", f}), 0);
}

// The streaming analysis (one pass, bounded memory) against the batch
// recomputation over the same samples in memory, on procedures of every kind:
// each figure equal within rounding.
void ExpectSameAnalysis(const RunAnalysis& s, const RunAnalysis& b) {
  auto near = [](double x, double y) { return std::abs(x - y) <= 1e-9 * std::max(1.0, std::abs(y)); };
  EXPECT_TRUE(near(s.totals.charge_mah, b.totals.charge_mah));
  EXPECT_TRUE(near(s.totals.energy_wh, b.totals.energy_wh));
  EXPECT_TRUE(near(s.totals.mean_voltage_v, b.totals.mean_voltage_v));
  EXPECT_EQ(s.totals.sample_count, b.totals.sample_count);
  ASSERT_EQ(s.instances.size(), b.instances.size());
  for (size_t k = 0; k < s.instances.size(); ++k) {
    SCOPED_TRACE(k);
    EXPECT_TRUE(near(s.instances[k].f.charge_mah, b.instances[k].f.charge_mah))
        << s.instances[k].f.charge_mah << " vs " << b.instances[k].f.charge_mah;
    EXPECT_TRUE(near(s.instances[k].f.energy_wh, b.instances[k].f.energy_wh));
    EXPECT_TRUE(near(s.instances[k].f.mean_voltage_v, b.instances[k].f.mean_voltage_v));
    EXPECT_EQ(s.instances[k].f.samples, b.instances[k].f.samples);
    EXPECT_EQ(s.instances[k].method, b.instances[k].method);
  }
  ASSERT_EQ(s.discharges.size(), b.discharges.size());
  for (size_t k = 0; k < s.discharges.size(); ++k) {
    SCOPED_TRACE(k);
    const DischargeFigures &x = s.discharges[k], &y = b.discharges[k];
    EXPECT_TRUE(near(x.charge_mah, y.charge_mah));
    EXPECT_TRUE(near(x.mean_voltage_v, y.mean_voltage_v));
    EXPECT_TRUE(near(x.mid_voltage_v, y.mid_voltage_v)) << x.mid_voltage_v << " vs " << y.mid_voltage_v;
    EXPECT_TRUE(near(x.peak_current_a, y.peak_current_a));
    EXPECT_EQ(x.time_to_cutoff_s.has_value(), y.time_to_cutoff_s.has_value());
    if (x.time_to_cutoff_s && y.time_to_cutoff_s) EXPECT_TRUE(near(*x.time_to_cutoff_s, *y.time_to_cutoff_s));
    EXPECT_EQ(x.judgement.text, y.judgement.text);
    ASSERT_EQ(x.judgement.conditions.size(), y.judgement.conditions.size());
    for (size_t c = 0; c < x.judgement.conditions.size(); ++c)
      EXPECT_EQ(x.judgement.conditions[c].observed, y.judgement.conditions[c].observed);
  }
  EXPECT_EQ(s.main_discharge, b.main_discharge);
  EXPECT_EQ(s.verdict.text, b.verdict.text);
  ASSERT_EQ(s.cycles.size(), b.cycles.size());
  for (size_t k = 0; k < s.cycles.size(); ++k) EXPECT_TRUE(near(s.cycles[k].charge_in_mah, b.cycles[k].charge_in_mah));
  ASSERT_EQ(s.dcir.size(), b.dcir.size());
  for (size_t k = 0; k < s.dcir.size(); ++k) EXPECT_TRUE(near(s.dcir[k].delivered_mah, b.dcir[k].delivered_mah));
  ASSERT_EQ(s.pulses.size(), b.pulses.size());
  for (size_t k = 0; k < s.pulses.size(); ++k) {
    EXPECT_TRUE(near(s.pulses[k].min_voltage_v, b.pulses[k].min_voltage_v));
    EXPECT_TRUE(near(s.pulses[k].recovered_voltage_v, b.pulses[k].recovered_voltage_v));
    EXPECT_TRUE(near(s.pulses[k].rest_voltage_before_v, b.pulses[k].rest_voltage_before_v));
    EXPECT_TRUE(near(s.pulses[k].delivered_mah_at_start, b.pulses[k].delivered_mah_at_start));
  }
  ASSERT_EQ(s.gaps.size(), b.gaps.size());
}

TEST(Figures, StreamingAnalysisMatchesTheBatchRecomputation) {
  Rig rig;
  const char* procedures[] = {
      "pulse 2A/2s 0A/2s until time>=20min every=60s\ndischarge 0.5A until voltage<=2.75V every=60s\n",
      "repeat 3\n  pulse 2C/10s 0A/40s until time>=50s every=5s\n  discharge 1C until charge>=10% every=30s\n"
      "  rest 10min every=60s\nend\n",
      "repeat 2\n  charge 0.5C to 4.2V until current<=0.05C every=30s\n  rest 10min every=60s\n"
      "  discharge 0.5C until voltage<=2.75V every=30s\nend\n",
      "discharge 0.2C until voltage<=2.75V every=10s\nrest 1h every=10s\n",
      "discharge 6Ohm until voltage<=2.75V every=30s\n",
      "rest 10min every=10s\nrepeat until voltage<=2.75V\n  dcir 0.2C/10s 1C/1s every=100ms\n"
      "  discharge 0.5C until charge>=20% or voltage<=2.75V every=5s\n  rest 10min every=10s log-change=2mV\nend\n",
      "pulse 1A/3s 0.1A/3s until time>=30min every=30s\n",
  };
  for (const char* body : procedures) {
    SCOPED_TRACE(body);
    RunResult r = rig.Run(Compile(body), 0.9);
    RunReport rep = rig.Report(r.run_id);
    auto samples = rig.store->LoadSamples(r.run_id);
    ASSERT_TRUE(samples.ok());
    RunContext ctx = rep.context;
    ExpectSameAnalysis(rep.analysis, testing::BatchAnalyseRun(*samples, ctx));
    ExpectSameAnalysis(AnalyseRun(*samples, ctx), testing::BatchAnalyseRun(*samples, ctx));
  }
}

}  // namespace
}  // namespace kp
