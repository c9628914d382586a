// Reconciliation: the run reads back what the load holds after every output
// change and periodically; a load that ignores OFF, a second client that
// switches it on, a reset or a cleared protection mid-run aborts the run with
// the load off (or, for a load that cannot be switched off, never completes
// it). Hostile instruments sit behind the in-process transport.
#include "rig/reconcile.h"

#include <gtest/gtest.h>

#include "drivers/inproc_transport.h"
#include "drivers/sim/sim_bench.h"
#include "rig/run_controller.h"
#include "tests/support/fixtures.h"
#include "tests/support/hostile_device.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using testing::HostileRig;

const char* const kRestThenDischarge = "rest 10min every=5s\ndischarge 1A until voltage<=2.75V every=2s\n";

TEST(Reconcile, ALoadThatAcknowledgesOffButStaysOnIsNeverACompletedRun) {
  HostileRig h;
  h.load_dev.ignore = [](std::string_view l) { return l == "INP OFF"; };
  RunResult r = h.Run(testing::CompileForCell2500("discharge 2A until voltage<=2.75V every=2s\n"));
  EXPECT_EQ(r.outcome, Outcome::kAborted) << r.reason;
  EXPECT_NE(r.reason.find("reads back ON"), std::string::npos) << r.reason;
  EXPECT_TRUE(h.HasEvent(r.run_id, "mismatch", "load input is ON but the run commanded it off"));
  EXPECT_EQ(h.f.store->GetRun(r.run_id)->outcome, Outcome::kAborted);
}

TEST(Reconcile, ASecondClientSwitchingTheLoadOnDuringARestAbortsWithTheLoadOff) {
  HostileRig h;
  RunOptions o;
  bool done = false;
  o.on_sample = [&](const Reading& rd, double) {
    if (!done && rd.t_s > 120) {
      done = true;
      h.SecondClient("CURR 0.5");
      h.SecondClient("INP ON");
    }
  };
  RunResult r = h.Run(testing::CompileForCell2500(kRestThenDischarge), o);
  EXPECT_EQ(r.outcome, Outcome::kAborted) << r.reason;
  EXPECT_NE(r.reason.find("instrument state mismatch"), std::string::npos) << r.reason;
  EXPECT_TRUE(h.HasEvent(r.run_id, "mismatch", "load input is ON"));
  EXPECT_FALSE(h.bench.load_input_on());
  // Caught within one reconcile period (10 s) plus a sample period.
  auto events = *h.f.store->LoadEvents(r.run_id);
  for (const EventRow& e : events)
    if (e.kind == "mismatch") EXPECT_LT(e.t_s, 120 + 10 + 5 + 1);
}

TEST(Reconcile, AResetMidDischargeIsCaught) {
  HostileRig h;
  RunOptions o;
  o.reconcile_period_s = 4;  // before the lost-regulation rule (10 s) could end the run first
  bool done = false;
  o.on_sample = [&](const Reading& rd, double) {
    if (!done && rd.t_s > 1200) {
      done = true;
      h.SecondClient("*RST");
    }
  };
  RunResult r = h.Run(testing::CompileForCell2500(kRestThenDischarge), o);
  EXPECT_EQ(r.outcome, Outcome::kAborted) << r.reason;
  EXPECT_TRUE(h.HasEvent(r.run_id, "mismatch", "load input is off but the run commanded it on"));
  EXPECT_FALSE(h.bench.load_input_on());
}

TEST(Reconcile, AClearedUndervoltageProtectionIsCaught) {
  HostileRig h;
  RunOptions o;
  o.reconcile_period_s = 4;  // before the lost-regulation rule (10 s) could end the run first
  bool done = false;
  o.on_sample = [&](const Reading& rd, double) {
    if (!done && rd.t_s > 1200) {
      done = true;
      h.SecondClient("VOLT:PROT:LOW 0");
    }
  };
  RunResult r = h.Run(testing::CompileForCell2500(kRestThenDischarge), o);
  EXPECT_EQ(r.outcome, Outcome::kAborted) << r.reason;
  EXPECT_TRUE(h.HasEvent(r.run_id, "mismatch", "undervoltage protection is"));
  EXPECT_FALSE(h.bench.load_input_on());
}

TEST(Reconcile, AChangedLevelIsCaught) {
  HostileRig h;
  RunOptions o;
  o.reconcile_period_s = 4;  // before the lost-regulation rule (10 s) could end the run first
  bool done = false;
  o.on_sample = [&](const Reading& rd, double) {
    if (!done && rd.t_s > 1200) {
      done = true;
      h.SecondClient("CURR 0.2");
    }
  };
  RunResult r = h.Run(testing::CompileForCell2500(kRestThenDischarge), o);
  EXPECT_EQ(r.outcome, Outcome::kAborted) << r.reason;
  EXPECT_TRUE(h.HasEvent(r.run_id, "mismatch", "load level is"));
}

// A load without a mode query: that read-back is skipped (a warning), the
// rest still runs and the run completes.
TEST(Reconcile, ReadBacksTheLoadCannotAnswerAreSkipped) {
  HostileRig h;
  h.load_dev.ignore = [](std::string_view l) { return l == "FUNC?"; };
  RunResult r = h.Run(testing::CompileForCell2500("discharge 2A until voltage<=2.75V every=2s\n"));
  EXPECT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  EXPECT_TRUE(h.HasEvent(r.run_id, "warning", "load mode not read back"));
  EXPECT_FALSE(h.bench.load_input_on());
}

TEST(Reconcile, SettingsMatchWithinTheInstrumentsRounding) {
  EXPECT_TRUE(SettingMatches(0.5, 0.5004));
  EXPECT_TRUE(SettingMatches(2.0, 2.015));
  EXPECT_FALSE(SettingMatches(0.5, 0.2));
  EXPECT_FALSE(SettingMatches(0.5, 0.0));
}

}  // namespace
}  // namespace kp
