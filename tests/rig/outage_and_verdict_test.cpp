// Outages counted on resume (the guardian's record, an in-process load, or an
// upper-bound estimate), verdicts only on finished discharges seen throughout,
// trace-file write failures as run events, and clean text out of the program.
#include <gtest/gtest.h>

#include <nlohmann/json.hpp>

#include <fstream>
#include <iterator>

#include "drivers/scpi_trace.h"
#include "drivers/text_hygiene.h"
#include "rig/judgeable.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/support/fixtures.h"
#include "tests/support/hostile_device.h"
#include "tests/support/test_support.h"
#include "ui/report/run_report.h"

namespace kp {
namespace {

EventRow Ev(double t, const std::string& kind, const std::string& msg) { return EventRow{t, kind, msg, ""}; }

TEST(OutageAccount, TheGuardiansRecordOfALoadFoundOnIsCounted) {
  std::vector<EventRow> events = {
      Ev(3600, "guardian", "runner 42 was killed by SIGKILL at 2026-12-01T10:00:00Z"),
      Ev(3600, "guardian",
         "load input 'load' (tcp:127.0.0.1:5025): found on; switched off, verified off by INP? 2.50 s after the runner's end (1 attempt)")};
  OutageAccount a = AccountOutage(600.0, 0.5, 3600.0, events, false);
  EXPECT_EQ(a.method, "guardian");
  EXPECT_FALSE(a.estimated());
  EXPECT_NEAR(a.counted_mah, 0.5 * 2.5 / 3.6, 1e-9);
  EXPECT_NEAR(a.upper_bound_mah, 0.5 * 3.5 / 3.6, 1e-9);
  EXPECT_NE(a.detail.find("found the load ON"), std::string::npos);
}

TEST(OutageAccount, ALoadFoundOffIsAnUpperBoundUntilTheGuardiansCheck) {
  std::vector<EventRow> events = {Ev(100, "guardian",
                                     "load input 'load' (tcp:127.0.0.1:5025): found off; switched off, verified off by INP? 1.00 s after "
                                     "the runner's end (1 attempt)")};
  OutageAccount a = AccountOutage(600.0, 1.8, 100.0, events, false);
  EXPECT_TRUE(a.estimated());
  EXPECT_NEAR(a.counted_mah, 1.8 * 2.0 / 3.6, 1e-9);
}

TEST(OutageAccount, WithoutARecordTheElapsedTimeAtTheLastCurrentIsTheUpperBound) {
  OutageAccount a = AccountOutage(600.0, 0.5, 100.0, {}, false);
  EXPECT_TRUE(a.estimated());
  EXPECT_NEAR(a.counted_mah, 0.5 * 600 / 3.6, 1e-9);
  // An older guardian record (before this outage) does not count.
  std::vector<EventRow> old = {Ev(50, "guardian", "load input 'l' (x): found on; switched off, verified off by INP? 1.00 s after the runner's end")};
  EXPECT_TRUE(AccountOutage(600.0, 0.5, 100.0, old, false).estimated());
  // A load in the runner's process stopped with it.
  OutageAccount in = AccountOutage(600.0, 0.5, 100.0, {}, true);
  EXPECT_EQ(in.method, "in-process");
  EXPECT_EQ(in.counted_mah, 0.0);
  // Charging: nothing drawn through the load.
  EXPECT_EQ(AccountOutage(600.0, -1.0, 100.0, {}, false).counted_mah, 0.0);
}

TEST(OutageAccount, TheReportCountsTheOutageAndSaysHow) {
  std::vector<EventRow> events = {Ev(5000, "outage", "outage of 600.0 s after t=4400.0 s: 83.333 mAh counted (method=estimate; x; at most 83.333 mAh)")};
  auto charges = OutageCharges(events);
  ASSERT_EQ(charges.size(), 1u);
  EXPECT_DOUBLE_EQ(charges[0].first, 5000);
  EXPECT_DOUBLE_EQ(charges[0].second, 83.333);
  bool estimated = false;
  EXPECT_NE(OutageNote(events, estimated).find("method=estimate"), std::string::npos);
  EXPECT_TRUE(estimated);
}

int64_t RunWith(testing::StoreFixture& f, const Plan& plan, RunOptions o = {}) {
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  RunController rc(*f.store, f.clock, rig.roles());
  o.cell_name = "V1";
  auto r = rc.Execute(plan, o);
  EXPECT_TRUE(r.ok());
  return r.ok() ? r->run_id : 0;
}

// An aborted discharge gets figures, not a verdict.
TEST(VerdictGate, AnAbortedRunIsNotJudged) {
  testing::StoreFixture f;
  Plan p = RatedCapacityPlan(testing::Cell2500());
  p.limits.max_total_s = 3600;  // aborts an hour into the 5 h discharge
  int64_t id = RunWith(f, p);
  auto rep = BuildRunReport(*f.store, id, {});
  ASSERT_TRUE(rep.ok()) << rep.status().ToString();
  EXPECT_FALSE(rep->analysis.verdict.judged);
  EXPECT_EQ(rep->analysis.verdict.text.find("FAIL"), std::string::npos) << rep->analysis.verdict.text;
  EXPECT_NE(rep->analysis.verdict.text.find("not judged: the run is aborted"), std::string::npos) << rep->analysis.verdict.text;
  for (const DischargeFigures& d : rep->analysis.discharges) EXPECT_FALSE(d.judgement.judged);
}

TEST(VerdictGate, TooManyMissingReadingsIsNotJudged) {
  RunRow run;
  run.outcome = Outcome::kCompleted;
  RunAnalysis a;
  a.discharge_start_s = 0;
  a.discharge_duration_s = 18000;
  EXPECT_EQ(WhyNotJudged(run, a), "");
  a.gaps.push_back({1000, 1000 + 0.2 * 18000, 1});
  EXPECT_NE(WhyNotJudged(run, a).find("readings missing for 20 %"), std::string::npos) << WhyNotJudged(run, a);
}

// A gap is judged against what the step asked for, not only against the
// median spacing: with most readings lost the median is long too.
TEST(VerdictGate, AbsoluteGapLimitFindsGapsWhateverTheMedian) {
  std::vector<Sample> s;
  for (int k = 0; k <= 6; ++k) s.push_back({k * 3000.0, 3.7 - 0.1 * k, 0.5, 25.0, 0});
  RunContext ctx;
  ctx.rated_mah = 2500;
  StepRecord r;
  r.index = 0;
  r.kind = "constant-current discharge";
  r.started_s = 0;
  r.ended_s = 18000;
  r.mode = "current";
  r.level = 0.5;
  ctx.steps.push_back(r);
  EXPECT_TRUE(AnalyseRun(s, ctx).gaps.empty());  // median spacing 3000 s: nothing stands out
  ctx.steps[0].expected_spacing_s = 1.0;           // the step asked for a reading every second
  EXPECT_EQ(AnalyseRun(s, ctx).gaps.size(), 6u);
}

TEST(TraceFile, WriteFailuresBecomeRunEvents) {
  auto hook = OpenTraceFile("/dev/full");
  ASSERT_TRUE(hook.ok()) << hook.status().ToString();
  (void)TakeTraceWriteErrors();
  testing::StoreFixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  rig.SetTrace(*hook);
  RunController rc(*f.store, f.clock, rig.roles());
  auto r = rc.Execute(testing::CompileForCell2500("discharge 1A until time>=20s every=1s\n"), {});
  ASSERT_TRUE(r.ok());
  bool found = false;
  auto events = f.store->LoadEvents(r->run_id);
  ASSERT_TRUE(events.ok());
  for (const EventRow& e : *events)
    found = found || (e.kind == "trace" && e.message.find("No space left") != std::string::npos);
  EXPECT_TRUE(found);
}

TEST(TextHygiene, InvalidUtf8IsReplacedAndControlsEscaped) {
  EXPECT_EQ(ValidUtf8("ok \xC3\xA9"), "ok \xC3\xA9");
  EXPECT_EQ(ValidUtf8("a\xFF" "b"), "a\xEF\xBF\xBD" "b");
  EXPECT_EQ(ValidUtf8("\xC0\xAF"), "\xEF\xBF\xBD\xEF\xBF\xBD");  // overlong '/'
  EXPECT_EQ(ValidUtf8("\xED\xA0\x80"), "\xEF\xBF\xBD\xEF\xBF\xBD\xEF\xBF\xBD");  // a surrogate
  EXPECT_EQ(TerminalSafe("KP\x1b[2J\x1b]0;pwned\x07 ok\n"), "KP\\x1b[2J\\x1b]0;pwned\\x07 ok\n");
  EXPECT_EQ(TerminalSafe("\xC2\x9B" "31m"), "\\u009b31m");
}

// A cell named with bytes that are not UTF-8 and terminal escapes: `report
// --json` still writes valid JSON, the terminal report carries no escapes.
TEST(TextHygiene, ReportsOfHostileTextStayUsable) {
  testing::StoreFixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  RunController rc(*f.store, f.clock, rig.roles());
  RunOptions o;
  o.cell_name = "cell\xFF\xFE\x1b[31mRED";
  auto r = rc.Execute(testing::CompileForCell2500("discharge 1A until time>=20s every=1s\n"), o);
  ASSERT_TRUE(r.ok());
  auto rep = BuildRunReport(*f.store, r->run_id, {});
  ASSERT_TRUE(rep.ok());
  std::string json = RunReportJson(*rep).dump(2, ' ', false, nlohmann::json::error_handler_t::replace);
  EXPECT_NO_THROW((void)nlohmann::json::parse(json));
  EXPECT_EQ(TerminalSafe(RunReportText(*rep)).find('\x1b'), std::string::npos);
  testing::TempDir out;
  f.store.reset();
  EXPECT_EQ(testing::RunKneepoint({"report", std::to_string(r->run_id), "--db", f.dir.File("run.db"), "--json"}), 0);
  EXPECT_EQ(testing::RunKneepoint({"runs", "--db", f.dir.File("run.db"), "--json"}), 0);
}

// An instrument whose replies hold terminal escapes and bytes that are not
// UTF-8: stored as received, exported as valid JSON, printed without escapes.
TEST(TextHygiene, AnInstrumentsHostileRepliesAreStoredRawAndEmittedClean) {
  testing::HostileRig h;
  h.load_dev.replace_when = [](std::string_view l) { return l == "INP?"; };
  h.load_dev.reply_text = "\x1b[31mON\xFF";
  RunResult r = h.Run(testing::CompileForCell2500("discharge 1A until time>=20s every=1s\n"));
  bool raw = false;
  auto events = h.f.store->LoadEvents(r.run_id);
  ASSERT_TRUE(events.ok());
  for (const EventRow& e : *events) {
    if (e.message.find("\x1b[31mON\xFF") == std::string::npos) continue;
    raw = true;
    EXPECT_EQ(TerminalSafe(e.message).find('\x1b'), std::string::npos);
  }
  EXPECT_TRUE(raw) << "the reply is kept as received";
  const std::string out = h.f.dir.File("events.json");
  ASSERT_EQ(testing::RunKneepoint({"export", std::to_string(r.run_id), "--db", h.f.dir.File("run.db"), "--json", out}), 0);
  std::ifstream in(out);
  std::string text((std::istreambuf_iterator<char>(in)), {});
  EXPECT_NO_THROW((void)nlohmann::json::parse(text));
}

}  // namespace
}  // namespace kp
