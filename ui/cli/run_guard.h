// What `run` and `resume` share for an unattended run: the guardian process
// for rig files, the event naming a stop signal, and the crash injection the
// fault campaign uses.
#pragma once

#include <CLI/CLI.hpp>

#include <memory>
#include <string>

#include "rig/guardian.h"
#include "rig/run_controller.h"
#include "rig/store.h"

namespace kp::cli {

// Starts the guardian when `rig` is a rig file (nullptr for "sim", whose
// instruments live and die with this process). `hang_limit_s` 0 means
// DefaultHangLimitS from the link grace, the longest sample period and the
// rig file's clock_speed.
Result<std::unique_ptr<Guardian>> StartGuardianFor(const std::string& rig, const std::string& db, double link_grace_s,
                                                   double hang_limit_s, double longest_period_s, int64_t resume_run_id, const std::vector<std::string>& slots = {});

// A rig file's load gets the watchdog guard, counted in the instruments'
// seconds (the file's clock_speed per wall second); nothing for "sim".
Status EnableWatchdogFor(const std::string& rig, LoadDriver& load);

// Longest sample period of a plan's steps (run-clock seconds).
double LongestSamplePeriodS(const Plan& plan);

// `--hang-limit SECONDS`.
void AddHangLimitOption(CLI::App* c, double& hang_limit_s);

// Call once per sample: when the guardian has ended (killed, crashed), the
// run is stopped through its safe-off path rather than go on unwatched.
void StopIfGuardianGone(Guardian* guardian, RunOptions& run);

// When a stop signal ended the run, records which one (event kind `signal`).
void NoteStopSignal(Store& store, const RunResult& result);

// KNEEPOINT_INJECT_CRASH=NAME@N (e.g. SEGV@40): the runner raises SIGNAME
// after its N-th reading, standing in for a crash at a random moment in the
// fault campaign. Unset: nothing happens.
class CrashInjection {
 public:
  void OnSample();

 private:
  friend CrashInjection CrashInjectionFromEnv();
  int signo_ = 0;
  long after_ = 0;
  long seen_ = 0;
};
CrashInjection CrashInjectionFromEnv();

}  // namespace kp::cli
