#include "rig/control_channel.h"

#include <fmt/format.h>
#include <pwd.h>
#include <unistd.h>

#include <cstdlib>

namespace kp {

const char* ControlActionName(ControlAction a) {
  switch (a) {
    case ControlAction::kAbort:
      return "abort";
    case ControlAction::kPause:
      return "pause";
    case ControlAction::kContinue:
      return "continue";
  }
  return "?";
}

Result<std::vector<ControlRequest>> ControlChannel::Poll(int64_t run_id) {
  const Seconds now = wall_.Now();
  if (asked_ && (now - last_query_).count() < poll_interval_s_) return std::vector<ControlRequest>{};
  asked_ = true;
  last_query_ = now;
  ++queries_;
  KP_ASSIGN_OR_RETURN(auto rows, store_.PendingRequests(run_id));
  std::vector<ControlRequest> out;
  for (const RequestRow& row : rows) {
    KP_RETURN_IF_ERROR(store_.MarkRequestHandled(row.id));
    ControlRequest r;
    r.requested_by = row.requested_by;
    if (row.action == "abort")
      r.action = ControlAction::kAbort;
    else if (row.action == "pause")
      r.action = ControlAction::kPause;
    else if (row.action == "continue")
      r.action = ControlAction::kContinue;
    else
      continue;  // the schema's CHECK makes this unreachable
    out.push_back(std::move(r));
  }
  return out;
}

Status ControlChannel::Request(Store& store, int64_t run_id, ControlAction action, const std::string& requested_by) {
  KP_ASSIGN_OR_RETURN(RunRow run, store.GetRun(run_id));
  if (run.outcome != Outcome::kRunning) {
    return InvalidInput(fmt::format("run {} is {}{}; there is no runner to {}", run_id, OutcomeName(run.outcome),
                                    run.reason.empty() ? "" : " (" + run.reason + ")", ControlActionName(action)));
  }
  return store.AddRequest(run_id, ControlActionName(action), requested_by).status();
}

Result<int64_t> ControlChannel::RequestPatiently(Store& store, Clock& wall, int64_t run_id, ControlAction action,
                                                 const std::string& requested_by, double patience_s) {
  const Seconds until = wall.Now() + Seconds(patience_s);
  for (;;) {
    Result<RunRow> run = store.GetRun(run_id);
    Status st = run.status();
    if (st.ok() && run->outcome != Outcome::kRunning) {
      if (Status refused = Request(store, run_id, action, requested_by); !refused.ok()) return refused;
      return InternalError(fmt::format("run {} is not running but took a request", run_id));
    }
    Result<int64_t> id = st.ok() ? store.AddRequest(run_id, ControlActionName(action), requested_by) : Result<int64_t>(st);
    if (id.ok() || id.status().code() != StatusCode::kUnavailable) return id;
    if (wall.Now() >= until)
      return id.status().WithContext(fmt::format("the database stayed busy for {:.0f} s; the {} request was NOT queued", patience_s,
                                                 ControlActionName(action)));
    wall.SleepUntil(wall.Now() + Seconds(0.05));
  }
}

Result<std::optional<std::string>> ControlChannel::WaitTaken(Store& store, Clock& wall, int64_t run_id, int64_t id, double wait_s) {
  const Seconds until = wall.Now() + Seconds(wait_s);
  for (;;) {
    Result<std::optional<std::string>> at = store.RequestHandledAt(id);
    if (!at.ok() && at.status().code() != StatusCode::kUnavailable) return at.status();
    if (at.ok() && *at) return at;
    if (wall.Now() >= until) return std::optional<std::string>();
    if (at.ok()) {
      Result<RunRow> run = store.GetRun(run_id);
      if (run.ok() && run->outcome != Outcome::kRunning) return std::optional<std::string>();
    }
    wall.SleepUntil(wall.Now() + Seconds(0.1));
  }
}

std::string DefaultRequester() {
  std::string user;
  if (const passwd* pw = getpwuid(getuid()); pw != nullptr && pw->pw_name != nullptr) user = pw->pw_name;
  if (user.empty()) {
    const char* u = std::getenv("USER");
    user = u ? u : "unknown";
  }
  char host[256] = {0};
  if (gethostname(host, sizeof host - 1) != 0) std::snprintf(host, sizeof host, "unknown");
  return user + "@" + host;
}

}  // namespace kp
