// Guardian: a small separate process that watches one runner (`run` or
// `resume` on a rig file) and, when the runner ends without saying it ended
// cleanly — any signal, a crash, the out-of-memory killer, a hang — switches
// every load input and supply output of the rig off, verifies each by query,
// and records what it found and did on the run, which ends `interrupted`
// (resumable).
//
// How it is wired:
//   - Guardian::Start forks the guardian before the runner opens any
//     instrument. The child keeps nothing of the runner but the rig's
//     load/supply addresses and off/state commands (prepared before the fork:
//     addresses resolved, lines with their terminators) and the database path;
//     it closes every other file descriptor, leaves the runner's session
//     (setsid: a terminal hang-up or Ctrl-C does not reach it) and ignores
//     SIGINT, SIGHUP, SIGQUIT, SIGTERM and SIGPIPE. Start returns once the
//     guardian says it is armed.
//   - The runner holds the write end of a pipe. CleanEnd() sends "clean end";
//     once the runner has closed its links the guardian still asks every
//     load and supply for its state (an off command may have been lost) and
//     exits silently when all were off; one found on is switched off and
//     noted on the run, whose outcome stays the runner's. End of file without
//     it means the runner is gone (the kernel closes the pipe however a
//     process dies). A fatal signal handler (InstallFatalSignalNotice) adds
//     the signal's number first.
//   - Hang: once per second the guardian reads the run's heartbeat
//     (runs.heartbeat_at, written with every commit). If it stands still for
//     the hang limit, the guardian kills the runner (SIGKILL) and proceeds as
//     for a death.
//   - The path from the pipe's end of file to "verified off" allocates no
//     memory: raw sockets / termios, fixed buffers, prepared lines. Loads are
//     done first, then supplies; each instrument is tried until verified or
//     `give_up_s` passed. Only then is the database written (with retries,
//     for a locked database).
//
// The in-process simulator (`--rig sim`) needs no guardian: its instruments
// die with the process.
#pragma once

#include <sys/types.h>

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "drivers/status.h"
#include "rig/rig_file.h"

namespace kp {

// Floor of the hang limit, wall seconds.
inline constexpr double kGuardianMinHangS = 120.0;

struct GuardianOptions {
  std::string db_path;
  // Wall seconds the run's heartbeat may stand still before the runner is
  // taken as hung (see DefaultHangLimitS).
  double hang_limit_s = kGuardianMinHangS;
  // Wall seconds the guardian keeps trying an instrument that does not answer.
  double give_up_s = 30.0;
  // `resume`: the run being continued (0: a new run, created after Start).
  int64_t resume_run_id = 0;
  // A multi-channel rig: the slots this runner runs (their load and supply
  // channels are switched off); empty: every channel of the file.
  std::vector<std::string> slots;
};

// The hang limit a run gets: kGuardianMinHangS plus the longest a healthy
// runner goes without a commit — the link grace (a silent instrument holds
// the run without readings) and three of the longest sample period — both
// converted from run-clock to wall seconds.
double DefaultHangLimitS(double link_grace_s, double longest_sample_period_s, double clock_speed);

class Guardian {
 public:
  // Forks and arms the guardian for the load and supply roles of `rig`.
  // Refused while this process has the database open (the child opens its
  // own connection; SQLite's process-wide lock state must not be inherited).
  static Result<std::unique_ptr<Guardian>> Start(const RigFileSpec& rig, const GuardianOptions& options);
  // Calls CleanEnd().
  ~Guardian();
  Guardian(const Guardian&) = delete;
  Guardian& operator=(const Guardian&) = delete;

  // The runner has ended its run itself (everything off, the end recorded):
  // tells the guardian, which exits, and reaps it (waits at most 5 s).
  void CleanEnd();
  // False once the guardian process has ended (it is then reaped).
  bool Alive();
  pid_t pid() const { return pid_; }

 private:
  Guardian(pid_t pid, int to_guardian) : pid_(pid), to_guardian_(to_guardian) {}
  pid_t pid_;
  int to_guardian_;
};

// SIGSEGV, SIGABRT, SIGBUS, SIGFPE, SIGILL: tell the running guardian (if
// any) which signal ended the runner, then die by it as usual. Installed by
// Guardian::Start.
void InstallFatalSignalNotice();

}  // namespace kp
