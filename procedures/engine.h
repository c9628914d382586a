// StepEngine: turns (time, latest reading) into setpoints and step changes.
// It does no I/O: the run controller reads the instruments, hands each reading
// here, and applies what comes back. Times are seconds since run start.
//
// Sampling: after every setpoint change the next reading comes
// Plan::edge_settle_s later; in pulse trains, duty cycles and resistance tests
// a reading is also taken exactly at each commanded edge (before the level
// changes) and at least every sample period in between, so a charge count
// follows the commanded profile instead of aliasing against it.
// Not thread-safe; the plan must outlive the engine.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "drivers/chamber.h"
#include "procedures/plan.h"

namespace kp {

struct Reading {
  double t_s = 0.0;
  double voltage_v = 0.0;
  double current_a = 0.0;  // > 0 discharging, < 0 charging
  double temperature_c = 0.0;
  // The temperature chamber's reading (degC), taken when the plan drives a chamber.
  std::optional<double> chamber_c;
};

// What the load (and the supply, for charge steps) should do from now on.
struct Setpoint {
  bool load_on = false;
  LoadMode mode = LoadMode::kCurrent;
  double level = 0.0;  // A, Ohm or W per mode
  bool supply_on = false;
  double supply_v = 0.0;  // constant-voltage setting
  double supply_a = 0.0;  // current limit (the constant-current phase)
  bool operator==(const Setpoint&) const = default;
};

struct StepChange {
  int ended_step = -1;    // -1 at start
  int started_step = -1;  // -1 when the plan finished
  std::string reason;     // "voltage 2.748 V <= 2.750 V"
  // The started step instance: its pass of the innermost loop around it
  // (1-based; 0 outside loops) and its cycle (0 before the first charge step;
  // each charge step that follows a non-charge step opens the next cycle).
  int pass = 0;
  int cycle = 0;
  // What the ended step delivered, integrated over every reading it took
  // (trapezoid): charge (> 0 discharged), energy, and the integral of V dt.
  double ended_charge_mah = 0.0;
  double ended_energy_wh = 0.0;
  double ended_voltage_time_vs = 0.0;
};

// A figure a step measured: the DC resistance of a dcir step (U1 at the end
// of the first current, U2 at the end of the second), or of an edge inside a
// pulse train or duty cycle (U1 at the edge, U2 Plan::dcir_delay_s after it).
// A point that cannot meet the method (the level after the edge is shorter
// than the delay, the measured currents do not differ) has valid = false and
// says why; it is recorded but never counted as a resistance.
struct StepResult {
  int step = -1;
  std::string name;                           // "dc-resistance"
  std::string source;                         // "dcir step" or "pulse edge"
  double value = 0.0;                         // SI base unit (Ohm)
  std::string detail;                         // the readings it came from, human-readable
  double t_edge_s = 0.0;                      // the commanded edge
  double u1_v = 0.0, i1_a = 0.0, t1_s = 0.0;  // reading at the end of the first current
  double u2_v = 0.0, i2_a = 0.0, t2_s = 0.0;  // reading at the end of the second current
  bool valid = true;
  std::string why_invalid;
};

struct EngineOutput {
  std::vector<StepChange> changes;
  std::optional<Setpoint> setpoint;  // set when the load or supply must change
  std::vector<StepResult> results;
  bool finished = false;
  // The reading is one to store: a regular reading of the step's sample
  // period, or one a measurement used (U1/U2). Readings taken only to check
  // limits between logs are not (edges and step ends are stored anyway).
  bool log = false;
  // A chamber step began: send this set point (degC) and start the chamber.
  std::optional<double> chamber_setpoint_c;
  // Set when the run must stop: the load could not hold the commanded level,
  // or a chamber soak did not settle in its maximum time.
  std::optional<std::string> abort_reason;
};

class StepEngine {
 public:
  explicit StepEngine(const Plan& plan);

  // Begins the first step at `t_s`. `initial`, when given, is the reading taken
  // before the load was applied (open-circuit voltage): integration starts there.
  EngineOutput Start(double t_s, const std::optional<Reading>& initial = std::nullopt);
  // When the controller should take the next reading.
  double NextWakeup() const { return next_wakeup_s_; }
  // Feeds the reading taken at (or just after) NextWakeup().
  EngineOutput OnReading(const Reading& r);

