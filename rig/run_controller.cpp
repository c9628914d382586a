#include "rig/run_controller.h"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <exception>

#include "drivers/scpi_trace.h"
#include "rig/control_channel.h"
#include "rig/load_guards.h"
#include "rig/resume.h"
#include "rig/safety_monitor.h"
#include "rig/stuck_watch.h"

namespace kp {

OutageAccount AccountOutage(double gap_s, double last_current_a, double since_t_s, const std::vector<EventRow>& events,
                            bool load_in_process) {
  OutageAccount a;
  const double amps = std::max(0.0, last_current_a);  // only a discharge draws from the cell through the load
  a.upper_bound_mah = amps * std::max(0.0, gap_s) / 3.6;
  // The guardian's record: the load found on (switched off X s after the
  // runner's end) or found off (its own protection acted at some time before).
  for (const EventRow& e : events) {
    if (e.kind != "guardian" || e.t_s < since_t_s - 1e-6 || e.message.rfind("load input", 0) != 0) continue;
    const std::string tail = " s after the runner's end";
    size_t at = e.message.find(tail);
    if (at == std::string::npos) continue;
    size_t start = e.message.rfind(' ', at - 1);
    double after_s = std::strtod(e.message.c_str() + (start == std::string::npos ? 0 : start + 1), nullptr);
    if (!(after_s >= 0.0)) continue;
    const bool found_on = e.message.find(": found on;") != std::string::npos;
    const double bound = std::min(a.upper_bound_mah, amps * (after_s + 1.0) / 3.6);  // + up to 1 s between commit and death
    if (found_on) {
      a.method = "guardian";
      a.counted_mah = std::min(bound, amps * after_s / 3.6);
      a.upper_bound_mah = bound;
      a.detail = fmt::format("the guardian found the load ON and switched it off {:.1f} s after the runner's end", after_s);
    } else {
      a.method = "estimate";
      a.counted_mah = bound;
      a.upper_bound_mah = bound;
      a.detail = fmt::format("the guardian found the load off {:.1f} s after the runner's end; counted as on until then "
                             "(upper bound)",
                             after_s);
    }
    return a;
  }
  if (load_in_process) {
    a.method = "in-process";
    a.counted_mah = 0.0;
    a.upper_bound_mah = amps * 1.0 / 3.6;  // what was staged but not committed
    a.detail = "the load ran in the runner's process and stopped with it";
    return a;
  }
  a.method = "estimate";
  a.counted_mah = a.upper_bound_mah;
  a.detail = fmt::format("no record of when the load went off: {:.0f} s at the last current {:.3f} A (upper bound)", gap_s, amps);
  return a;
}

bool PlanNeedsSupply(const Plan& plan) {
  for (const Step& s : plan.steps)
    if (s.kind == StepKind::kCharge) return true;
  return false;
}

ChamberLimits RunChamberLimits(const ChamberLimits& rig, const SafetyLimits& plan) {
  ChamberLimits out = rig;
  if (plan.chamber_min_c) out.min_c = std::max(out.min_c.value_or(*plan.chamber_min_c), *plan.chamber_min_c);
  if (plan.chamber_max_c) out.max_c = std::min(out.max_c.value_or(*plan.chamber_max_c), *plan.chamber_max_c);
  return out;
}

Status RunController::SetChamber(double celsius) {
  if (!chamber_) return InvalidInput("a chamber step needs a temperature chamber in the rig");
  KP_RETURN_IF_ERROR(chamber_->SetTemperature(celsius));
  chamber_running_ = true;  // from here on the end of the run stops it, even if the start was not acknowledged
  return chamber_->Run(true);
}

Result<bool> RunController::StopChamber() {
  if (!chamber_ || !chamber_running_) return false;
  chamber_running_ = false;
  Status st = chamber_->Run(false);
  if (!st.ok()) st = chamber_->Run(false);  // once more: the first may have found the link down
  if (!st.ok()) return st;
  return true;
}

std::string RunController::SafeOff() {
  commanded_.load_on = false;
  commanded_.supply_on = false;
  // Several attempts: the first may be the one that found the link down; a
  // load that acknowledges OFF but reads back ON is told again.
  std::string still_on;
  for (int attempt = 0; attempt < 3; ++attempt) {
    if (!roles_.load->SetInput(false).ok()) continue;
    input_on_ = false;
    Result<bool> on = roles_.load->InputState();
    if (!on.ok() || !*on) {
      still_on.clear();
      break;
    }
    still_on = "the load input reads back ON after being switched off";
  }
  if (roles_.supply != nullptr) {
    for (int attempt = 0; attempt < 3; ++attempt) {
      if (!roles_.supply->SetOutput(false).ok()) continue;
      supply_on_ = false;
      Result<bool> on = roles_.supply->OutputState();
      if (!on.ok() || !*on) break;
      if (attempt == 2) still_on += std::string(still_on.empty() ? "" : "; ") + "the supply output reads back ON after being switched off";
    }
  }
  return still_on;
}

Status RunController::Apply(const Setpoint& sp) {
  // Never load and charge at once: whatever goes off goes off first.
  if (!sp.load_on && input_on_) {
    KP_RETURN_IF_ERROR(roles_.load->SetInput(false));
    input_on_ = false;
  }
  if (!sp.supply_on && supply_on_) {
    KP_RETURN_IF_ERROR(roles_.supply->SetOutput(false));
    supply_on_ = false;
  }
  commanded_.load_on = input_on_ && sp.load_on;
  commanded_.supply_on = supply_on_ && sp.supply_on;
  if (sp.supply_on) {
    if (roles_.supply == nullptr) return InvalidInput("a charge step needs a supply in the rig");
    commanded_.supply_v = sp.supply_v;
    commanded_.supply_a = sp.supply_a;
    KP_RETURN_IF_ERROR(roles_.supply->SetVoltage(sp.supply_v));
    KP_RETURN_IF_ERROR(roles_.supply->SetCurrentLimit(sp.supply_a));
    if (!supply_on_) {
      KP_RETURN_IF_ERROR(roles_.supply->SetOutput(true));
      supply_on_ = true;
    }
    commanded_.supply_on = true;
  }
  if (sp.load_on) {
    KP_RETURN_IF_ERROR(roles_.load->SetLevel(sp.mode, sp.level));
    commanded_.mode = sp.mode;
    commanded_.level = sp.level;
    if (!input_on_) {
      KP_RETURN_IF_ERROR(roles_.load->SetInput(true));
      input_on_ = true;
    }
    commanded_.load_on = true;
  }
  return Status::Ok();
}

Result<Reading> RunController::Read(double t_s) {
  Reading r;
  r.t_s = t_s;
  if (roles_.meter != nullptr) {
    KP_ASSIGN_OR_RETURN(r.voltage_v, roles_.meter->MeasureVoltage());
  } else {
    KP_ASSIGN_OR_RETURN(r.voltage_v, roles_.load->MeasureVoltage());
  }
  if (supply_on_) {
    KP_ASSIGN_OR_RETURN(double charging_a, roles_.supply->MeasureCurrent());
    r.current_a = -charging_a;  // charging is negative cell current
  } else {
    KP_ASSIGN_OR_RETURN(r.current_a, roles_.load->MeasureCurrent());
  }
  KP_ASSIGN_OR_RETURN(r.temperature_c, roles_.thermometer->MeasureTemperature());
  if (chamber_) {
    // kLimitExceeded when the chamber has run past its limits: the run aborts.
    KP_ASSIGN_OR_RETURN(double chamber_c, chamber_->ReadTemperature());
    r.chamber_c = chamber_c;
  }
  return r;
}

// One execution: the pieces of the run loop, each small enough to reuse (the
// pause for heat below; control requests can pause the same way).
class RunSession {
 public:
  RunSession(RunController& rc, const Plan& plan, const RunOptions& options, int64_t run_id, std::optional<ReopenedRun> reopened)
      : rc_(rc), plan_(plan), options_(options), run_id_(run_id), reopened_(std::move(reopened)), engine_(plan), monitor_(plan.limits) {
    result_.run_id = run_id;
  }

