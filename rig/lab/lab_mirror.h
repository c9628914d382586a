// Reading the lab database with the bench's own read code: the runs needed
// are copied from PostgreSQL into an in-memory SQLite database with the bench
// schema (rig/store.h), and every reader (`runs`, `report`, `compare`,
// `export`, the web view's figures) works on that copy, so the figures from
// the lab database are the bench's by construction.
//
// The copy holds every run's row, tags and notes (what `runs` lists and
// filters on); the full record of a run (steps, events, samples, block
// summaries, DC-IR points, instruments) is brought in by Fill. Runs are
// numbered 1, 2, 3... in the order they started (then bench, bench number):
// the numbers `runs --db postgresql://...` shows. The PostgreSQL session is
// read only (default_transaction_read_only): nothing is ever written there.
#pragma once

#include <memory>
#include <string>
#include <vector>

#include "drivers/clock.h"
#include "drivers/status.h"
#include "rig/lab/pg.h"
#include "rig/store.h"

namespace kp::lab {

class LabMirror {
 public:
  static Result<std::unique_ptr<LabMirror>> Open(const std::string& url, Clock& wall);
  // The same with only the runs whose UUIDs are given (numbered in that order
  // of start too): what one web request needs, without listing the whole lab.
  static Result<std::unique_ptr<LabMirror>> OpenOnly(const std::string& url, Clock& wall, const std::vector<std::string>& uuids);
  Store& store() { return *store_; }
  // Brings the full record of run `run_id` (a number of this copy) in; once.
  Status Fill(int64_t run_id);
  // Resolves a run named by number or UUID (prefix) and fills it.
  Result<int64_t> FillRef(std::string_view ref);
  // The store, given away (the PostgreSQL connection is closed).
  std::unique_ptr<Store> TakeStore() { return std::move(store_); }
  pg::PgConn& conn() { return *conn_; }

 private:
  LabMirror() = default;
  static Result<std::unique_ptr<LabMirror>> OpenWith(const std::string& url, Clock& wall, const std::vector<std::string>* only);
  Status LoadRuns(const std::vector<std::string>* only);
  std::unique_ptr<pg::PgConn> conn_;
  std::unique_ptr<Store> store_;
  std::vector<std::string> uuids_;  // by run number - 1
  std::vector<bool> filled_;
};

// Opens the lab at `url` as a store with every run listed and the runs named
// by `refs` (numbers or UUIDs) filled.
Result<std::unique_ptr<Store>> OpenLabStore(const std::string& url, Clock& wall, const std::vector<std::string>& refs);

}  // namespace kp::lab
