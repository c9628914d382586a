#include "rig/run_controller.h"

#include <gtest/gtest.h>

#include "analysis/metrics.h"
#include "drivers/inproc_transport.h"
#include "rig/sim_rig.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using testing::Cell2500;

using Fixture = testing::StoreFixture;

TEST(RunController, RatedCapacityCheckCompletesWithLoadOff) {
  Fixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  RunController rc(*f.store, f.clock, rig.roles());
  RunOptions o;
  o.cell_name = "A1";
  auto r = rc.Execute(RatedCapacityPlan(Cell2500()), o);
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  EXPECT_EQ(r->outcome, Outcome::kCompleted) << r->reason;
  EXPECT_FALSE(rig.bench().load_input_on());
  auto samples = f.store->LoadSamples(r->run_id);
  ASSERT_TRUE(samples.ok());
  // 0.2C from a 2.56 Ah cell: about 5.1 h at one sample per second.
  EXPECT_GT(samples->size(), 18000u);
  double mah = DeliveredChargeMah(*samples);
  EXPECT_GT(mah, 2500.0);
  EXPECT_LT(mah, 2560.0);
  EXPECT_LE(samples->back().voltage_v, 2.75);
  EXPECT_GT((*samples)[samples->size() - 2].voltage_v, 2.75);
  // The curve has a knee: over the last 2 % of the time the voltage falls at
  // least five times faster than over the first half.
  size_t n = samples->size();
  double early_drop = (*samples)[0].voltage_v - (*samples)[n / 2].voltage_v;
  double late_drop = (*samples)[n * 98 / 100].voltage_v - samples->back().voltage_v;
  EXPECT_GT(late_drop / 0.02, 5.0 * early_drop / 0.5);
  auto events = f.store->LoadEvents(r->run_id);
  ASSERT_TRUE(events.ok());
  EXPECT_NE(events->back().message.find("<= 2.750 V"), std::string::npos) << events->back().message;
}

TEST(RunController, OverTemperatureAbortsWithLoadOff) {
  Fixture f;
  sim::SimOptions so;
  so.runaway_start_s = 600;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56), so);
  RunController rc(*f.store, f.clock, rig.roles());
  auto r = rc.Execute(RatedCapacityPlan(Cell2500()), {});
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kAborted);
  EXPECT_NE(r->reason.find("over-temperature"), std::string::npos) << r->reason;
  EXPECT_FALSE(rig.bench().load_input_on());
  EXPECT_GE(rig.bench().cell_temperature_c(), 60.0);
  EXPECT_EQ(f.store->GetRun(r->run_id)->outcome, Outcome::kAborted);
}

TEST(RunController, TimeLimitAborts) {
  Fixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  RunController rc(*f.store, f.clock, rig.roles());
  Plan p = RatedCapacityPlan(Cell2500());
  p.limits.max_total_s = 3600;
  auto r = rc.Execute(p, {});
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kAborted);
  EXPECT_NE(r->reason.find("time limit"), std::string::npos) << r->reason;
  EXPECT_FALSE(rig.bench().load_input_on());
}

TEST(RunController, StopFlagAbortsAsOperator) {
  Fixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  RunController rc(*f.store, f.clock, rig.roles());
  std::atomic<bool> stop{false};
  RunOptions o;
  o.stop = &stop;
  o.on_sample = [&](const Reading& r, double) {
    if (r.t_s >= 100) stop = true;
  };
  auto r = rc.Execute(RatedCapacityPlan(Cell2500()), o);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kAborted);
  EXPECT_NE(r->reason.find("operator"), std::string::npos);
  EXPECT_FALSE(rig.bench().load_input_on());
}

// A simulated bench whose thermometer goes silent after `silent_after` lines
// and answers again after `silent_until` (-1: never).
struct FlakyThermometerRig {
  FlakyThermometerRig(Clock& clock, int silent_after, int silent_until)
      : bench(sim::DemoLiIonCell(2.56), clock),
        flaky(bench.thermometer()),
        load_s(std::make_unique<InProcTransport>(bench.load(), clock), clock),
        temp_s(std::make_unique<InProcTransport>(flaky, clock), clock),
        load(load_s),
        thermo(temp_s) {
    flaky.silent_after = silent_after;
    flaky.silent_until = silent_until;
  }
  RigRoles roles() { return RigRoles{&load, nullptr, &thermo, nullptr, nullptr, "test"}; }

  sim::SimBench bench;
  testing::FaultyDevice flaky;
  ScpiSession load_s, temp_s;
  LoadDriver load;
  ThermometerDriver thermo;
};

