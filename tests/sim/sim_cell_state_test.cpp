// State of charge as an input and the simulated cell continued across a
// resume: the recorded cell choice, the replay of a logged run, and both
// through the real command line (`run --sim-soc`, `resume --rig sim`).
#include <gtest/gtest.h>

#include <atomic>
#include <cstdio>
#include <fstream>

#include "analysis/metrics.h"
#include "drivers/sim/cell_file.h"
#include "rig/resume.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/sim/sim_helpers.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/cli/cli.h"

namespace kp {
namespace {

using testing::Cell2500;

int Cli(std::vector<std::string> args) { return testing::RunKneepoint(std::move(args)); }

TEST(SimCellChoice, TextRoundTripsAndBadRecordsAreRefused) {
  SimCellChoice c{"cells/my cell.toml", 2500, 7, 0.4};
  auto back = ParseSimCellText(SimCellText(c));
  ASSERT_TRUE(back.ok()) << back.status().ToString();
  EXPECT_EQ(back->preset, c.preset);
  EXPECT_EQ(back->rated_mah, c.rated_mah);
  EXPECT_EQ(back->seed, c.seed);
  EXPECT_EQ(back->start_soc, c.start_soc);
  SimCellChoice aged{"nimh", 2000, 0, 1.0, -20.0, 0.25};
  auto aged_back = ParseSimCellText(SimCellText(aged));
  ASSERT_TRUE(aged_back.ok()) << aged_back.status().ToString();
  ASSERT_TRUE(aged_back->ambient_c.has_value());
  EXPECT_EQ(*aged_back->ambient_c, -20.0);
  EXPECT_EQ(aged_back->fade, 0.25);
  EXPECT_FALSE(back->ambient_c.has_value());
  EXPECT_FALSE(ParseSimCellText("preset=li-ion rated_mah=2500 seed=0 soc=1 ambient_c=cold").ok());
  for (const char* bad : {"", "preset=li-ion", "preset=li-ion rated_mah=x seed=0 soc=1", "preset=li-ion rated_mah=2500 seed=0 soc=1.5",
                          "rated_mah=2500 seed=0 soc=1 preset=li-ion"})
    EXPECT_FALSE(ParseSimCellText(bad).ok()) << bad;
}

// A part-charged cell: both wells at the stated level, so its open-circuit
// voltage is the preset's OCV curve there, and it delivers that share of a
// full cell's charge at a low rate.
TEST(SimCellChoice, StartsPartCharged) {
  auto full = BuildSimCell({"li-ion", 2500, 0, 1.0});
  auto part = BuildSimCell({"li-ion", 2500, 0, 0.4});
  ASSERT_TRUE(full.ok() && part.ok());
  sim::CellModel mf(*full), mp(*part);
  EXPECT_NEAR(mp.soc(), 0.4, 1e-12);
  EXPECT_NEAR(mp.OpenCircuitVoltage(), sim::MonotoneCurve(part->ocv_table)(0.4), 1e-9);
  const double q_full = sim::testing::DischargeMah(mf, 0.125, full->cutoff_v);
  const double q_part = sim::testing::DischargeMah(mp, 0.125, part->cutoff_v);
  // At 0.05C nearly all the stored charge comes out: 40 % within 1 % of the full cell's.
  EXPECT_NEAR(q_part / q_full, 0.4, 0.01);
  EXPECT_FALSE(BuildSimCell({"li-ion", 2500, 0, 1.2}).ok());
  EXPECT_FALSE(BuildSimCell({"no-such-cell", 2500, 0, 1.0}).ok());
}

// An aged cell (--sim-age 20%): 80 % of the capacity and 1.5 times the
// resistance (kResistanceGrowthPerFade, from memory), so at a low rate it
// delivers a little under 80 % of the new cell's charge; the rating stays.
TEST(SimCellChoice, AgedCellHasLessCapacityAndMoreResistance) {
  auto fresh = BuildSimCell({"li-ion", 2500, 0, 1.0});
  auto aged = BuildSimCell({"li-ion", 2500, 0, 1.0, std::nullopt, 0.2});
  ASSERT_TRUE(fresh.ok() && aged.ok());
  EXPECT_DOUBLE_EQ(aged->rated_ah, fresh->rated_ah);
  EXPECT_NEAR(aged->capacity_ah, 0.8 * fresh->capacity_ah, 1e-12);
  sim::CellModel mf(*fresh), ma(*aged);
  EXPECT_NEAR(ma.TotalResistance() / mf.TotalResistance(), 1.5, 1e-12);
  const double q_fresh = sim::testing::DischargeMah(mf, 0.5, fresh->cutoff_v);
  const double q_aged = sim::testing::DischargeMah(ma, 0.5, aged->cutoff_v);
  std::printf("li-ion at 0.2C: new %.0f mAh, 20 %% faded %.0f mAh\n", q_fresh, q_aged);
  EXPECT_LT(q_aged, 0.8 * q_fresh);
  EXPECT_GT(q_aged, 0.75 * q_fresh);
  EXPECT_FALSE(BuildSimCell({"li-ion", 2500, 0, 1.0, std::nullopt, 0.95}).ok());
  EXPECT_FALSE(BuildSimCell({"li-ion", 2500, 0, 1.0, 150.0, 0.0}).ok());
}

// Replaying a logged run reproduces the cell of the run: the logged samples
// alone (1 s apart) give the same wells as the cell that ran, within the
// difference the sample spacing makes.
TEST(ReplayLoggedCell, GivesTheStateTheRunLeft) {
  testing::StoreFixture f;
  auto params = BuildSimCell({"li-ion", 2500, 0, 0.9});
  ASSERT_TRUE(params.ok());
  SimRig rig(f.clock, *params);
  RunController rc(*f.store, f.clock, rig.roles());
  Plan p = RatedCapacityPlan(Cell2500());
  p.steps[0].end.time_s = 5400;
  auto r = rc.Execute(p, {});
  ASSERT_TRUE(r.ok());
  std::vector<Sample> samples = f.Samples(r->run_id);
  auto events = f.store->LoadEvents(r->run_id);
  ASSERT_TRUE(events.ok());
  sim::CellState replayed = ReplayLoggedCell(*params, samples, *events);
  sim::CellModel ran = rig.bench().cell();
  const double q = params->capacity_ah * 3600.0;
  EXPECT_NEAR(replayed.available_c / q, ran.state().available_c / q, 2e-4);
  EXPECT_NEAR(replayed.bound_c / q, ran.state().bound_c / q, 2e-4);
  EXPECT_NEAR(replayed.temperature_c, ran.temperature_c(), 0.05);
  // 0.5 A for 1.5 h out of 90 % of 2.56 Ah: about 0.607 of the capacity left.
  EXPECT_NEAR((replayed.available_c + replayed.bound_c) / q, 0.9 - 0.5 * 5400 / q, 2e-3);
}

std::string WriteFile(const std::string& path, const std::string& text) {
  std::ofstream(path) << text;
  return path;
}

// `run --sim-soc 40%`: the charge step starts at 40 % and takes as long as
// filling 60 % of the cell at 0.5C does (1.2 h of constant current, then the
// constant-voltage tail), and the run records the cell it simulated.
TEST(SimSocCli, ChargeFromFortyPercentTakesAsLongAsItShould) {
  testing::TempDir dir;
  const std::string proc = WriteFile(dir.File("charge.kpp"),
                                     "name \"charge only\"\n"
                                     "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
                                     "charge 0.5C to 4.2V until current<=0.02C or time>=4h every=5s\n");
  const std::string db = dir.File("s.db");
  ASSERT_EQ(Cli({"run", proc, "--rig", "sim", "--db", db, "--sim-soc", "40%"}), cli::kExitOk);
  ASSERT_EQ(Cli({"run", proc, "--rig", "sim", "--db", db}), cli::kExitOk);  // a full cell, as before
  SteadyClock wall;
  auto store = Store::Open(db, wall);
  ASSERT_TRUE(store.ok());
  auto runs = (*store)->ListRuns();
  ASSERT_TRUE(runs.ok());
  ASSERT_EQ(runs->size(), 2u);
  auto part = (*store)->LoadSamples((*runs)[0].id);
  auto full = (*store)->LoadSamples((*runs)[1].id);
  ASSERT_TRUE(part.ok() && full.ok());
  const double part_s = part->back().t_s, full_s = full->back().t_s;
  std::printf("charge from 40 %%: %.0f s, from full: %.0f s\n", part_s, full_s);
  // Constant current alone: 0.6 × 2560 mAh / 1250 mA = 1.23 h; the CV tail adds less than an hour.
  EXPECT_GT(part_s, 0.6 * 2560.0 / 1250.0 * 3600.0);
  EXPECT_LT(part_s, 0.6 * 2560.0 / 1250.0 * 3600.0 + 3600.0);
  EXPECT_LT(full_s, 600.0);
  // The cell took about the 60 % it lacked (charging counts negative).
  const double charged_mah = -DeliveredChargeMah(*part);
  EXPECT_GT(charged_mah, 0.55 * 2560.0);
  EXPECT_LT(charged_mah, 0.62 * 2560.0 / 0.995);
  auto events = (*store)->LoadEvents((*runs)[0].id);
  ASSERT_TRUE(events.ok());
  std::string recorded;
  for (const EventRow& e : *events)
    if (e.kind == "sim-cell") recorded = e.message;
  auto choice = ParseSimCellText(recorded);
  ASSERT_TRUE(choice.ok()) << recorded;
  EXPECT_EQ(choice->preset, "li-ion");
  EXPECT_DOUBLE_EQ(choice->start_soc, 0.4);
  EXPECT_DOUBLE_EQ(choice->rated_mah, 2500.0);

  // A cold, aged cell: recorded as such, and the run starts at the ambient temperature.
  ASSERT_EQ(Cli({"run", proc, "--rig", "sim", "--db", db, "--sim-soc", "0.9", "--sim-ambient", "0degC", "--sim-age", "10%"}),
            cli::kExitOk);
  runs = (*store)->ListRuns();
  ASSERT_EQ(runs->size(), 3u);
  auto cold = (*store)->LoadSamples((*runs)[2].id);
  ASSERT_TRUE(cold.ok() && !cold->empty());
  EXPECT_NEAR(cold->front().temperature_c, 0.0, 0.5);
  auto cold_events = (*store)->LoadEvents((*runs)[2].id);
  ASSERT_TRUE(cold_events.ok());
  bool cold_recorded = false;
  for (const EventRow& e : *cold_events)
    if (e.kind == "sim-cell") {
      auto c = ParseSimCellText(e.message);
      ASSERT_TRUE(c.ok()) << e.message;
      cold_recorded = c->ambient_c == 0.0 && c->fade == 0.1 && c->start_soc == 0.9;
    }
  EXPECT_TRUE(cold_recorded);

  EXPECT_EQ(Cli({"run", proc, "--rig", "sim", "--db", db, "--sim-age", "95%"}), cli::kExitBadInput);
  EXPECT_EQ(Cli({"run", proc, "--rig", "sim", "--db", db, "--sim-soc", "140%"}), cli::kExitBadInput);
  EXPECT_EQ(Cli({"run", proc, "--rig", "sim", "--db", db, "--sim-soc", "forty"}), cli::kExitBadInput);
}

// `resume --rig sim` continues the same cell: a discharge from 80 % stopped
// after an hour and resumed delivers, in both parts together, what one
// uninterrupted discharge of that cell delivers — not what a fresh full cell
// would (about a quarter more).
void ResumedMatchesUninterrupted(const SimCellChoice& choice, bool record_cell) {
  testing::TempDir dir;
  const std::string db = dir.File("r.db");
  auto params = BuildSimCell(choice);
  ASSERT_TRUE(params.ok());
  int64_t run = 0;
  {
    SteadyClock wall;
    VirtualClock clock;
    auto store = Store::Open(db, wall);
    ASSERT_TRUE(store.ok());
    SimRig rig(clock, *params);
    RunController rc(**store, clock, rig.roles());
    std::atomic<bool> stop{false};
    RunOptions o;
    o.stop = &stop;
    bool noted = false;
    o.on_sample = [&](const Reading& r, double) {
      if (record_cell && !noted) {  // as `run --rig sim` records its cell
        noted = true;
        ASSERT_OK((*store)->AddEvent((*store)->ListRuns()->back().id, 0.0, "sim-cell", SimCellText(choice)));
      }
      if (r.t_s >= 3600) stop = true;
    };
    auto r = rc.Execute(RatedCapacityPlan(Cell2500()), o);
    ASSERT_TRUE(r.ok());
    run = r->run_id;
    // As a killed runner leaves it: running, by a process that is gone.
    ASSERT_OK((*store)->db().Exec("UPDATE runs SET outcome='running', ended_at=NULL, runner_pid=2147483646"));
  }
  ASSERT_EQ(Cli({"resume", std::to_string(run), "--db", db, "--rig", "sim"}), cli::kExitOk);

  auto reference = [&](const sim::CellParams& cell) {
    testing::StoreFixture f;
    SimRig rig(f.clock, cell);
    RunController rc(*f.store, f.clock, rig.roles());
    auto r = rc.Execute(RatedCapacityPlan(Cell2500()), {});
    EXPECT_TRUE(r.ok());
    return f.store->LoadProgress(r->run_id)->value().delivered_mah;
  };
  const double same_cell = reference(*params);
  const double fresh_full = reference(*BuildSimCell({"li-ion", 2500, 0, 1.0}));
  SteadyClock wall;
  auto store = Store::Open(db, wall);
  ASSERT_TRUE(store.ok());
  EXPECT_EQ((*store)->GetRun(run)->outcome, Outcome::kCompleted);
  const double both = (*store)->LoadProgress(run)->value().delivered_mah;
  std::printf("resumed run: %.1f mAh; the same cell uninterrupted %.1f mAh, a full cell %.1f mAh\n", both, same_cell, fresh_full);
  // Tolerance: 0.5 %: the resumed cell has rested (load off) a few samples
  // longer than the uninterrupted one, which lets its wells recover a little.
  EXPECT_NEAR(both, same_cell, 0.005 * same_cell);
  if (choice.start_soc < 0.9) EXPECT_GT(fresh_full - both, 0.15 * same_cell);
}

TEST(SimResumeCli, ContinuesTheSameCell) { ResumedMatchesUninterrupted({"li-ion", 2500, 0, 0.8}, true); }

// A run without the record (logged by an older version, or through the
// library): the preset of its chemistry at its rating, full at the start, is
// still brought to the state of the last sample, so the two parts together
// deliver what one uninterrupted discharge does (a fresh full cell at the
// resume would add the hour's 500 mAh again: a fifth too much).
TEST(SimResumeCli, ContinuesARunWithoutACellRecord) { ResumedMatchesUninterrupted({"li-ion", 2500, 0, 1.0}, false); }

}  // namespace
}  // namespace kp
