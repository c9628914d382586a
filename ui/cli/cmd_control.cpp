// `abort`, `pause`, `continue`: steer a run from another process. Each writes
// a request row; the runner acts on it within one sample period and records
// who asked.
#include <fmt/format.h>

#include <iostream>

#include "rig/control_channel.h"
#include "rig/store_open.h"
#include "ui/cli/cli.h"

namespace kp::cli {
namespace {

struct ControlOptions {
  std::string db_path = "kneepoint.db";
  int64_t run_id = 0;
  std::string as;
  double wait_s = 10.0;
};

int Request(const ControlOptions& opt, ControlAction action) {
  SteadyClock wall;
  auto store = OpenExistingDb(opt.db_path, wall);
  if (!store.ok()) return Fail(store.status());
  std::string who = opt.as.empty() ? DefaultRequester() : opt.as;
  // A busy database (the runner committing, another writer) is waited for:
  // a request is queued or the requester is told it was not, never dropped.
  Result<int64_t> id = ControlChannel::RequestPatiently(**store, wall, opt.run_id, action, who);
  if (!id.ok()) return Fail(id.status());
  std::cout << fmt::format("{} requested for run {} by {} (request {})\n", ControlActionName(action), opt.run_id, who, *id);
  Result<std::optional<std::string>> taken = ControlChannel::WaitTaken(**store, wall, opt.run_id, *id, opt.wait_s);
  if (taken.ok() && *taken) {
    std::cout << fmt::format("taken by the runner at {}\n", **taken);
  } else {
    std::cout << fmt::format("not taken yet{}; it stays queued and the runner acts on it at its next check (see `kneepoint report {}`)\n",
                             opt.wait_s > 0 ? fmt::format(" after {:.0f} s", opt.wait_s) : "", opt.run_id);
  }
  return kExitOk;
}

void AddOne(CliRegistry& r, const char* name, const char* help, ControlAction action) {
  static ControlOptions opts[3];
  ControlOptions& opt = opts[static_cast<int>(action)];
  opt = ControlOptions{};  // fresh defaults for each command line parsed
  CLI::App* c = r.Add(name, help, [&opt, action] { return Request(opt, action); });
  c->add_option("RUN", opt.run_id, "Run id (see `kneepoint runs`)")->required();
  c->add_option("--db", opt.db_path, "Database file")->capture_default_str();
  c->add_option("--as", opt.as, "Who is asking (default: user@host)");
  c->add_option("--wait", opt.wait_s, "Seconds to wait for the runner to take the request (0: do not wait)")->capture_default_str();
}

}  // namespace

void RegisterControl(CliRegistry& r) {
  AddOne(r, "abort", "Ask the runner of a run to stop it (load off, run aborted)", ControlAction::kAbort);
  AddOne(r, "pause", "Ask the runner to pause a run (load off, sampling goes on)", ControlAction::kPause);
  AddOne(r, "continue", "Ask the runner to continue a paused run", ControlAction::kContinue);
}

}  // namespace kp::cli
