// Store logging throughput with production settings (WAL, synchronous=FULL,
// batched commits at least once per wall second), beside a raw SQLite insert
// loop with the same settings and table, so the figure is the ratio
// store / raw (target >= 0.8) next to samples/s (target >= 300,000) and bytes
// per sample on disk (target <= 64).
#include <benchmark/benchmark.h>
#include <sqlite3.h>

#include <chrono>
#include <filesystem>

#include "rig/store.h"

namespace {

struct BenchDir {
  std::filesystem::path dir;
  explicit BenchDir(const char* name) : dir(std::filesystem::temp_directory_path() / name) {
    std::filesystem::remove_all(dir);
    std::filesystem::create_directories(dir);
  }
  ~BenchDir() { std::filesystem::remove_all(dir); }
  std::string File(const char* f) const { return (dir / f).string(); }
};

kp::Sample MakeSample(int64_t i) {
  // Varying values, as a real log has (constant ones would compress in the record format).
  double t = static_cast<double>(i) * 1.000137;
  return kp::Sample{t, 4.2 - static_cast<double>(i) * 7.3e-5, 0.5 + static_cast<double>(i % 13) * 1.1e-4,
                    22.0 + static_cast<double>(i % 97) * 1e-3, static_cast<int>(i / 100000)};
}

// Bytes the database file grew by, after folding the WAL back into it.
double DbBytes(sqlite3* db) {
  sqlite3_wal_checkpoint_v2(db, nullptr, SQLITE_CHECKPOINT_TRUNCATE, nullptr, nullptr);
  sqlite3_stmt* st = nullptr;
  double bytes = 0;
  sqlite3_prepare_v2(db, "SELECT page_count * page_size FROM pragma_page_count, pragma_page_size", -1, &st, nullptr);
  if (sqlite3_step(st) == SQLITE_ROW) bytes = sqlite3_column_double(st, 0);
  sqlite3_finalize(st);
  return bytes;
}

// The store as the runner uses it: AppendSample (prepared statement into an
// open transaction, committed when the batch is a wall second old).
struct StoreFigures {
  double seconds = 0;
  double bytes = 0;
};
StoreFigures RunStore(const std::string& path, int64_t n, bool* ok) {
  kp::SteadyClock wall;
  auto store = kp::Store::Open(path, wall);
  if (!store.ok()) return {};
  auto run = (*store)->BeginRun({"bench-cell", "li-ion", 2500, "bench", "", "bench"});
  if (!run.ok()) return {};
  double before = DbBytes((*store)->db().raw());
  auto t0 = std::chrono::steady_clock::now();
  for (int64_t i = 0; i < n; ++i) {
    if (!(*store)->AppendSample(*run, MakeSample(i)).ok()) return {};
  }
  if (!(*store)->Commit().ok()) return {};
  double s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  *ok = true;
  return {s, DbBytes((*store)->db().raw()) - before};
}

// The same table, settings and batching with bare SQLite calls.
StoreFigures RunRaw(const std::string& path, int64_t n, bool* ok) {
  sqlite3* db = nullptr;
  if (sqlite3_open(path.c_str(), &db) != SQLITE_OK) return {};
  sqlite3_exec(
      db,
      "PRAGMA journal_mode=WAL; PRAGMA synchronous=FULL;"
      "CREATE TABLE samples(run_id INTEGER NOT NULL, seq INTEGER NOT NULL, t_s REAL NOT NULL, voltage_v REAL NOT NULL,"
      " current_a REAL NOT NULL, temperature_c REAL NOT NULL, step INTEGER NOT NULL, PRIMARY KEY(run_id, seq)) WITHOUT ROWID;",
      nullptr, nullptr, nullptr);
  double before = DbBytes(db);
  sqlite3_stmt* ins = nullptr;
  sqlite3_prepare_v3(db, "INSERT INTO samples VALUES(?1,?2,?3,?4,?5,?6,?7)", -1, SQLITE_PREPARE_PERSISTENT, &ins, nullptr);
  auto t0 = std::chrono::steady_clock::now();
  auto batch = t0;
  sqlite3_exec(db, "BEGIN IMMEDIATE", nullptr, nullptr, nullptr);
  bool good = true;
  for (int64_t i = 0; i < n; ++i) {
    kp::Sample s = MakeSample(i);
    sqlite3_bind_int64(ins, 1, 1);
    sqlite3_bind_int64(ins, 2, i);
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
  sqlite3_exec(db, "COMMIT", nullptr, nullptr, nullptr);
  double s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  sqlite3_finalize(ins);
  StoreFigures f{s, DbBytes(db) - before};
  sqlite3_close(db);
  *ok = good;
  return f;
}

void BM_StoreVsRawSqlite(benchmark::State& state) {
  const int64_t n = state.range(0);
  double store_s = 0, raw_s = 0, store_bytes = 0, raw_bytes = 0;
  int rounds = 0;
  for (auto _ : state) {
    BenchDir dir("kneepoint-bench-store");
    bool ok_store = false, ok_raw = false;
    // Alternate the order so neither side always gets the warm cache.
    StoreFigures a, b;
    if (rounds % 2 == 0) {
      a = RunStore(dir.File("store.db"), n, &ok_store);
      b = RunRaw(dir.File("raw.db"), n, &ok_raw);
    } else {
      b = RunRaw(dir.File("raw.db"), n, &ok_raw);
      a = RunStore(dir.File("store.db"), n, &ok_store);
    }
    if (!ok_store || !ok_raw) {
      state.SkipWithError("a database write failed");
      return;
    }
    store_s += a.seconds;
    raw_s += b.seconds;
    store_bytes += a.bytes;
    raw_bytes += b.bytes;
    ++rounds;
  }
  const double samples = static_cast<double>(n) * rounds;
  state.counters["store_samples_per_s"] = samples / store_s;
  state.counters["raw_samples_per_s"] = samples / raw_s;
  state.counters["ratio_store_raw"] = raw_s / store_s;
  state.counters["store_bytes_per_sample"] = store_bytes / samples;
  state.counters["raw_bytes_per_sample"] = raw_bytes / samples;
}
BENCHMARK(BM_StoreVsRawSqlite)->Arg(300000)->Unit(benchmark::kMillisecond);

void BM_StoreAppendSamples(benchmark::State& state) {
  BenchDir dir("kneepoint-bench-append");
  kp::SteadyClock wall;
  auto store = kp::Store::Open(dir.File("bench.db"), wall);
  if (!store.ok()) {
    state.SkipWithError(store.status().ToString().c_str());
    return;
  }
  auto run = (*store)->BeginRun({"bench-cell", "li-ion", 2500, "bench", "", "bench"});
  if (!run.ok()) {
    state.SkipWithError(run.status().ToString().c_str());
    return;
  }
  int64_t i = 0;
  for (auto _ : state) benchmark::DoNotOptimize((*store)->AppendSample(*run, MakeSample(i++)).ok());
  (void)(*store)->Commit();
  state.SetItemsProcessed(state.iterations());
}
BENCHMARK(BM_StoreAppendSamples);

}  // namespace
