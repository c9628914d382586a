// StepEngine: turns (time, latest reading) into setpoints and step changes.
// It does no I/O: the run controller reads the instruments, hands each reading
// here, and applies what comes back. Times are seconds since run start.
#pragma once

#include <optional>
#include <string_view>
#include <string>
#include <vector>

#include "procedures/plan.h"

namespace kp {

struct Reading {
  double t_s = 0.0;
  double voltage_v = 0.0;
  double current_a = 0.0;  // > 0 discharging
  double temperature_c = 0.0;
};

// What the load should do from now on.
struct Setpoint {
  bool load_on = false;
  LoadMode mode = LoadMode::kCurrent;
  double level = 0.0;  // A, Ohm or W per mode
  bool operator==(const Setpoint&) const = default;
};

struct StepChange {
  int ended_step = -1;  // -1 at start
  int started_step = -1;  // -1 when the plan finished
  std::string reason;   // "voltage 2.748 V <= cutoff 2.750 V"
};

struct EngineOutput {
  std::vector<StepChange> changes;
  std::optional<Setpoint> setpoint;  // set when the load must change
  bool finished = false;
};

class StepEngine {
 public:
  explicit StepEngine(const Plan& plan);

  // Begins the first step at `t_s`.
  EngineOutput Start(double t_s);
  // When the controller should take the next reading.
  double NextWakeup() const { return next_wakeup_s_; }
  // Feeds the reading taken at (or just after) NextWakeup().
  EngineOutput OnReading(const Reading& r);

  // Serialisable position in the plan (step, time into the step, the step's
  // charge and energy so far, and any loop counters), stored with the run so an
  // interrupted run can resume. `t_s` is the time of the latest reading.
  std::string Snapshot(double t_s) const;
  // Continues from a Snapshot at run time `t_s` (the gap while the runner was
  // gone does not count as step time). Returns the setpoint to apply.
  Result<EngineOutput> Restore(std::string_view snapshot, double t_s);

  int step_index() const { return step_; }
  bool finished() const { return step_ >= static_cast<int>(plan_.steps.size()); }
  // Charge and energy delivered in the current step (trapezoidal, from readings).
  double step_charge_mah() const { return step_charge_mah_; }
  double step_energy_wh() const { return step_energy_wh_; }

 private:
  void EnterStep(int index, double t_s, EngineOutput& out);
  std::optional<std::string> EndReason(const Step& step, const Reading& r) const;
  Setpoint SetpointFor(const Step& step) const;

  const Plan& plan_;
  int step_ = -1;
  double step_start_s_ = 0.0;
  double next_wakeup_s_ = 0.0;
  double step_charge_mah_ = 0.0;
  double step_energy_wh_ = 0.0;
  std::optional<Reading> last_;
  std::optional<Setpoint> applied_;
};

}  // namespace kp