  Result<RunResult> Run();

 private:
  double Now() const { return (rc_.clock_.Now() - t0_).count(); }
  bool StopRequested() const { return options_.stop != nullptr && options_.stop->load(); }
  // Load off first, then the record.
  RunResult Finish(Outcome outcome, std::string reason, std::string_view kind);
  // Reads, integrates delivered charge.
  Result<Reading> TakeReading();
  // Stores the reading when forced (edges, measurements, step ends, holds) or
  // when it is a regular reading of the step's period (under log-on-change,
  // only when the voltage moved enough or the longest gap passed).
  Status LogSample(const Reading& r, int step, bool force, bool regular = true);
  Status Handle(const EngineOutput& out);
  Status Record(const EngineOutput& out);  // Handle's database writes
  // Logs a "retry" event when any instrument session had to repeat an
  // exchange since the last check (the run went on; the trace has details).
  Status NoteRetries();
  // Reads the instruments' state back (rig/reconcile.h): records read-backs
  // they cannot do as warnings and a mismatch as a "mismatch" event; an error
  // Status (kProtocol, "instrument state mismatch: ...") when they differ.
  Status Reconcile(bool with_guards);
  // Periodic form: with the protections, once per reconcile_period_s.
  Status MaybeReconcile() {
    if (options_.reconcile_period_s <= 0 || t_s_ - last_reconcile_t_ < options_.reconcile_period_s) return Status::Ok();
    return Reconcile(true);
  }

