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
