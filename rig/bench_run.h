// Many runs at once on a multi-channel bench (rig/channel_bench.h), one
// process: one thread and one RunController per channel, each with its own
// run record (own UUID, step records, samples), its own safety monitor and
// its own end, logging into the same database through its own Store
// connection. Sessions to a shared instrument are serialised per exchange
// (drivers/channel_link.h); in virtual time the channels share a
// LockstepClock, so each keeps its own sample period and edge timing.
//
// Ends:
//   - one channel's own end (completion, a safety limit, its abort request,
//     an instrument error on its channel) switches that channel off only;
//   - a bench-level fault switches off every channel it concerns:
//       * a lost instrument: a channel that ended on a link fault of a shared
//         instrument stops every other channel that uses that instrument;
//       * the enclosure over its max_c (read every `enclosure_period_s` of
//         run time by whichever channel is due), or its sensor unreadable;
//       * a stop request for the bench (`stop`, the signal flag): all.
//   - after every thread has ended, each channel is switched off again and
//     read back (ChannelBench::SwitchOff); one that stays on is reported.
//
// Locks: every instrument channel a job uses is locked on its own (RunLock)
// before anything is switched on, so another process can run the free
// channels of the same instruments; one refused lock refuses the whole start.
#pragma once

#include <atomic>
#include <functional>
#include <string>
#include <vector>

#include "procedures/plan.h"
#include "rig/channel_bench.h"
#include "rig/run_controller.h"

namespace kp {

struct ChannelJob {
  int channel = 0;            // index in the bench
  const Plan* plan = nullptr;  // not owned
  RunOptions options;         // cell name, record (serial, tags), link grace...; stop/control/on_sample are set by RunBench
};

struct BenchRunOptions {
  std::string db_path;
  // A stop request for the whole bench (signals): every channel ends as aborted.
  const std::atomic<bool>* stop = nullptr;
  std::string stop_reason = "stopped by operator (signal)";
  // Wall clock for the stores and control channels (nullptr: a SteadyClock).
  Clock* wall = nullptr;
  // Control requests (abort/pause/continue RUN) are polled per channel; in
  // virtual time tests pass the run clock as `wall`.
  bool control = true;
  double enclosure_period_s = 10.0;  // run-clock seconds between enclosure readings
  bool take_locks = true;
  std::string lock_dir;  // empty: RunLock::DefaultDir()
  std::string holder;    // who holds the locks, for whoever is refused
  // Called on the channel's thread after each of its samples; keep it cheap.
  std::function<void(int job, const Reading&, double delivered_mah)> on_sample;
};

struct ChannelOutcome {
  std::string slot;
  Status status;       // not ok: the run could not even be recorded
  RunResult result;
  std::string fault;   // the bench-level fault that ended it, if one did
  std::string left_on;  // after the final switch-off: what still reads on (empty: all verified off)
};

// Fails before any run starts (a lock held elsewhere, a bad job); otherwise
// one outcome per job, in order.
Result<std::vector<ChannelOutcome>> RunBench(ChannelBench& bench, std::vector<ChannelJob> jobs, const BenchRunOptions& options);

}  // namespace kp
