// Month-long runs, measured as ratios against a baseline taken in the same
// benchmark, so the figures hold on any machine:
//   - BM_SimRunVsRawInserts: a simulated C/20 discharge sampled every 100 ms,
//     with the control channel polled as `kneepoint run` does, against raw
//     SQLite inserts of the very rows that run stored (target ratio <= 6).
//   - BM_RunsListingVsBareCount: Store::ListRuns (what `kneepoint runs` and
//     the panel list) against a bare `SELECT count(*) FROM runs` on the same
//     connection, on a database holding N samples (target ratio <= 5).
//   - BM_PanelOpenScaling (panel_open_bench.cpp): opening a 1 M-sample run in
//     the panel's reader against a 100 k one.
// Sizes: 1 M samples by default; KP_BENCH_LARGE=1 adds 10 M; KP_BENCH_SMOKE=1
// (the `bench_smoke` test of `make test`) shrinks everything to a few
// thousand so the programs are only checked to work.
#include <benchmark/benchmark.h>
#include <sqlite3.h>

#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <vector>

#include "bench_support.h"
#include "rig/control_channel.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "rig/store.h"

namespace {

using kp::bench::BenchDir;
using kp::bench::Large;
using kp::bench::Smoke;
using kp::bench::WallSeconds;

kp::CellSpec Cell2500() {
  kp::CellSpec c;
  c.rated_mah = 2500;
  c.nominal_v = 3.65;
  c.max_v = 4.2;
  c.cutoff_v = 2.75;
  return c;
}

// Raw SQLite inserts of `rows` into a table like the store's, with the store's
// settings (WAL, synchronous=FULL) and a commit once per wall second.
double RawInsertSeconds(const std::string& path, const std::vector<kp::Sample>& rows, bool* ok) {
  sqlite3* db = nullptr;
  if (sqlite3_open(path.c_str(), &db) != SQLITE_OK) return 0;
  sqlite3_exec(db,
               "PRAGMA journal_mode=WAL; PRAGMA synchronous=FULL;"
               "CREATE TABLE samples(run_id INTEGER NOT NULL, seq INTEGER NOT NULL, t_s REAL NOT NULL, voltage_v REAL NOT NULL,"
               " current_a REAL NOT NULL, temperature_c REAL NOT NULL, step INTEGER NOT NULL, PRIMARY KEY(run_id, seq)) WITHOUT ROWID;",
               nullptr, nullptr, nullptr);
  sqlite3_stmt* ins = nullptr;
  sqlite3_prepare_v3(db, "INSERT INTO samples VALUES(?1,?2,?3,?4,?5,?6,?7)", -1, SQLITE_PREPARE_PERSISTENT, &ins, nullptr);
  bool good = true;
  auto t0 = std::chrono::steady_clock::now();
  auto batch = t0;
  sqlite3_exec(db, "BEGIN IMMEDIATE", nullptr, nullptr, nullptr);
  int64_t seq = 0;
  for (const kp::Sample& s : rows) {
    sqlite3_bind_int64(ins, 1, 1);
    sqlite3_bind_int64(ins, 2, seq++);
    sqlite3_bind_double(ins, 3, s.t_s);
    sqlite3_bind_double(ins, 4, s.voltage_v);
    sqlite3_bind_double(ins, 5, s.current_a);
    sqlite3_bind_double(ins, 6, s.temperature_c);
    sqlite3_bind_int64(ins, 7, s.step);
    good &= sqlite3_step(ins) == SQLITE_DONE;
    sqlite3_reset(ins);
    auto now = std::chrono::steady_clock::now();
    if (now - batch >= std::chrono::seconds(1)) {
      sqlite3_exec(db, "COMMIT; BEGIN IMMEDIATE", nullptr, nullptr, nullptr);
      batch = now;
    }
  }
  good &= sqlite3_exec(db, "COMMIT", nullptr, nullptr, nullptr) == SQLITE_OK;
  double s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  sqlite3_finalize(ins);
  sqlite3_close(db);
  *ok = good;
  return s;
}

// One simulated run of about `n` samples: C/20 of a 2,500 mAh rating, every
// 100 ms, on a simulated cell large enough not to reach its cutoff first.
struct SimRunFigures {
  double seconds = 0;
  int64_t run_id = 0;
  int64_t queries = 0;
  bool ok = false;
  std::string error;
};
SimRunFigures SimulatedRun(kp::Store& store, int64_t n) {
  SimRunFigures f;
  const double period_s = 0.1;
  const double duration_s = static_cast<double>(n) * period_s - period_s * 0.5;
  kp::Plan plan = kp::RatedCapacityPlan(Cell2500(), period_s);
  plan.steps[0].current_a = Cell2500().CRateToAmps(0.05);
  plan.steps[0].end.time_s = duration_s;
  plan.limits.max_total_s = duration_s * 1.5;
  plan.limits.max_charge_mah = 1e9;
  const double needed_ah = plan.steps[0].current_a * duration_s / 3600.0;
  kp::VirtualClock clock;
  kp::SimRig rig(clock, kp::sim::DemoLiIonCell(std::max(2.56, needed_ah * 1.6)));
  kp::SteadyClock wall;
  kp::ControlChannel control(store, wall);  // as `kneepoint run` polls it
  kp::RunController rc(store, clock, rig.roles());
  kp::RunOptions o;
  o.control = &control;
  o.cell_name = "bench-cell";
  auto t0 = std::chrono::steady_clock::now();
  auto r = rc.Execute(plan, o);
  f.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  f.queries = control.queries();
  if (!r.ok()) {
    f.error = r.status().ToString();
    return f;
  }
  if (r->outcome != kp::Outcome::kCompleted) {
    f.error = r->reason;
    return f;
  }
  f.run_id = r->run_id;
  f.ok = true;
  return f;
}

void BM_SimRunVsRawInserts(benchmark::State& state) {
  const int64_t n = state.range(0);
  double run_s = 0, raw_s = 0, samples = 0, queries = 0;
  for (auto _ : state) {
    BenchDir dir("kneepoint-bench-simrun");
    kp::SteadyClock wall;
    auto store = kp::Store::Open(dir.File("run.db"), wall);
    if (!store.ok()) {
      state.SkipWithError(store.status().ToString().c_str());
      return;
    }
    SimRunFigures f = SimulatedRun(**store, n);
    if (!f.ok) {
      state.SkipWithError(f.error.c_str());
      return;
    }
    auto rows = (*store)->LoadSamples(f.run_id);
    store->reset();
    if (!rows.ok()) {
      state.SkipWithError(rows.status().ToString().c_str());
      return;
    }
    bool ok = false;
    double raw = RawInsertSeconds(dir.File("raw.db"), *rows, &ok);
    if (!ok) {
      state.SkipWithError("raw insert failed");
      return;
    }
    run_s += f.seconds;
    raw_s += raw;
    samples += static_cast<double>(rows->size());
    queries += static_cast<double>(f.queries);
  }
  const double rounds = static_cast<double>(state.iterations());
  state.counters["samples"] = samples / rounds;
  state.counters["run_s"] = run_s / rounds;
  state.counters["raw_s"] = raw_s / rounds;
  state.counters["ratio_run_raw"] = run_s / raw_s;  // target <= 6
  state.counters["control_queries"] = queries / rounds;
}
BENCHMARK(BM_SimRunVsRawInserts)
    ->Apply([](benchmark::internal::Benchmark* b) {
      b->Arg(Smoke() ? 3000 : 1000000);
      if (Large() && !Smoke()) b->Arg(10000000);
    })
    ->Unit(benchmark::kMillisecond)
    ->UseRealTime()
    ->Iterations(1);

// A database of `runs` finished runs holding `n` samples in all, written
// through the store's schema with one INSERT ... SELECT per run.
bool FillDatabase(kp::Store& store, int runs, int64_t n) {
  std::string text = "# a procedure text of typical length\n";
  while (text.size() < 1500) text += "discharge 0.2C until voltage<=2.750V  # step with its comment\n";
  for (int k = 0; k < runs; ++k) {
    auto id = store.BeginRun({"cell-" + std::to_string(k % 7), "li-ion", 2500, "rated-capacity", text, "sim"});
    if (!id.ok()) return false;
    if (!store.FinishRun(*id, kp::Outcome::kCompleted, "procedure complete").ok()) return false;
    auto fill = store.db().Prepare(
        "WITH RECURSIVE s(i) AS (SELECT 0 UNION ALL SELECT i+1 FROM s WHERE i+1 < ?2)"
        " INSERT INTO samples(run_id, seq, t_s, voltage_v, current_a, temperature_c, step)"
        " SELECT ?1, i, i*0.1, 4.2 - i*1e-7, 0.125, 25.0 + (i % 97)*1e-3, 0 FROM s");
    if (!fill.ok()) return false;
    const int64_t per_run = n / runs;
    if (!fill->Bind(1, *id).Bind(2, per_run).Run().ok()) return false;
    auto count = store.db().Prepare("UPDATE runs SET sample_count=?2 WHERE id=?1");
    if (!count.ok() || !count->Bind(1, *id).Bind(2, per_run).Run().ok()) return false;
  }
  return true;
}

void BM_RunsListingVsBareCount(benchmark::State& state) {
  const int64_t n = state.range(0);
  constexpr int kRuns = 20;
  BenchDir dir("kneepoint-bench-listing");
  kp::SteadyClock wall;
  auto store = kp::Store::Open(dir.File("runs.db"), wall);
  if (!store.ok() || !FillDatabase(**store, kRuns, n)) {
    state.SkipWithError("could not build the database");
    return;
  }
  sqlite3* raw = (*store)->db().raw();
  double list_s = 0, bare_s = 0;
  int64_t listed = 0, counted = 0;
  int64_t round = 0;
  for (auto _ : state) {
    // Alternate the order so neither side always gets the warm cache.
    ++round;
    for (int side = 0; side < 2; ++side) {
      if ((side == 0) == (round % 2 == 0)) {
        auto t0 = WallSeconds();
        auto runs = (*store)->ListRuns();
        list_s += WallSeconds() - t0;
        if (!runs.ok()) {
          state.SkipWithError(runs.status().ToString().c_str());
          return;
        }
        listed = static_cast<int64_t>(runs->size());
        benchmark::DoNotOptimize(runs->back().sample_count);
      } else {
        auto t0 = WallSeconds();
        sqlite3_stmt* st = nullptr;
        sqlite3_prepare_v2(raw, "SELECT count(*) FROM runs", -1, &st, nullptr);
        if (sqlite3_step(st) == SQLITE_ROW) counted = sqlite3_column_int64(st, 0);
        sqlite3_finalize(st);
        bare_s += WallSeconds() - t0;
      }
    }
  }
  if (listed != kRuns || counted != kRuns) {
    state.SkipWithError("listing and count disagree with the runs written");
    return;
  }
  const double rounds = static_cast<double>(state.iterations());
  state.counters["samples"] = static_cast<double>(n);
  state.counters["list_us"] = list_s / rounds * 1e6;
  state.counters["bare_us"] = bare_s / rounds * 1e6;
  state.counters["ratio_list_bare"] = list_s / bare_s;  // target <= 5
}
BENCHMARK(BM_RunsListingVsBareCount)
    ->Apply([](benchmark::internal::Benchmark* b) {
      b->Arg(Smoke() ? 4000 : 1000000);
      if (Large() && !Smoke()) b->Arg(10000000);
    })
    ->Unit(benchmark::kMicrosecond);

}  // namespace
