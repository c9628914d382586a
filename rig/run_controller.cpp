#include "rig/run_controller.h"

#include <exception>

#include <fmt/format.h>

#include "rig/control_channel.h"
#include "rig/resume.h"
#include "rig/safety_monitor.h"

namespace kp {

void RunController::SafeOff() {
  // Several attempts: the first may be the one that found the link down.
  for (int attempt = 0; attempt < 3; ++attempt) {
    if (roles_.load->SetInput(false).ok()) {
      input_on_ = false;
      break;
    }
  }
  if (roles_.supply != nullptr) {
    for (int attempt = 0; attempt < 3; ++attempt) {
      if (roles_.supply->SetOutput(false).ok()) break;
    }
  }
}

Status RunController::Apply(const Setpoint& sp) {
  if (!sp.load_on) {
    KP_RETURN_IF_ERROR(roles_.load->SetInput(false));
    input_on_ = false;
    return Status::Ok();
  }
  KP_RETURN_IF_ERROR(roles_.load->SetLevel(sp.mode, sp.level));
  if (!input_on_) {
    KP_RETURN_IF_ERROR(roles_.load->SetInput(true));
    input_on_ = true;
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
  KP_ASSIGN_OR_RETURN(r.current_a, roles_.load->MeasureCurrent());
  KP_ASSIGN_OR_RETURN(r.temperature_c, roles_.thermometer->MeasureTemperature());
  return r;
}

Result<RunResult> RunController::Execute(const Plan& plan, const RunOptions& options) {
  if (roles_.load == nullptr || roles_.thermometer == nullptr)
    return InvalidInput("a run needs a load and a thermometer in the rig");
  if (plan.steps.empty()) return InvalidInput("the procedure has no steps");

  // A resumed run continues its own record; a new one gets a fresh row.
  std::optional<ReopenedRun> reopened;
  int64_t run_id = 0;
  if (options.resume != nullptr) {
    KP_ASSIGN_OR_RETURN(reopened, store_.ReopenRun(options.resume->run_id));
    run_id = options.resume->run_id;
  } else {
    NewRun nr{options.cell_name, plan.cell.chemistry, plan.cell.rated_mah, plan.name, plan.source_text, roles_.description};
    KP_ASSIGN_OR_RETURN(run_id, store_.BeginRun(nr));
  }
  RunResult result;
  result.run_id = run_id;

  // Everything below ends in `finish`: load off first, then the record.
  auto finish = [&](Outcome outcome, std::string reason, double t_s, std::string_view kind) -> Result<RunResult> {
    SafeOff();
    result.outcome = outcome;
    result.reason = std::move(reason);
    Status st = store_.EndStep(run_id, t_s, result.reason);
    if (st.ok()) st = store_.AddEvent(run_id, t_s, kind, result.reason);
    if (st.ok()) st = store_.FinishRun(run_id, outcome, result.reason);
    if (!st.ok()) {
      // The disk failed while recording the end; the load is already off.
      result.reason += " (could not record the end: " + st.ToString() + ")";
    }
    return result;
  };

  // Run time continues across a resume: the gap counts as elapsed run time.
  double t_s = reopened ? reopened->progress->t_s + reopened->gap_s : 0.0;
  const Seconds t0 = clock_.Now() - Seconds(t_s);
  try {
    // Bring the load to a known, inert state before anything else.
    KP_RETURN_IF_ERROR(roles_.load->SetInput(false).WithContext("switching the load off before the run"));
    (void)roles_.load->session().Clear();
    if (plan.cell.cutoff_v > 0.3) {
      // Hardware backstop below the cutoff in case the PC dies mid-run;
      // an instrument without it just reports an error we ignore here.
      if (roles_.load->SetUnderVoltageBackstop(plan.cell.cutoff_v - 0.1).ok()) {
        Status q = roles_.load->session().DrainErrors();
        if (!q.ok()) (void)store_.AddEvent(run_id, 0.0, "note", "load has no under-voltage backstop: " + q.message());
      }
    }

    StepEngine engine(plan);
    SafetyMonitor monitor(plan.limits);
    double delivered_mah = reopened ? reopened->progress->delivered_mah : 0.0;
    double delivered_wh = reopened ? reopened->progress->delivered_wh : 0.0;
    std::optional<Reading> prev;  // no integration across a resume gap
    // Written with each commit so a killed run can resume from it.
    auto note_progress = [&] { store_.SetProgress(run_id, {engine.Snapshot(t_s), t_s, delivered_mah, delivered_wh}); };

    auto handle = [&](const EngineOutput& out) -> Status {
      for (const StepChange& c : out.changes) {
        if (c.ended_step >= 0) KP_RETURN_IF_ERROR(store_.EndStep(run_id, t_s, c.reason));
        if (c.started_step >= 0) {
          const Step& s = plan.steps[static_cast<size_t>(c.started_step)];
          KP_RETURN_IF_ERROR(store_.BeginStep(run_id, c.started_step, StepKindName(s.kind), s.label, t_s));
          std::string msg = c.ended_step < 0 ? fmt::format("step {}: {}", c.started_step + 1, s.label)
                                             : fmt::format("{}; step {}: {}", c.reason, c.started_step + 1, s.label);
          KP_RETURN_IF_ERROR(store_.AddEvent(run_id, t_s, "step", msg));
        }
      }
      if (out.setpoint) KP_RETURN_IF_ERROR(Apply(*out.setpoint));
      return Status::Ok();
    };

    EngineOutput out;
    if (reopened) {
      Result<EngineOutput> restored = engine.Restore(reopened->progress->engine_snapshot, t_s);
      if (!restored.ok()) return finish(Outcome::kAborted, "could not resume: " + restored.status().ToString(), t_s, "fault");
      out = *restored;
      Status st = store_.AddEvent(run_id, t_s, "gap",
                                  fmt::format("resumed after {:.0f} s unattended (last sample at t={:.1f} s, {:.2f} mAh / {:.4f} Wh so far); {}",
                                              reopened->gap_s, reopened->progress->t_s, delivered_mah, delivered_wh,
                                              options.resume->checks));
      if (!st.ok()) return finish(Outcome::kAborted, "database write failed: " + st.ToString(), t_s, "fault");
    } else {
      out = engine.Start(0.0);
    }
    note_progress();
    if (Status st = handle(out); !st.ok()) return finish(Outcome::kAborted, "could not start: " + st.ToString(), t_s, "abort");

    // Pause (a control request): load off, keep sampling at the step's period;
    // the engine is frozen and restored from its own snapshot on continue.
    bool paused = false;
    std::string paused_snapshot;
    double paused_next_s = 0.0;
    auto control = [&]() -> std::optional<Result<RunResult>> {
      if (options.control == nullptr) return std::nullopt;
      Result<std::vector<ControlRequest>> reqs = options.control->Poll(run_id);
      if (!reqs.ok()) return finish(Outcome::kAborted, "database failed while reading requests: " + reqs.status().ToString(), t_s, "fault");
      for (const ControlRequest& q : *reqs) {
        if (q.action == ControlAction::kAbort) return finish(Outcome::kAborted, "aborted by " + q.requested_by, t_s, "abort");
        Status st = Status::Ok();
        if (q.action == ControlAction::kPause && !paused) {
          st = Apply(Setpoint{});  // load off
          paused = true;
          paused_snapshot = engine.Snapshot(t_s);
          paused_next_s = t_s;
          if (st.ok()) st = store_.AddEvent(run_id, t_s, "control", "paused by " + q.requested_by);
        } else if (q.action == ControlAction::kContinue && paused) {
          Result<EngineOutput> again = engine.Restore(paused_snapshot, t_s);
          st = again.status();
          paused = false;
          if (st.ok()) st = store_.AddEvent(run_id, t_s, "control", "continued by " + q.requested_by);
          if (st.ok() && again->setpoint) st = Apply(*again->setpoint);
        } else {
          st = store_.AddEvent(run_id, t_s, "control",
                               fmt::format("{} by {} ignored: run is {}", ControlActionName(q.action), q.requested_by, paused ? "paused" : "running"));
        }
        if (!st.ok()) return finish(Outcome::kAborted, "acting on a request failed: " + st.ToString(), t_s, "fault");
      }
      return std::nullopt;
    };

    while (!engine.finished()) {
      clock_.SleepUntil(t0 + Seconds(paused ? paused_next_s : engine.NextWakeup()), options.stop);
      if (options.stop != nullptr && options.stop->load()) {
        t_s = (clock_.Now() - t0).count();
        return finish(Outcome::kAborted, options.stop_reason, t_s, "abort");
      }
      t_s = (clock_.Now() - t0).count();
      if (auto ended = control()) return *ended;
      Result<Reading> rr = Read(t_s);
      if (!rr.ok()) return finish(Outcome::kAborted, "instrument lost: " + rr.status().ToString(), t_s, "fault");
      Reading r = *rr;
      if (prev) {
        delivered_mah += 0.5 * (r.current_a + prev->current_a) * (r.t_s - prev->t_s) / 3.6;
        delivered_wh += 0.5 * (r.current_a * r.voltage_v + prev->current_a * prev->voltage_v) * (r.t_s - prev->t_s) / 3600.0;
      }
      prev = r;

      Sample s{r.t_s, r.voltage_v, r.current_a, r.temperature_c, engine.step_index()};
      // Staged only: committed below together with the progress it leads to.
      if (Status st = store_.StageSample(run_id, s); !st.ok()) {
        return finish(Outcome::kAborted, "database write failed: " + st.ToString(), t_s, "fault");
      }
      if (options.on_sample) options.on_sample(r, delivered_mah);

      if (auto why = monitor.Check(r, delivered_mah)) return finish(Outcome::kAborted, *why, t_s, "abort");

      if (paused) {
        paused_next_s = t_s + plan.steps[static_cast<size_t>(engine.step_index())].sample_period_s;
        // The step clock stands still while paused, also across a crash.
        store_.SetProgress(run_id, {paused_snapshot, t_s, delivered_mah, delivered_wh});
        if (Status st = store_.MaybeCommit(); !st.ok()) return finish(Outcome::kAborted, "database write failed: " + st.ToString(), t_s, "fault");
        continue;
      }
      out = engine.OnReading(r);
      note_progress();
      if (Status st = handle(out); !st.ok()) {
        return finish(Outcome::kAborted, "step change failed: " + st.ToString(), t_s, "fault");
      }
      if (Status st = store_.MaybeCommit(); !st.ok()) {
        return finish(Outcome::kAborted, "database write failed: " + st.ToString(), t_s, "fault");
      }
    }
    SafeOff();
    return finish(Outcome::kCompleted, out.changes.empty() ? "procedure complete" : "procedure complete: " + out.changes.back().reason,
                  t_s, "end");
  } catch (const std::exception& e) {
    return finish(Outcome::kAborted, std::string("internal error: ") + e.what(), t_s, "fault");
  } catch (...) {
    return finish(Outcome::kAborted, "internal error (unknown exception)", t_s, "fault");
  }
}

}  // namespace kp