  // Records where the run stands; committed with the next batch so a killed
  // run resumes from exactly its last committed sample. This form keeps a
  // snapshot taken earlier (a hold freezes the step clock).
  void NoteProgress(const std::string& snapshot) {
    RunProgress p = discharge_;
    p.engine_snapshot = snapshot;
    p.t_s = t_s_;
    p.delivered_mah = delivered_mah_;
    p.delivered_wh = delivered_wh_;
    rc_.store_.SetProgress(run_id_, std::move(p));
  }
  // The engine as it stands at t_s_: its snapshot is formatted only by the
  // commit that writes it. Call again after anything changes the engine
  // (every path that does so calls one of the two forms before committing).
  void NoteProgress() {
    const double t_s = t_s_;
    ProgressFigures f{t_s_, delivered_mah_, delivered_wh_, discharge_.discharge_mah, discharge_.discharge_wh,
                      discharge_.charged_mah, discharge_.discharge_open};
    rc_.store_.SetProgress(run_id_, f, [this, t_s] { return engine_.Snapshot(t_s); });
  }
  // Acts on control requests from other processes. Returns a finished
  // RunResult when the run ended (abort, or ended while paused).
  std::optional<RunResult> PollControl();
  // Everything off, sampling on, until the cell cools (kHeat) or an operator
  // asks to continue (kOperator); then the step continues from its snapshot
  // (step time does not run while held). Returns a finished RunResult if the
  // run ended while held.
  enum class HoldKind { kHeat, kOperator, kLink };
  std::optional<RunResult> Hold(HoldKind kind, const std::string& why);

