// ControlChannel: how another process steers a running run. Requests (abort,
// pause, continue) are rows in the database's requests table, written by
// `kneepoint abort|pause|continue RUN` or the panel; the runner polls from its
// loop, asking the database at most once per `poll_interval_s` of the wall
// clock (through a statement the Store keeps prepared), so a request is acted
// on within that interval plus one sample period, and records who asked as an
// event. In virtual time (tests) pass the run clock as `wall` to poll once per
// simulated interval instead.
//
// Runner side: RunOptions::control points at one; RunController calls Poll.
// Requester side: Request() validates and queues. Not thread-safe (it uses the
// caller's Store, which is not).
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "rig/store.h"

namespace kp {

enum class ControlAction { kAbort, kPause, kContinue };
const char* ControlActionName(ControlAction a);

struct ControlRequest {
  ControlAction action = ControlAction::kAbort;
  std::string requested_by;  // "alice@bench-pc", "panel"
};

class ControlChannel {
 public:
  static constexpr double kDefaultPollIntervalS = 0.25;
  ControlChannel(Store& store, Clock& wall, double poll_interval_s = kDefaultPollIntervalS)
      : store_(store), wall_(wall), poll_interval_s_(poll_interval_s) {}

  // Runner side: the requests queued for `run_id` since the last poll, oldest
  // first, each marked handled (committed with the current batch). Empty
  // without asking the database when the last query is less than the poll
  // interval old (the first call always asks).
  Result<std::vector<ControlRequest>> Poll(int64_t run_id);
  // How many times Poll asked the database.
  int64_t queries() const { return queries_; }

  // Requester side: queues `action` for a run that is running (refuses a
  // finished or interrupted run, naming its state).
  static Status Request(Store& store, int64_t run_id, ControlAction action, const std::string& requested_by);
  // The same, patient: while another writer holds the database (a runner
  // committing, a second process) the request is retried on `wall` for up to
  // `patience_s`, never dropped silently; returns the request's id.
  static Result<int64_t> RequestPatiently(Store& store, Clock& wall, int64_t run_id, ControlAction action,
                                          const std::string& requested_by, double patience_s = 60.0);
  // Waits on `wall` (up to `wait_s`) until the runner took request `id`:
  // its time ("2026-...Z"), or nothing when not yet (the run ended or the
  // wait ran out; the request stays queued).
  static Result<std::optional<std::string>> WaitTaken(Store& store, Clock& wall, int64_t run_id, int64_t id, double wait_s);

 private:
  Store& store_;
  Clock& wall_;
  double poll_interval_s_;
  bool asked_ = false;
  Seconds last_query_{0};
  int64_t queries_ = 0;
};

// "user@host" of the calling process, for requested_by.
std::string DefaultRequester();

}  // namespace kp
