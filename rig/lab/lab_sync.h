// Sync: copies a bench's SQLite store into the lab's PostgreSQL database
// (rig/lab/lab_schema.h). One pass reads the bench in one read snapshot and,
// run by run, sends what the server does not hold yet: each per-run table in
// batches (COPY into a temporary staging table, then INSERT ... ON CONFLICT,
// one transaction per batch), then the run's row with a fingerprint of the
// bench row. Where a table resumes is what the server holds (its largest
// sample seq, event id...), so a pass killed at any point, or a server that
// went away, just continues at the next pass; rows already there are never
// duplicated (the keys are (run UUID, seq)). The bench store is only read.
#pragma once

#include <atomic>
#include <condition_variable>
#include <cstdint>
#include <functional>
#include <memory>
#include <mutex>
#include <string>
#include <thread>

#include "drivers/status.h"
#include "rig/lab/pg.h"
#include "rig/sqlite.h"

namespace kp::lab {

struct SyncOptions {
  int batch_rows = 5000;  // rows per COPY batch (one server transaction each)
  // Test hook: called with the batch count so far after a batch was copied
  // into the staging table and before it is committed (kill tests).
  std::function<void(int64_t)> after_copy;
  // Test hook: called with the batch's number (from 1) before it is sent.
  std::function<void(int64_t)> before_batch;
};

struct SyncStats {
  int runs = 0;          // runs on the bench
  int runs_sent = 0;     // runs that had something new
  int64_t samples = 0;   // samples sent
  int64_t rows = 0;      // rows sent, every table
  int64_t batches = 0;
};

// A connection to the lab database, its schema migrated.
class LabSync {
 public:
  static Result<std::unique_ptr<LabSync>> Connect(const std::string& url, SyncOptions options = {});
  // One pass over the bench database (opened by the caller, read only).
  Result<SyncStats> Pass(sql::Db& bench);
  pg::PgConn& conn() { return *conn_; }

 private:
  LabSync(std::unique_ptr<pg::PgConn> conn, SyncOptions options) : conn_(std::move(conn)), options_(std::move(options)) {}
  Status SyncRun(sql::Db& bench, int64_t run_id, const std::string& uuid, const std::string& mark, SyncStats& stats);
  std::unique_ptr<pg::PgConn> conn_;
  SyncOptions options_;
  std::vector<std::string> staged_;  // staging tables made on this connection
};

// Opens the bench file read-only, connects, migrates, one pass.
Result<SyncStats> SyncOnce(const std::string& bench_path, const std::string& url, SyncOptions options = {});

// `run --sync URL`: passes in a background thread while the run goes on,
// every `interval_s`, at low priority, with its own read-only connection to
// the bench file: it never writes the bench store and never touches the
// instruments. A failed pass is reported on `log` (a message only when the
// failure changes, and when it recovers) and retried with back-off doubling
// up to `max_backoff_s`. Stop() makes one last pass and joins.
class BackgroundSync {
 public:
  using Log = std::function<void(const std::string&)>;
  BackgroundSync(std::string bench_path, std::string url, Log log, double interval_s = 2.0, double max_backoff_s = 60.0);
  ~BackgroundSync();
  void Start();
  // Final pass (bounded by `final_timeout_s` of retries), then joins.
  void Stop(double final_timeout_s = 10.0);
  int64_t passes_ok() const { return passes_ok_.load(); }
  int64_t passes_failed() const { return passes_failed_.load(); }

 private:
  void Loop();
  Status OnePass();
  std::string bench_path_, url_;
  Log log_;
  double interval_s_, max_backoff_s_;
  std::thread thread_;
  std::mutex mu_;
  std::condition_variable cv_;
  bool stop_ = false;
  double final_timeout_s_ = 10.0;
  std::atomic<int64_t> passes_ok_{0}, passes_failed_{0};
  std::unique_ptr<LabSync> sync_;
};

// `url` with connect_timeout=N added when it has none (a background sync
// must not hang on a server that went away).
std::string WithConnectTimeout(const std::string& url, int seconds);

}  // namespace kp::lab