// Lost thermometer: the run aborts, the load (on another link) goes off, and
// every sample logged before stays in the database.
TEST(RunController, LostInstrumentAbortsAndKeepsSamples) {
  Fixture f;
  FlakyThermometerRig rig(f.clock, 50, -1);
  RunController rc(*f.store, f.clock, rig.roles());
  auto r = rc.Execute(RatedCapacityPlan(Cell2500()), {});
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kAborted);
  EXPECT_NE(r->reason.find("instrument lost"), std::string::npos) << r->reason;
  EXPECT_FALSE(rig.bench.load_input_on());
  EXPECT_EQ(f.store->LoadSamples(r->run_id)->size(), 50u);  // one per answered temperature query
}

// A thermometer that goes silent for a while (a USB hub resetting) and comes
// back: the load goes off and the step is held; when readings return the run
// continues and completes, with the outage logged as a fault, a gap and a resume,
// and no sample taken with the load on while nothing was watching the cell.
TEST(RunController, InstrumentThatComesBackWithinTheGraceContinuesTheRun) {
  Fixture f;
  FlakyThermometerRig rig(f.clock, 50, 62);  // 12 queries unanswered: several failed readings in a row
  RunController rc(*f.store, f.clock, rig.roles());
  Plan plan = RatedCapacityPlan(Cell2500());
  plan.steps[0].end.time_s = 600.0;  // ten minutes are enough
  auto r = rc.Execute(plan, {});
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kCompleted) << r->reason;
  EXPECT_FALSE(rig.bench.load_input_on());
  auto events = f.store->LoadEvents(r->run_id);
  ASSERT_TRUE(events.ok());
  std::vector<std::string> kinds;
  double gap_t = 0;
  for (const EventRow& e : *events) {
    if (e.kind == "fault" || e.kind == "gap" || e.kind == "resume") kinds.push_back(e.kind);
    if (e.kind == "gap") gap_t = e.t_s;
  }
  EXPECT_EQ(kinds, (std::vector<std::string>{"fault", "gap", "resume"}));
  // The held step's clock stood still: ten minutes of step time plus the outage.
  auto samples = f.Samples(r->run_id);
  ASSERT_FALSE(samples.empty());
  EXPECT_GT(samples.back().t_s, 600.0);
  // The first reading after the outage was taken with the load off.
  bool found = false;
  for (const Sample& s : samples)
    if (s.t_s == gap_t) {
      found = true;
      EXPECT_NEAR(s.current_a, 0.0, 1e-3);
    }
  EXPECT_TRUE(found);

  // With no grace, the same outage aborts the run at once.
  FlakyThermometerRig strict_rig(f.clock, 50, 62);
  RunController strict_rc(*f.store, f.clock, strict_rig.roles());
  RunOptions strict;
  strict.link_grace_s = 0;
  auto r2 = strict_rc.Execute(plan, strict);
  ASSERT_TRUE(r2.ok());
  EXPECT_EQ(r2->outcome, Outcome::kAborted);
  EXPECT_NE(r2->reason.find("instrument lost"), std::string::npos) << r2->reason;
  EXPECT_FALSE(strict_rig.bench.load_input_on());
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// A meter that drops every fifth reply: the session retries, the run completes
// with every sample, and the retries are in the run's log.
TEST(RunController, RetriedExchangesAreLoggedAndTheRunCompletes) {
  Fixture f;
  sim::SimBench bench(sim::DemoLiIonCell(2.56), f.clock);
  testing::FaultyDevice flaky(bench.meter());
  flaky.drop_every = 5;
  ScpiSession load_s(std::make_unique<InProcTransport>(bench.load(), f.clock), f.clock);
  ScpiSession meter_s(std::make_unique<InProcTransport>(flaky, f.clock), f.clock);
  ScpiSession temp_s(std::make_unique<InProcTransport>(bench.thermometer(), f.clock), f.clock);
  LoadDriver load(load_s);
  MeterDriver meter(meter_s);
  ThermometerDriver thermo(temp_s);
  RunController rc(*f.store, f.clock, RigRoles{&load, &meter, &thermo, nullptr, nullptr, "test"});
  Plan p = RatedCapacityPlan(Cell2500());
  p.steps[0].end.voltage_below_v.reset();
  p.steps[0].end.time_s = 60;
  auto r = rc.Execute(p, {});
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kCompleted) << r->reason;
  int logged_retries = 0;
  auto events = f.store->LoadEvents(r->run_id);
  ASSERT_TRUE(events.ok());
  for (const EventRow& e : *events)
    if (e.kind == "retry") ++logged_retries;
  EXPECT_GT(logged_retries, 5);
  EXPECT_GT(meter_s.retry_count(), 5);
  EXPECT_FALSE(bench.load_input_on());
}

}  // namespace
}  // namespace kp
