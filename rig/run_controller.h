// RunController: executes a Plan on a rig's role drivers, logging to a Store.
//
// The loop: take an open-circuit reading at t = 0 before the load is applied,
// then sleep (on the injected Clock) until the engine's next wakeup, read
// voltage, current (the supply's while charging) and temperature, let the
// safety monitor judge the reading, let the engine decide setpoints and step
// changes, log the sample (all of them, or on change where a step asks), and
// apply the setpoint. An over-temperature limit set to pause switches
// everything off, keeps sampling until the cell has cooled, then resumes the
// step where it was (paused time is not step time). On every
// exit path — completion, safety abort, instrument loss, disk failure, stop
// request, exception — the load input is switched off before anything else is
// logged.
#pragma once

#include <atomic>
#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "drivers/chamber.h"
#include "drivers/clock.h"
#include "drivers/roles.h"
#include "drivers/supply.h"
#include "procedures/engine.h"
#include "procedures/plan.h"
#include "rig/reconcile.h"
#include "rig/store.h"

namespace kp {

// The instruments a run uses, borrowed from whoever assembled the rig.
struct RigRoles {
  LoadDriver* load = nullptr;                // required
  MeterDriver* meter = nullptr;              // optional: cell voltage by 4-wire sense; else the load's reading
  ThermometerDriver* thermometer = nullptr;  // required for safety
  SupplyDriver* supply = nullptr;            // optional: needed by charge steps
  ChamberDriver* chamber = nullptr;          // optional: needed by chamber and soak steps
  std::string description;                   // "sim", "rig.toml"
  // Measurement tolerance of the thermometer (± degC), stored with the run:
  // verdicts judge the start temperature with it. 0.5 degC is a usual
  // thermistor-probe accuracy (common practice, no source).
  double thermometer_tolerance_c = 0.5;
  // The load lives in this process (the built-in simulator): it stops with a
  // dead runner, so an outage drew nothing once the runner was gone.
  bool load_in_process = false;
  // What the run is made with, stored with it (schema v5): one record per
  // instrument, the rig file's text, the bench's name.
  std::vector<InstrumentRecord> instruments;
  std::string rig_text;
  std::string bench;
};

// How the charge drawn while nobody logged (a dead runner, until resume) is
// counted; recorded as an "outage" event (analysis/METHODS.md, "Outages").
struct OutageAccount {
  double counted_mah = 0.0;      // added to the delivered charge
  double upper_bound_mah = 0.0;  // at most this much was drawn
  std::string method;            // "guardian", "in-process", "estimate"
  std::string detail;            // what it is based on, in words
  bool estimated() const { return method == "estimate"; }
};
// From the outage's length, the last logged current and the events of the
// run (the guardian's record of what it found). Pure.
OutageAccount AccountOutage(double gap_s, double last_current_a, double since_t_s, const std::vector<EventRow>& events,
                            bool load_in_process);

class ControlChannel;  // rig/control_channel.h
struct ResumePoint;    // rig/resume.h

struct RunOptions {
  std::string cell_name;
  // The traceable fields of a new run: bench (empty: the rig's), operator,
  // cell serial, lot and part, tags, a note. Execute fills in the cell, the
  // procedure and the rig's equipment; the rest is stored as given.
  NewRun record;
  // Set from a signal handler or another thread: the run ends as aborted by operator.
  const std::atomic<bool>* stop = nullptr;
  std::string stop_reason = "stopped by operator (signal)";
  // Called after each sample (for progress displays); keep it cheap.
  std::function<void(const Reading&, double delivered_mah)> on_sample;
  // Optional: polled once per loop iteration for requests from other processes.
  // Pause = load off, keep sampling until continue or abort (step time does not
  // run while paused); abort = the run ends as aborted "by <who>".
  ControlChannel* control = nullptr;
  // Optional: continue this interrupted run (see rig/resume.h) instead of
  // starting a new one: the engine is restored from the snapshot committed with
  // the last samples, delivered charge/energy carry over, the gap is an event.
  const ResumePoint* resume = nullptr;
  // A reading that times out or hits a dropped link even after the SCPI
  // session's retries (a USB hub reset, a LAN switch rebooting) switches the
  // load off and holds the step (instrument errors, over-range readings and
  // malformed replies still abort at once);
  // readings are tried again every sample period for this many seconds of run
  // time. When one succeeds (and passes the safety limits) the step continues
  // where it was, with the outage logged; otherwise the run aborts as
  // "instrument lost". 0 aborts at the first failed reading.
  double link_grace_s = 30.0;
  // The instruments' state (load input, mode, level, protections; supply
  // output and settings) is read back after every output change and, with the
  // protections, at least this often in run time (rig/reconcile.h); a
  // mismatch is a "mismatch" event and aborts the run with the load off.
  // <= 0: only after output changes.
  double reconcile_period_s = 10.0;
};

struct RunResult {
  int64_t run_id = 0;
  Outcome outcome = Outcome::kRunning;
  std::string reason;
};

class RunSession;  // one Execute's state (run_controller.cpp)

class RunController {
 public:
  RunController(Store& store, Clock& clock, RigRoles roles) : store_(store), clock_(clock), roles_(roles) {}

  // Fails only when the run could not even be recorded; a run that started and
  // then aborted returns its RunResult with outcome kAborted.
  Result<RunResult> Execute(const Plan& plan, const RunOptions& options);

 private:
  friend class RunSession;
  Result<Reading> Read(double t_s);
  Status Apply(const Setpoint& sp);
  // Sends a chamber set point (within the run's chamber limits) and starts the chamber.
  Status SetChamber(double celsius);
  // Load off (and supply off), then read back: empty when verified off or
  // when the instrument cannot say; else what is still on.
  std::string SafeOff();
  // At the end of a run that started the chamber: stop it (it drifts back to
  // room temperature). True when stopped, false when this run never started it.
  Result<bool> StopChamber();

  Store& store_;
  Clock& clock_;
  RigRoles roles_;
  bool input_on_ = false;
  bool supply_on_ = false;
  CommandedState commanded_;  // what the instruments should hold (reconciliation)
  // The rig's chamber with the run's limits (the tighter of the rig's and the
  // procedure's); set only while a plan that drives the chamber runs.
  std::optional<ChamberDriver> chamber_;
  bool chamber_running_ = false;  // this run started the chamber
};

// True when some step of `plan` needs a supply role (charge steps).
bool PlanNeedsSupply(const Plan& plan);
// The chamber limits a run uses: the rig's chamber limits tightened by the
// procedure's chamber-min= / chamber-max=.
ChamberLimits RunChamberLimits(const ChamberLimits& rig, const SafetyLimits& plan);


}  // namespace kp
