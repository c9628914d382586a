// ControlChannel: how another process steers a running run. Requests (abort,
// pause, continue) are rows in the database's requests table, written by
// `kneepoint abort|pause|continue RUN` or the panel; the runner polls once per
// loop iteration, so it acts within one sample period, and records who asked
// as an event.
//
// Runner side: RunOptions::control points at one; RunController calls Poll.
// Requester side: Request() validates and queues. Not thread-safe (it uses the
// caller's Store, which is not).
#pragma once

#include <cstdint>
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
  explicit ControlChannel(Store& store) : store_(store) {}

  // Runner side: the requests queued for `run_id` since the last poll, oldest
  // first, each marked handled (committed with the current batch).
  Result<std::vector<ControlRequest>> Poll(int64_t run_id);

  // Requester side: queues `action` for a run that is running (refuses a
  // finished or interrupted run, naming its state).
  static Status Request(Store& store, int64_t run_id, ControlAction action, const std::string& requested_by);

 private:
  Store& store_;
};

// "user@host" of the calling process, for requested_by.
std::string DefaultRequester();

}  // namespace kp
