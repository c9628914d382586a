#include "ui/cli/run_guard.h"

#include <fmt/format.h>

#include <algorithm>
#include <csignal>
#include <cstdlib>
#include <cstring>
#include <iostream>

#include "rig/rig_file.h"
#include "ui/cli/cli.h"

namespace kp::cli {

double LongestSamplePeriodS(const Plan& plan) {
  double longest = 0.0;
  for (const Step& s : plan.steps) longest = std::max(longest, s.sample_period_s);
  return longest;
}

Result<std::unique_ptr<Guardian>> StartGuardianFor(const std::string& rig, const std::string& db, double link_grace_s,
                                                   double hang_limit_s, double longest_period_s, int64_t resume_run_id,
                                                   const std::vector<std::string>& slots) {
  if (rig == "sim") return std::unique_ptr<Guardian>();
  KP_ASSIGN_OR_RETURN(RigFileSpec spec, LoadRigFile(rig));
  GuardianOptions go;
  go.db_path = db;
  go.hang_limit_s = hang_limit_s > 0 ? hang_limit_s : DefaultHangLimitS(link_grace_s, longest_period_s, spec.clock_speed);
  go.resume_run_id = resume_run_id;
  go.slots = slots;
  return Guardian::Start(spec, go);
}

Status EnableWatchdogFor(const std::string& rig, LoadDriver& load) {
  if (rig == "sim") return Status::Ok();
  KP_ASSIGN_OR_RETURN(RigFileSpec spec, LoadRigFile(rig));
  load.EnableWatchdog(spec.clock_speed);
  return Status::Ok();
}

void AddHangLimitOption(CLI::App* c, double& hang_limit_s) {
  AddQuantityOption(c, "--hang-limit", hang_limit_s, Dimension::kTime,
                    "Rig files: wall time without a heartbeat after which the guardian takes this runner as hung, kills it and "
                    "switches everything off (0s: 120 s plus the link grace and three sample periods)",
                    0.0, 86400.0);
}

void StopIfGuardianGone(Guardian* guardian, RunOptions& run) {
  if (guardian == nullptr || guardian->Alive()) return;
  // Read by the run loop, on this thread, when it sees the stop.
  run.stop_reason = "stopped: the guardian process ended, and a run does not go on unwatched";
  RequestStop();
}

void NoteStopSignal(Store& store, const RunResult& result) {
  int signo = StopSignal();
  if (signo == 0 || result.outcome != Outcome::kAborted) return;
  double t_s = 0.0;
  if (auto p = store.LoadProgress(result.run_id); p.ok() && p->has_value()) t_s = (*p)->t_s;
  (void)store.AddEvent(result.run_id, t_s, "signal", StopSignalReason(signo) + "; load switched off by the runner");
}

CrashInjection CrashInjectionFromEnv() {
  CrashInjection c;
  const char* env = std::getenv("KNEEPOINT_INJECT_CRASH");
  if (env == nullptr || *env == '\0') return c;
  std::string_view spec = env;
  size_t at = spec.find('@');
  std::string name(spec.substr(0, at));
  if (name.rfind("SIG", 0) == 0) name = name.substr(3);
  for (int sig = 1; sig < 32; ++sig) {
    const char* abbrev = ::sigabbrev_np(sig);
    if (abbrev != nullptr && name == abbrev) c.signo_ = sig;
  }
  c.after_ = at == std::string_view::npos ? 1 : std::strtol(std::string(spec.substr(at + 1)).c_str(), nullptr, 10);
  if (c.signo_ == 0 || c.after_ < 1) {
    std::cerr << "kneepoint: ignoring KNEEPOINT_INJECT_CRASH='" << env << "' (expected NAME@N, e.g. SEGV@40)\n";
    c.signo_ = 0;
  }
  return c;
}

void CrashInjection::OnSample() {
  if (signo_ == 0 || ++seen_ < after_) return;
  std::raise(signo_);
}

}  // namespace kp::cli
