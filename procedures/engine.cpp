#include "procedures/engine.h"

#include <cmath>
#include <cstdio>

#include <fmt/format.h>

namespace kp {

StepEngine::StepEngine(const Plan& plan) : plan_(plan) {}

Setpoint StepEngine::SetpointFor(const Step& step) const {
  Setpoint sp;
  switch (step.kind) {
    case StepKind::kRest: break;
    case StepKind::kConstantCurrent:
      sp.load_on = true;
      sp.mode = LoadMode::kCurrent;
      sp.level = step.current_a;
      break;
  }
  return sp;
}

void StepEngine::EnterStep(int index, double t_s, EngineOutput& out) {
  step_ = index;
  step_start_s_ = t_s;
  step_charge_mah_ = 0.0;
  step_energy_wh_ = 0.0;
  if (finished()) {
    out.finished = true;
    Setpoint off;
    if (!applied_ || !(*applied_ == off)) out.setpoint = off;
    applied_ = off;
    return;
  }
  const Step& step = plan_.steps[static_cast<size_t>(step_)];
  Setpoint sp = SetpointFor(step);
  if (!applied_ || !(*applied_ == sp)) out.setpoint = sp;
  applied_ = sp;
  next_wakeup_s_ = t_s + step.sample_period_s;
}

EngineOutput StepEngine::Start(double t_s) {
  EngineOutput out;
  out.changes.push_back({-1, 0, "start"});
  EnterStep(0, t_s, out);
  if (out.finished) out.changes.back().started_step = -1;
  return out;
}

std::optional<std::string> StepEngine::EndReason(const Step& step, const Reading& r) const {
  const EndConditions& e = step.end;
  // Voltage limits only mean something once the load is applied; a rest that
  // starts below the threshold still ends on time.
  if (e.voltage_below_v && r.voltage_v <= *e.voltage_below_v)
    return fmt::format("voltage {:.3f} V <= {:.3f} V", r.voltage_v, *e.voltage_below_v);
  if (e.voltage_above_v && r.voltage_v >= *e.voltage_above_v)
    return fmt::format("voltage {:.3f} V >= {:.3f} V", r.voltage_v, *e.voltage_above_v);
  if (e.current_below_a && std::abs(r.current_a) <= *e.current_below_a)
    return fmt::format("current {:.4f} A <= {:.4f} A", std::abs(r.current_a), *e.current_below_a);
  double elapsed = r.t_s - step_start_s_;
  if (e.time_s && elapsed >= *e.time_s - 1e-9) return fmt::format("time {:.1f} s >= {:.1f} s", elapsed, *e.time_s);
  if (e.charge_mah && step_charge_mah_ >= *e.charge_mah)
    return fmt::format("charge {:.2f} mAh >= {:.2f} mAh", step_charge_mah_, *e.charge_mah);
  if (e.energy_wh && step_energy_wh_ >= *e.energy_wh)
    return fmt::format("energy {:.4f} Wh >= {:.4f} Wh", step_energy_wh_, *e.energy_wh);
  if (e.temperature_above_c && r.temperature_c >= *e.temperature_above_c)
    return fmt::format("temperature {:.1f} degC >= {:.1f} degC", r.temperature_c, *e.temperature_above_c);
  return std::nullopt;
}

EngineOutput StepEngine::OnReading(const Reading& r) {
  EngineOutput out;
  if (finished()) {
    out.finished = true;
    return out;
  }
  if (last_ && r.t_s > last_->t_s && r.t_s - last_->t_s > 0) {
    double dt_h = (r.t_s - last_->t_s) / 3600.0;
    step_charge_mah_ += 0.5 * (r.current_a + last_->current_a) * dt_h * 1000.0;
    step_energy_wh_ += 0.5 * (r.current_a * r.voltage_v + last_->current_a * last_->voltage_v) * dt_h;
  }
  last_ = r;
  const Step& step = plan_.steps[static_cast<size_t>(step_)];
  if (auto reason = EndReason(step, r)) {
    int ended = step_;
    EnterStep(step_ + 1, r.t_s, out);
    out.changes.push_back({ended, finished() ? -1 : step_, *reason});
    // The next step's integration starts from this reading.
    return out;
  }
  next_wakeup_s_ = r.t_s + step.sample_period_s;
  return out;
}

std::string StepEngine::Snapshot(double t_s) const {
  return fmt::format("v1 step={} elapsed={:.17g} charge={:.17g} energy={:.17g}", step_, t_s - step_start_s_, step_charge_mah_,
                     step_energy_wh_);
}

Result<EngineOutput> StepEngine::Restore(std::string_view snapshot, double t_s) {
  int step = 0;
  double elapsed = 0, charge = 0, energy = 0;
  std::string text(snapshot);
  if (std::sscanf(text.c_str(), "v1 step=%d elapsed=%lf charge=%lf energy=%lf", &step, &elapsed, &charge, &energy) != 4)
    return InvalidInput(fmt::format("unreadable engine snapshot '{}'", text));
  if (step < 0 || step > static_cast<int>(plan_.steps.size()))
    return InvalidInput(fmt::format("snapshot step {} is outside the procedure ({} steps)", step, plan_.steps.size()));
  EngineOutput out;
  applied_.reset();
  last_.reset();
  EnterStep(step, t_s - elapsed, out);
  step_charge_mah_ = charge;
  step_energy_wh_ = energy;
  if (!finished()) next_wakeup_s_ = t_s + plan_.steps[static_cast<size_t>(step_)].sample_period_s;
  return out;
}

}  // namespace kp