  RunController& rc_;
  const Plan& plan_;
  const RunOptions& options_;
  int64_t run_id_;
  std::optional<ReopenedRun> reopened_;
  StepEngine engine_;
  SafetyMonitor monitor_;
  RunResult result_;
  Seconds t0_{0};
  double t_s_ = 0.0;
  double delivered_mah_ = 0.0;
  double delivered_wh_ = 0.0;
  RunProgress discharge_;  // discharge_mah / discharge_wh / charged_mah / discharge_open only
  std::optional<Reading> prev_;
  std::optional<Sample> last_logged_;
  int last_logged_step_ = -1;
  bool after_edge_ = true;  // the first reading after the load is applied
  std::string last_reason_;
  int retries_seen_ = 0;
  StateReconciler reconciler_{*rc_.roles_.load, rc_.roles_.supply};
  StuckWatch stuck_{plan_.cell.rated_mah, plan_.cell.chemistry};
  double last_dq_mah_ = 0.0;  // charge of the interval the last reading closed
  OutageAccount outage_;      // resuming: how the outage was counted
  double last_reconcile_t_ = 0.0;
};

Status RunSession::Reconcile(bool with_guards) {
  last_reconcile_t_ = t_s_;
  Result<std::string> diff = reconciler_.Check(rc_.commanded_, with_guards);
  for (const std::string& s : reconciler_.TakeSkipped())
    KP_RETURN_IF_ERROR(rc_.store_.AddEvent(run_id_, t_s_, "warning", "state check: " + s));
  if (!diff.ok()) return diff.status().WithContext("reading the instruments' state back");
  if (diff->empty()) return Status::Ok();
  // Off first, then the record: nothing the run did explains this.
  (void)rc_.SafeOff();
  KP_RETURN_IF_ERROR(rc_.store_.AddEvent(run_id_, t_s_, "mismatch", *diff + " (not commanded by this run)"));
  return ProtocolError("instrument state mismatch: " + *diff);
}

int TotalRetries(const RigRoles& roles) {
  int total = roles.load->session().retry_count();
  if (roles.meter != nullptr) total += roles.meter->session().retry_count();
  if (roles.thermometer != nullptr) total += roles.thermometer->session().retry_count();
  if (roles.supply != nullptr) total += roles.supply->session().retry_count();
  return total;
}

Status RunSession::NoteRetries() {
  if (std::string lost = TakeTraceWriteErrors(); !lost.empty())
    KP_RETURN_IF_ERROR(rc_.store_.AddEvent(run_id_, t_s_, "trace", lost + " (the SCPI trace is incomplete from here)"));
  int total = TotalRetries(rc_.roles_);
  if (total == retries_seen_) return Status::Ok();
  int fresh = total - retries_seen_;
  retries_seen_ = total;
  return rc_.store_.AddEvent(run_id_, t_s_, "retry",
                             fmt::format("{} instrument exchange{} repeated after a timeout, drop or garbled reply ({} in this run)",
                                         fresh, fresh == 1 ? "" : "s", total));
}

RunResult RunSession::Finish(Outcome outcome, std::string reason, std::string_view kind) {
  const std::string still_on = rc_.SafeOff();
  result_.outcome = outcome;
  result_.reason = std::move(reason);
  Store& store = rc_.store_;
  if (!still_on.empty()) {
    // A load that will not go off is never a completed run.
    result_.outcome = Outcome::kAborted;
    result_.reason += "; " + still_on + ": SWITCH IT OFF BY HAND";
    kind = "fault";
  }
  // Load first, then the chamber: a chamber that will not stop does not make
  // the run's end wrong, but it is said in the reason and the log.
  const Result<bool> chamber_stopped = rc_.StopChamber();
  std::string chamber;
  if (!chamber_stopped.ok()) {
    chamber = "the chamber could not be stopped (" + chamber_stopped.status().message() + "): STOP IT BY HAND";
    result_.reason += "; " + chamber;
  } else if (*chamber_stopped) {
    chamber = "chamber stopped at the end of the run: it drifts back to room temperature";
  }
  Status st = store.EndStep(run_id_, t_s_, result_.reason,
                            {engine_.step_charge_mah(), engine_.step_energy_wh(), engine_.step_voltage_time_vs()});
  if (st.ok() && !chamber.empty()) st = store.AddEvent(run_id_, t_s_, chamber_stopped.ok() ? "chamber" : "fault", chamber);
  if (st.ok()) st = store.AddEvent(run_id_, t_s_, kind, result_.reason);
  if (st.ok()) st = store.FinishRun(run_id_, outcome, result_.reason);
  if (!st.ok()) {
    // The disk failed while recording the end; the load is already off.
    result_.reason += " (could not record the end: " + st.ToString() + ")";
  }
  return result_;
}

Result<Reading> RunSession::TakeReading() {
  t_s_ = Now();
  last_dq_mah_ = 0.0;
  KP_ASSIGN_OR_RETURN(Reading r, rc_.Read(t_s_));
  if (prev_ && r.t_s > prev_->t_s) {
    double dt = r.t_s - prev_->t_s;
    const double dq = 0.5 * (r.current_a + prev_->current_a) * dt / 3.6;
    last_dq_mah_ = dq;
    const double de = 0.5 * (r.current_a * r.voltage_v + prev_->current_a * prev_->voltage_v) * dt / 3600.0;
    delivered_mah_ += dq;
    delivered_wh_ += de;
    // The interval belongs to the step that was running during it.
    if (const Step* s = engine_.current_step()) {
      if (s->kind == StepKind::kCharge) {
        discharge_.charged_mah += std::max(0.0, -dq);
        discharge_.discharge_open = false;
      } else if (IsDischargeKind(s->kind) || discharge_.discharge_open) {
        if (!discharge_.discharge_open) discharge_.discharge_mah = discharge_.discharge_wh = 0.0;
        discharge_.discharge_open = true;
        discharge_.discharge_mah += dq;
        discharge_.discharge_wh += de;
      }
    }
  }
  prev_ = r;
  if (options_.on_sample) options_.on_sample(r, delivered_mah_);
  return r;
}

Status RunSession::LogSample(const Reading& r, int step, bool force, bool regular) {
  const Step* s = step >= 0 && step < static_cast<int>(plan_.steps.size()) ? &plan_.steps[static_cast<size_t>(step)] : nullptr;
  bool log = force || (regular && (s == nullptr || !s->log_change_v || !last_logged_ || last_logged_step_ != step ||
                                   std::abs(r.voltage_v - last_logged_->voltage_v) >= *s->log_change_v ||
                                   r.t_s - last_logged_->t_s >= s->log_max_gap_s));
  if (!log) return Status::Ok();
  Sample smp{r.t_s, r.voltage_v, r.current_a, r.temperature_c, std::max(step, 0)};
  last_logged_ = smp;
  last_logged_step_ = step;
  // Staged only: committed by MaybeCommit / the next event together with the
  // progress it leads to.
  return rc_.store_.StageSample(run_id_, smp);
}

Status RunSession::Handle(const EngineOutput& out) {
  // Setpoint first: an edge is applied as close to its time as possible.
  if (out.setpoint) {
    KP_RETURN_IF_ERROR(rc_.Apply(*out.setpoint));
    KP_RETURN_IF_ERROR(Reconcile(false));
  }
  if (out.chamber_setpoint_c) KP_RETURN_IF_ERROR(rc_.SetChamber(*out.chamber_setpoint_c));
  // Then the records of the change, in one commit (no instrument I/O while
  // the database's write lock is held).
  Store::CommitGroup group(rc_.store_);
  Status st = Record(out);
  Status closed = group.Close();
  return st.ok() ? closed : st;
}

Status RunSession::Record(const EngineOutput& out) {
  Store& store = rc_.store_;
  for (const StepResult& res : out.results) {
    DcirRow row;
    row.source = res.source;
    row.t_edge_s = res.t_edge_s;
    row.u1_v = res.u1_v, row.i1_a = res.i1_a, row.t1_s = res.t1_s;
    if (res.t2_s > 0) row.u2_v = res.u2_v, row.i2_a = res.i2_a, row.t2_s = res.t2_s;
    row.resistance_ohm = res.value;
    row.valid = res.valid;
    row.why_invalid = res.why_invalid;
    KP_RETURN_IF_ERROR(store.AddDcirPoint(run_id_, row));
    // A dcir step's figure is also an event; edges inside pulse trains are
    // too many for the event list (they are in dcir_points).
    if (res.source == "dcir step")
      KP_RETURN_IF_ERROR(store.AddEvent(run_id_, t_s_, "result",
                                        res.valid ? res.name + ": " + res.detail : res.name + " not measured: " + res.why_invalid));
  }
  for (const StepChange& c : out.changes) {
    if (c.ended_step >= 0)
      KP_RETURN_IF_ERROR(store.EndStep(run_id_, t_s_, c.reason, {c.ended_charge_mah, c.ended_energy_wh, c.ended_voltage_time_vs}));
    if (c.ended_step >= 0 || c.started_step < 0) last_reason_ = c.reason;
    if (c.started_step >= 0) {
      const Step& s = plan_.steps[static_cast<size_t>(c.started_step)];
      NewStep ns{c.started_step, StepKindName(s.kind), s.label, StepModeName(s), StepLevel(s), c.pass, c.cycle};
      KP_RETURN_IF_ERROR(store.BeginStep(run_id_, ns, t_s_));
      std::string msg = c.ended_step < 0 ? fmt::format("step {}: {}", c.started_step + 1, s.label)
                                         : fmt::format("{}; step {}: {}", c.reason, c.started_step + 1, s.label);
      KP_RETURN_IF_ERROR(store.AddEvent(run_id_, t_s_, "step", msg));
    }
  }
  return Status::Ok();
}

std::optional<RunResult> RunSession::PollControl() {
  if (options_.control == nullptr) return std::nullopt;
  Result<std::vector<ControlRequest>> reqs = options_.control->Poll(run_id_);
  if (!reqs.ok()) return Finish(Outcome::kAborted, "database failed while reading requests: " + reqs.status().ToString(), "fault");
  for (const ControlRequest& q : *reqs) {
    if (q.action == ControlAction::kAbort) return Finish(Outcome::kAborted, "aborted by " + q.requested_by, "abort");
    if (q.action == ControlAction::kPause) {
      if (auto ended = Hold(HoldKind::kOperator, "paused by " + q.requested_by)) return ended;
      continue;
    }
    Status st = rc_.store_.AddEvent(run_id_, t_s_, "control",
                                    fmt::format("{} by {} ignored: run is not paused", ControlActionName(q.action), q.requested_by));
    if (!st.ok()) return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
  }
  return std::nullopt;
}

std::optional<RunResult> RunSession::Hold(HoldKind kind, const std::string& why) {
  rc_.SafeOff();
  // The reading that led here still counts (the load was on until it).
  if (prev_) engine_.Integrate(*prev_);
  std::string snapshot = engine_.Snapshot(t_s_);
  NoteProgress(snapshot);
  const char* held_kind = kind == HoldKind::kHeat ? "pause" : kind == HoldKind::kLink ? "fault" : "control";
  if (Status st = rc_.store_.AddEvent(run_id_, t_s_, held_kind, why); !st.ok())
    return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
  const double held_since = t_s_;
  const double last_reading_t = prev_ ? prev_->t_s : t_s_;
  const Step* step = engine_.current_step();
  double period = step != nullptr ? std::max(1.0, step->sample_period_s) : 1.0;
  // First reading just after the load went off, so the log shows the edge.
  double wait = plan_.edge_settle_s;
  std::string released_by;
  while (released_by.empty()) {
    rc_.clock_.SleepUntil(t0_ + Seconds(t_s_ + wait), options_.stop);
    wait = period;
    if (StopRequested()) {
      t_s_ = Now();
      return Finish(Outcome::kAborted, options_.stop_reason, "abort");
    }
    if (options_.control != nullptr) {
      Result<std::vector<ControlRequest>> reqs = options_.control->Poll(run_id_);
      if (!reqs.ok()) return Finish(Outcome::kAborted, "database failed while reading requests: " + reqs.status().ToString(), "fault");
      for (const ControlRequest& q : *reqs) {
        if (q.action == ControlAction::kAbort) return Finish(Outcome::kAborted, "aborted by " + q.requested_by, "abort");
        if (q.action == ControlAction::kContinue && kind == HoldKind::kOperator) {
          released_by = "continued by " + q.requested_by;
        } else if (Status st = rc_.store_.AddEvent(run_id_, t_s_, "control",
                                                   fmt::format("{} by {} ignored: run is {}", ControlActionName(q.action), q.requested_by,
                                                               kind == HoldKind::kOperator ? std::string("paused") : "held (" + why + ")"));
                   !st.ok()) {
          return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
        }
      }
    }
    Result<Reading> rr = TakeReading();
    if (!rr.ok()) {
      const bool link = rr.status().code() == StatusCode::kTimeout || rr.status().code() == StatusCode::kIo;
      if (kind == HoldKind::kLink && link && Now() - held_since < options_.link_grace_s) continue;
      return Finish(Outcome::kAborted,
                    kind == HoldKind::kLink ? fmt::format("instrument lost: no reading for {:.0f} s: {}", Now() - held_since,
                                                          rr.status().ToString())
                                            : "instrument lost: " + rr.status().ToString(),
                    "fault");
    }
    if (Status st = LogSample(*rr, engine_.step_index(), true); !st.ok())
      return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
    // The step clock stands still while held, also across a crash.
    NoteProgress(snapshot);
    if (Status st = rc_.store_.MaybeCommit(); !st.ok())
      return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
    SafetyVerdict v = monitor_.Check(*rr, delivered_mah_);
    if (v.action == SafetyVerdict::kAbort) return Finish(Outcome::kAborted, v.reason, "abort");
    if (Status st = MaybeReconcile(); !st.ok()) return Finish(Outcome::kAborted, st.ToString(), "fault");
    if (kind == HoldKind::kHeat && monitor_.CooledDown(*rr))
      released_by = fmt::format("cell cooled to {:.1f} °C; continuing", rr->temperature_c);
    if (kind == HoldKind::kLink) {
      released_by = fmt::format("instruments answer again after {:.1f} s with the load off; continuing", t_s_ - held_since);
      // No readings in between: analysis flags the interval as a gap.
      if (Status st = rc_.store_.AddEvent(run_id_, t_s_, "gap",
                                          fmt::format("no readings for {:.1f} s while an instrument did not answer",
                                                      t_s_ - last_reading_t));
          !st.ok())
        return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
    }
  }
  if (Status st = rc_.store_.NoteStepHeld(run_id_, t_s_ - held_since); !st.ok())
    return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
  Result<EngineOutput> out = engine_.Restore(snapshot, t_s_);
  if (!out.ok()) return Finish(Outcome::kAborted, "could not resume: " + out.status().ToString(), "fault");
  engine_.Integrate(*prev_);  // integration restarts from the held, load-off reading
  // Setpoint first (inside Handle), then the record: the load comes back on
  // right after the reading that released the hold.
  Status st = Handle(*out);
  if (st.ok()) st = rc_.store_.AddEvent(run_id_, t_s_, kind == HoldKind::kOperator ? "control" : "resume", released_by);
  if (!st.ok()) return Finish(Outcome::kAborted, "could not resume: " + st.ToString(), "fault");
  return std::nullopt;
}

Result<RunResult> RunSession::Run() {
  if (reopened_) {
    // Run time continues across a resume: the gap counts as elapsed run time.
    t_s_ = reopened_->progress->t_s + reopened_->gap_s;
    delivered_mah_ = reopened_->progress->delivered_mah;
    delivered_wh_ = reopened_->progress->delivered_wh;
    discharge_.discharge_mah = reopened_->progress->discharge_mah;
    discharge_.discharge_wh = reopened_->progress->discharge_wh;
    discharge_.charged_mah = reopened_->progress->charged_mah;
    discharge_.discharge_open = reopened_->progress->discharge_mah != 0.0;
    // The charge drawn while nobody logged: counted, with how (an event below).
    Result<std::vector<EventRow>> before = rc_.store_.LoadEvents(run_id_);
    const double last_a = reopened_->last_sample ? reopened_->last_sample->current_a : 0.0;
    outage_ = AccountOutage(reopened_->gap_s, last_a, reopened_->progress->t_s, before.ok() ? *before : std::vector<EventRow>{},
                            rc_.roles_.load_in_process);
    delivered_mah_ += outage_.counted_mah;
    if (discharge_.discharge_open) discharge_.discharge_mah += outage_.counted_mah;
  }
  t0_ = rc_.clock_.Now() - Seconds(t_s_);
  retries_seen_ = TotalRetries(rc_.roles_);  // sessions outlive runs: count this run's only
  try {
    // Bring the load to a known, inert state before anything else.
    if (Status st = rc_.roles_.load->SetInput(false); !st.ok())
      return Finish(Outcome::kAborted, "could not switch the load off before the run: " + st.ToString(), "fault");
    if (rc_.roles_.supply != nullptr) (void)rc_.roles_.supply->SetOutput(false);
    (void)rc_.roles_.load->session().Clear();
    // Hardware backstops in case this process dies mid-run: the load's own
    // protections from the procedure's limits, read back (rig/load_guards.h).
    // A guard that does not take stops the run before the load is ever on;
    // guards the load lacks (acknowledged in the rig file) are recorded.
    GuardReport guards = ArmLoadGuards(*rc_.roles_.load, plan_);
    if (!guards.failure.empty()) return Finish(Outcome::kAborted, "before start: " + guards.failure, "fault");
    if (!guards.armed.empty()) {
      std::string armed;
      for (const std::string& a : guards.armed) armed += (armed.empty() ? "" : ", ") + a;
      if (Status st = rc_.store_.AddEvent(run_id_, t_s_, "guard", "load protections armed: " + armed); !st.ok())
        return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
    }
    for (const std::string& m : guards.missing)
      if (Status st = rc_.store_.AddEvent(run_id_, t_s_, "warning", m); !st.ok())
        return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
    rc_.commanded_ = CommandedState{};
    rc_.commanded_.guards = guards.values;
    // Everything off and the protections as set, read back before the load is
    // ever on (this also finds which read-backs the instruments answer).
    if (Status st = Reconcile(true); !st.ok()) return Finish(Outcome::kAborted, "before start: " + st.ToString(), "fault");

    // First reading with the load off: the open-circuit voltage at t = 0 (or,
    // resuming, where the run left off). Integration starts here; a resumed
    // run does not integrate across its gap.
    Result<Reading> ocv = TakeReading();
    if (!ocv.ok()) return Finish(Outcome::kAborted, "instrument lost: " + ocv.status().ToString(), "fault");
    int first_step = reopened_ && reopened_->last_sample ? reopened_->last_sample->step : 0;
    if (Status st = LogSample(*ocv, first_step, true); !st.ok())
      return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
    if (SafetyVerdict v = monitor_.Check(*ocv, delivered_mah_); !v.ok())
      return Finish(Outcome::kAborted, (reopened_ ? "before resuming: " : "before start: ") + v.reason, "abort");

    EngineOutput out;
    if (reopened_) {
      Result<EngineOutput> restored = engine_.Restore(reopened_->progress->engine_snapshot, t_s_);
      if (!restored.ok()) return Finish(Outcome::kAborted, "could not resume: " + restored.status().ToString(), "fault");
      out = *restored;
      engine_.Integrate(*ocv);
      // Progress first: what follows commits the staged reading with it. The
      // setpoint goes out before the gap is recorded, so the load comes on
      // right after the reading that starts the resumed segment.
      NoteProgress();
      if (Status st = Handle(out); !st.ok()) return Finish(Outcome::kAborted, "could not resume: " + st.ToString(), "fault");
      Status st = rc_.store_.AddEvent(
          run_id_, t_s_, "gap",
          fmt::format("resumed after {:.0f} s unattended (last sample at t={:.1f} s, {:.2f} mAh / {:.4f} Wh so far); {}",
                      reopened_->gap_s, reopened_->progress->t_s, delivered_mah_, delivered_wh_, options_.resume->checks));
      if (!st.ok()) return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
      st = rc_.store_.AddEvent(run_id_, t_s_, "outage",
                               fmt::format("outage of {:.1f} s after t={:.1f} s: {:.3f} mAh counted (method={}; {}; at most {:.3f} mAh)",
                                           reopened_->gap_s, reopened_->progress->t_s, outage_.counted_mah, outage_.method, outage_.detail,
                                           outage_.upper_bound_mah));
      if (!st.ok()) return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
    } else {
      out = engine_.Start(t_s_, *ocv);
      NoteProgress();
      if (Status st = Handle(out); !st.ok()) return Finish(Outcome::kAborted, "could not start: " + st.ToString(), "fault");
    }

    while (!engine_.finished()) {
      rc_.clock_.SleepUntil(t0_ + Seconds(engine_.NextWakeup()), options_.stop);
      if (StopRequested()) {
        t_s_ = Now();
        return Finish(Outcome::kAborted, options_.stop_reason, "abort");
      }
      if (auto ended = PollControl()) return *ended;
      Result<Reading> rr = TakeReading();
      if (!rr.ok() && rr.status().code() == StatusCode::kLimitExceeded)
        return Finish(Outcome::kAborted, "safety limit: " + rr.status().message(), "abort");  // load off first
      if (!rr.ok()) {
        // Only a silent or broken link is waited for; an instrument that
        // answers with an error, an over-range or nonsense is not trusted again.
        const bool link = rr.status().code() == StatusCode::kTimeout || rr.status().code() == StatusCode::kIo;
        if (!link || options_.link_grace_s <= 0)
          return Finish(Outcome::kAborted, "instrument lost: " + rr.status().ToString(), "fault");
        std::string why = fmt::format("no reading ({}); load off, trying again for up to {:.0f} s", rr.status().ToString(),
                                      options_.link_grace_s);
        if (auto ended = Hold(HoldKind::kLink, why)) return *ended;
        continue;
      }
      const Reading& r = *rr;
      int step_before = engine_.step_index();
      if (std::optional<std::string> stuck = stuck_.Observe(r.voltage_v, last_dq_mah_)) {
        (void)rc_.SafeOff();  // off first; the reading is kept, then the record
        if (Status st = LogSample(r, step_before, true); !st.ok())
          return Finish(Outcome::kAborted, "instrument lost: " + *stuck + "; database write failed: " + st.ToString(), "fault");
        return Finish(Outcome::kAborted, "instrument lost: " + *stuck, "fault");
      }

      SafetyVerdict v = monitor_.Check(r, delivered_mah_);
      if (!v.ok()) {
        rc_.SafeOff();  // off first; then the reading that tripped the limit is kept
        if (Status st = LogSample(r, step_before, true); !st.ok())
          return Finish(Outcome::kAborted, v.reason + "; database write failed: " + st.ToString(), "abort");
        if (v.action == SafetyVerdict::kAbort) return Finish(Outcome::kAborted, v.reason, "abort");
        if (auto ended = Hold(HoldKind::kHeat, v.reason)) return *ended;
        continue;
      }

      out = engine_.OnReading(r);
      if (out.abort_reason) {
        rc_.SafeOff();  // off first; then the reading that showed it is kept
        if (Status st = LogSample(r, step_before, true); !st.ok())
          return Finish(Outcome::kAborted, *out.abort_reason + "; database write failed: " + st.ToString(), "abort");
        return Finish(Outcome::kAborted, *out.abort_reason, "abort");
      }
      // Readings on both sides of every edge are stored even under log-on-change,
      // so the stored samples alone count the charge right; so are the
      // readings a measurement used. Readings taken only to judge a limit
      // between logs are not stored unless they end the step.
      bool edge = out.setpoint.has_value() || !out.changes.empty();
      bool after_edge = after_edge_;
      after_edge_ = edge;
      if (Status st = LogSample(r, step_before, edge || after_edge || !out.results.empty(), out.log); !st.ok())
        return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
      NoteProgress();
      if (Status st = Handle(out); !st.ok()) return Finish(Outcome::kAborted, "step change failed: " + st.ToString(), "fault");
      if (Status st = NoteRetries(); !st.ok()) return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
      if (Status st = MaybeReconcile(); !st.ok()) return Finish(Outcome::kAborted, st.ToString(), "fault");
      if (Status st = rc_.store_.MaybeCommit(); !st.ok())
        return Finish(Outcome::kAborted, "database write failed: " + st.ToString(), "fault");
    }
    rc_.SafeOff();
    return Finish(Outcome::kCompleted, last_reason_.empty() ? "procedure complete" : "procedure complete: " + last_reason_,
                  "end");
  } catch (const std::exception& e) {
    return Finish(Outcome::kAborted, std::string("internal error: ") + e.what(), "fault");
  } catch (...) {
    return Finish(Outcome::kAborted, "internal error (unknown exception)", "fault");
  }
}

Result<RunResult> RunController::Execute(const Plan& plan, const RunOptions& options) {
  if (roles_.load == nullptr || roles_.thermometer == nullptr)
    return InvalidInput("a run needs a load and a thermometer in the rig");
  if (plan.steps.empty()) return InvalidInput("the procedure has no steps");
  if (PlanNeedsSupply(plan) && roles_.supply == nullptr)
    return InvalidInput("the procedure charges the cell, but the rig has no supply");
  chamber_.reset();
  // A resumed run may have started the chamber before it was interrupted:
  // its end stops it too (stopping a chamber that is not running is harmless).
  chamber_running_ = options.resume != nullptr && PlanUsesChamber(plan);
  if (PlanUsesChamber(plan)) {
    if (roles_.chamber == nullptr)
      return InvalidInput("the procedure drives a temperature chamber (chamber/soak steps), but the rig has no chamber");
    chamber_.emplace(roles_.chamber->session(), roles_.chamber->commands(), RunChamberLimits(roles_.chamber->limits(), plan.limits));
  }

  // A resumed run continues its own record; a new one gets a fresh row.
  std::optional<ReopenedRun> reopened;
  int64_t run_id = 0;
  if (options.resume != nullptr) {
    KP_ASSIGN_OR_RETURN(reopened, store_.ReopenRun(options.resume->run_id));
    if (!reopened->progress) return InvalidInput(fmt::format("run {} has no committed progress to resume from", options.resume->run_id));
    run_id = options.resume->run_id;
  } else {
    NewRun nr = options.record;
    nr.cell_name = options.cell_name;
    nr.chemistry = plan.cell.chemistry;
    nr.rated_mah = plan.cell.rated_mah;
    nr.procedure_name = plan.name;
    nr.procedure_text = plan.source_text;
    nr.rig = roles_.description;
    nr.thermometer_tolerance_c = roles_.thermometer_tolerance_c;
    if (nr.bench.empty()) nr.bench = roles_.bench;
    if (nr.rig_text.empty()) nr.rig_text = roles_.rig_text;
    if (nr.instruments.empty()) nr.instruments = roles_.instruments;
    StepEngine at_start(plan);
    (void)at_start.Start(0.0);
    RunProgress initial;
    initial.engine_snapshot = at_start.Snapshot(0.0);
    KP_ASSIGN_OR_RETURN(run_id, store_.BeginRun(nr, initial));
  }
  RunSession session(*this, plan, options, run_id, std::move(reopened));
  return session.Run();
}

}  // namespace kp