  // Counts a reading into the step's charge and energy without deciding
  // anything (readings taken while paused, or the one that caused a pause).
  void Integrate(const Reading& r);

  // Serialisable position in the plan (step, time into the step, the step's
  // charge and energy so far, loop counters, a half-done resistance test),
  // stored with the run so an interrupted run can resume. `t_s` is the time of
  // the latest reading.
  std::string Snapshot(double t_s) const;
  // Continues from a Snapshot at run time `t_s` (the gap while the runner was
  // gone does not count as step time). Returns the setpoint to apply.
  Result<EngineOutput> Restore(std::string_view snapshot, double t_s);

  int step_index() const { return step_; }
  bool finished() const { return step_ >= static_cast<int>(plan_.steps.size()); }
  const Step* current_step() const { return finished() || step_ < 0 ? nullptr : &plan_.steps[static_cast<size_t>(step_)]; }
  // Charge and energy delivered in the current step (trapezoidal, from readings).
  double step_charge_mah() const { return step_charge_mah_; }
  double step_energy_wh() const { return step_energy_wh_; }
  double step_voltage_time_vs() const { return step_vs_; }
  // Completed passes of loop `i` (Plan::loops order) in its current run.
  int loop_iteration(size_t i) const { return loops_[i].iter; }
  // The cycle the current step belongs to (see StepChange::cycle).
  int cycle() const { return cycle_; }
  // Pass of the innermost loop around the current step (1-based; 0 outside loops).
  int pass() const;

 private:
  struct LoopState {
    int iter = 0;
    double start_s = 0.0;
    double charge_mah = 0.0;
    double energy_wh = 0.0;
  };
  void EnterStep(int index, double t_s, int looped_back, EngineOutput& out);
  void Emit(const Setpoint& sp, EngineOutput& out);
  int NextIndex(int ended, int exited_loop, int& looped_back);
  bool Contains(size_t outer, size_t inner) const;
  void PlaceSegment(double t_s);  // segment state from time into the step
  std::optional<std::string> EndReason(const EndConditions& e, const Reading& r, double elapsed_s, double charge_mah,
                                       double energy_wh) const;
  Setpoint SetpointFor(const Step& step) const;
  double MinPeriod() const;  // the current step's sample period
  Setpoint SegmentSetpoint(const Segment& g) const;
  void Schedule(double t_s, bool changed_now);
  // How soon the next reading is due to judge the limits that are being
  // approached (voltage and temperature end conditions, safety limits).
  double LimitCheckDelay() const;
  void CheckRegulation(const Reading& r, EngineOutput& out);
  void CompletePulseEdge(const Reading& r, EngineOutput& out);
  // A DC-IR point with its first reading (U1, I1) taken.
  StepResult FirstReading(const char* source, double t_edge_s, const Reading& r) const;

  const Plan& plan_;
  int step_ = -1;
  double step_start_s_ = 0.0;
  double next_wakeup_s_ = 0.0;
  double step_charge_mah_ = 0.0;
  double step_energy_wh_ = 0.0;
  double step_vs_ = 0.0;  // integral of V dt in the step
  size_t seg_ = 0;
  double seg_start_s_ = 0.0;
  std::optional<StepResult> dcir_;  // first half of a resistance test
  std::vector<LoopState> loops_;
  std::optional<Reading> last_;
  std::optional<Reading> before_last_;  // for the approach rate of a limit
  std::optional<Setpoint> applied_;
  double applied_at_s_ = 0.0;
  double now_s_ = 0.0;
  double next_regular_s_ = 0.0;
  int cycle_ = 0;
  bool last_was_charge_ = false;
  std::optional<double> low_since_s_;     // lost regulation: first low reading
  std::optional<StepResult> pulse_edge_;  // an edge waiting for its U2
  std::optional<SoakJudge> soak_;          // a chamber soak step's judgement (restarts on restore)
};

}  // namespace kp
