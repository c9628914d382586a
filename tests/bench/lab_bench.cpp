// Lab database benchmarks, against a real PostgreSQL started for the run
// (tests/support/pg_server.h, Unix socket, fsync off as for every test server):
//  - sync throughput: `kneepoint sync` of one long run (target >= 100,000
//    samples/s), beside a raw COPY of the same rows into the same table in
//    one transaction (ratio sync / raw);
//  - catch-up after a 1-hour outage of a 10 Hz bench: the server holds the
//    first hour of a 2-hour run and lacks the second (36,000 samples); one
//    sync pass sends it (target < 60 s, `catch_up_s`);
//  - the web API's run list of 10,000 runs (target < 100 ms).
// KP_BENCH_SMOKE=1 shrinks the sizes (the smoke test in `make test`).
#include <benchmark/benchmark.h>

#include <chrono>
#include <cstdio>
#include <memory>

#include <fmt/format.h>

#include "rig/lab/lab_schema.h"
#include "rig/lab/lab_sync.h"
#include "ui/web/lab_web.h"
#include "rig/lab/pg.h"
#include "rig/store.h"
#include "tests/bench/bench_support.h"
#include "tests/support/pg_server.h"

namespace {

kp::testing::PgServer* Server() {
  static std::unique_ptr<kp::testing::PgServer> server = [] {
    auto s = kp::testing::PgServer::Start();
    if (!s.ok()) {
      std::fprintf(stderr, "lab bench: %s\n", s.status().ToString().c_str());
      return std::unique_ptr<kp::testing::PgServer>();
    }
    return std::move(*s);
  }();
  return server.get();
}

// A bench file with one run of `n` samples (varying values).
bool MakeBench(const std::string& path, int64_t n) {
  kp::SteadyClock wall;
  auto store = kp::Store::Open(path, wall);
  if (!store.ok()) return false;
  kp::NewRun nr;
  nr.cell_name = "bench-cell";
  nr.chemistry = "li-ion";
  nr.rated_mah = 2500;
  nr.procedure_name = "bench";
  nr.procedure_text = "cell li-ion";
  nr.rig = "sim";
  nr.bench = "bench 1";
  auto run = (*store)->BeginRun(nr);
  if (!run.ok()) return false;
  for (int64_t i = 0; i < n; ++i) {
    const double t = static_cast<double>(i) * 0.1;
    if (!(*store)->AppendSample(*run, kp::Sample{t, 4.2 - i * 7.3e-6, 0.5 + (i % 13) * 1.1e-4, 22.0 + (i % 97) * 1e-3, 0}).ok())
      return false;
  }
  return (*store)->FinishRun(*run, kp::Outcome::kCompleted, "bench").ok() && (*store)->Commit().ok();
}

void BM_SyncVersusRawCopy(benchmark::State& state) {
  kp::testing::PgServer* server = Server();
  if (server == nullptr) {
    state.SkipWithError("no PostgreSQL server (install Debian's postgresql)");
    return;
  }
  const int64_t n = kp::bench::Smoke() ? 5000 : state.range(0);
  kp::bench::BenchDir dir("kneepoint-lab-bench");
  const std::string bench = dir.File("bench.db");
  if (!MakeBench(bench, n)) {
    state.SkipWithError("cannot fill the bench database");
    return;
  }
  double sync_s = 0, raw_s = 0;
  for (auto _ : state) {
    auto url = server->NewDatabase();
    if (!url.ok()) {
      state.SkipWithError(url.status().ToString().c_str());
      return;
    }
    {  // the schema exists before the clock starts, as on a lab server
      auto c = kp::pg::PgConn::Connect(*url);
      if (!c.ok() || !kp::lab::MigrateLab(**c).ok()) {
        state.SkipWithError("cannot set up the lab schema");
        return;
      }
    }
    auto t0 = std::chrono::steady_clock::now();
    auto stats = kp::lab::SyncOnce(bench, *url);
    sync_s += std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    if (!stats.ok() || stats->samples != n) {
      state.SkipWithError(stats.ok() ? "not every sample sent" : stats.status().ToString().c_str());
      return;
    }
    // Raw: the same rows, read from the same file, one COPY into a table of
    // the same shape and key, one transaction.
    auto raw_url = server->NewDatabase();
    if (!raw_url.ok()) {
      state.SkipWithError(raw_url.status().ToString().c_str());
      return;
    }
    auto c = kp::pg::PgConn::Connect(*raw_url);
    if (!c.ok() || !kp::lab::MigrateLab(**c).ok()) {
      state.SkipWithError("cannot set up the raw table");
      return;
    }
    auto t1 = std::chrono::steady_clock::now();
    auto db = kp::sql::Db::Open(bench, false, true);
    auto uuid_q = (*db)->Prepare("SELECT uuid FROM runs");
    (void)uuid_q->Step();
    const std::string uuid = uuid_q->Text(0);
    (void)(*c)->Exec(fmt::format("INSERT INTO kneepoint.runs (uuid, bench, bench_run_id, cell, chemistry, cell_rated_mah, cell_created_at, "
                                 "procedure_name, procedure_text, rig, rated_mah, started_at, outcome) VALUES ('{}', 'b', 1, 'c', 'li-ion', "
                                 "1, 'x', 'p', 't', 'sim', 1, 'x', 'completed')",
                                 uuid));
    auto q = (*db)->Prepare("SELECT seq, t_s, voltage_v, current_a, temperature_c, step FROM samples ORDER BY run_id, seq");
    std::string data;
    while (*q->Step())
      fmt::format_to(std::back_inserter(data), "{}\t{}\t{}\t{}\t{}\t{}\t{}\n", uuid, q->Int(0), q->Real(1), q->Real(2), q->Real(3), q->Real(4),
                     q->Int(5));
    (void)(*c)->Exec("BEGIN");
    if (!(*c)->CopyIn("kneepoint.samples", data).ok() || !(*c)->Exec("COMMIT").ok()) {
      state.SkipWithError("raw COPY failed");
      return;
    }
    raw_s += std::chrono::duration<double>(std::chrono::steady_clock::now() - t1).count();
    state.SetIterationTime(std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count());
  }
  const double iters = static_cast<double>(state.iterations());
  state.counters["sync_samples_per_s"] = static_cast<double>(n) * iters / sync_s;
  state.counters["raw_copy_samples_per_s"] = static_cast<double>(n) * iters / raw_s;
  state.counters["sync_over_raw"] = raw_s / sync_s;
}
BENCHMARK(BM_SyncVersusRawCopy)->Arg(360000)->Unit(benchmark::kMillisecond)->UseManualTime()->Iterations(2);

void BM_CatchUpAfterOneHourOutage(benchmark::State& state) {
  kp::testing::PgServer* server = Server();
  if (server == nullptr) {
    state.SkipWithError("no PostgreSQL server (install Debian's postgresql)");
    return;
  }
  const int64_t per_hour = kp::bench::Smoke() ? 2000 : 36000;  // 10 Hz
  kp::bench::BenchDir dir("kneepoint-lab-catchup");
  const std::string bench = dir.File("bench.db");
  if (!MakeBench(bench, 2 * per_hour)) {
    state.SkipWithError("cannot fill the bench database");
    return;
  }
  double catch_up_s = 0;
  for (auto _ : state) {
    auto url = server->NewDatabase();
    if (!url.ok()) {
      state.SkipWithError(url.status().ToString().c_str());
      return;
    }
    auto first = kp::lab::SyncOnce(bench, *url);
    auto c = kp::pg::PgConn::Connect(*url);
    // The outage: the server has only what was sent before it (the first
    // hour's samples), and its fingerprint of the run is old.
    if (!first.ok() || !c.ok() ||
        !(*c)->Exec(fmt::format("DELETE FROM kneepoint.samples WHERE seq >= {}; UPDATE kneepoint.runs SET sync_mark = ''", per_hour)).ok()) {
      state.SkipWithError("cannot set up the outage");
      return;
    }
    auto t0 = std::chrono::steady_clock::now();
    auto stats = kp::lab::SyncOnce(bench, *url);
    const double s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    catch_up_s += s;
    state.SetIterationTime(s);
    if (!stats.ok() || stats->samples != per_hour) {
      state.SkipWithError(stats.ok() ? "not the missing hour sent" : stats.status().ToString().c_str());
      return;
    }
  }
  state.counters["catch_up_s"] = catch_up_s / static_cast<double>(state.iterations());  // target < 60
  state.counters["samples"] = static_cast<double>(per_hour);
}
BENCHMARK(BM_CatchUpAfterOneHourOutage)->Unit(benchmark::kMillisecond)->UseManualTime()->Iterations(3);

void BM_ApiRunList10k(benchmark::State& state) {
  kp::testing::PgServer* server = Server();
  if (server == nullptr) {
    state.SkipWithError("no PostgreSQL server (install Debian's postgresql)");
    return;
  }
  const int runs = kp::bench::Smoke() ? 200 : 10000;
  auto url = server->NewDatabase();
  if (!url.ok()) {
    state.SkipWithError(url.status().ToString().c_str());
    return;
  }
  auto c = kp::pg::PgConn::Connect(*url);
  if (!c.ok() || !kp::lab::MigrateLab(**c).ok()) {
    state.SkipWithError("cannot set up the lab database");
    return;
  }
  // Runs as 20 benches would have sent them (invented demo values).
  kp::Status st = (*c)->Exec(fmt::format(
      "INSERT INTO kneepoint.runs (uuid, bench, bench_run_id, cell, chemistry, cell_rated_mah, cell_created_at, cell_serial, "
      "procedure_name, procedure_text, rig, rated_mah, started_at, ended_at, outcome, reason, delivered_mah, sample_count, verdict, "
      "verdict_pct_of_rated) SELECT md5(i::text)::uuid, 'bench ' || (i % 20), i, 'cell-' || i, 'li-ion', 2500, "
      "'2026-01-01T00:00:00Z', 'SN-' || i, 'capacity 1C', 'cell li-ion', 'sim', 2500, "
      "to_char(timestamp '2026-01-01' + i * interval '7 minutes', 'YYYY-MM-DD\"T\"HH24:MI:SS\"Z\"'), "
      "to_char(timestamp '2026-01-01' + i * interval '7 minutes' + interval '1 hour', 'YYYY-MM-DD\"T\"HH24:MI:SS\"Z\"'), 'completed', "
      "'all steps done', 2400 + (i % 200), 36000, CASE WHEN i % 9 = 0 THEN 'fail' ELSE 'pass' END, 96 + (i % 8) "
      "FROM generate_series(1, {}) i; ANALYZE kneepoint.runs",
      runs));
  if (!st.ok()) {
    state.SkipWithError(st.ToString().c_str());
    return;
  }
  kp::lab::LabWeb web(*url);
  size_t bytes = 0;
  for (auto _ : state) {
    auto r = web.Get("/api/runs", {{"limit", "20000"}});
    if (r.status != 200) {
      state.SkipWithError(r.body.c_str());
      return;
    }
    bytes = r.body.size();
  }
  state.counters["runs"] = runs;
  state.counters["json_bytes"] = static_cast<double>(bytes);
}
BENCHMARK(BM_ApiRunList10k)->Unit(benchmark::kMillisecond);

}  // namespace
