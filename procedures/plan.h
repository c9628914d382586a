// Plan: a validated, compiled procedure — what the step engine executes. The
// procedure parser (procedures/procedure_parser.h) produces it; tests and
// built-in campaigns may also build one in code. All quantities are SI in the
// names' units. A Plan is plain data: copy it freely.
#pragma once

#include <limits>
#include <optional>
#include <string>
#include <cstdint>
#include <vector>

#include "drivers/roles.h"

namespace kp {

// The cell under test, from the procedure header.
struct CellSpec {
  std::string chemistry = "li-ion";
  double rated_mah = 0.0;
  double nominal_v = 0.0;
  double max_v = 0.0;
  double cutoff_v = 0.0;
  double max_temp_c = 60.0;
  // Current for a C-rate: 1C drains the rated capacity in one hour.
  double CRateToAmps(double c_rate) const { return c_rate * rated_mah / 1000.0; }
};

// What the safety monitor does when the cell is too hot.
enum class OverTempAction { kAbort, kPause };

// Absolute limits checked on every sample, whatever the step logic does.
struct SafetyLimits {
  double max_temp_c = 60.0;
  double min_voltage_v = 0.0;
  double max_voltage_v = 5.0;
  double max_current_a = 10.0;
  double max_total_s = 72.0 * 3600.0;
  double max_charge_mah = std::numeric_limits<double>::infinity();
  // kPause: at max_temp_c the load goes off and the run waits until the cell
  // has cooled to resume_temp_c (hysteresis); at hard_temp_c it aborts anyway.
  OverTempAction over_temp_action = OverTempAction::kAbort;
  double resume_temp_c = 0.0;
  double hard_temp_c = std::numeric_limits<double>::infinity();
  // Chamber set points allowed (safety chamber-min= / chamber-max=, tightened
  // by the rig's); a chamber reading 5 degC beyond them aborts the run.
  std::optional<double> chamber_min_c, chamber_max_c;
};

// Any combination may be set; the step ends at the first that holds.
struct EndConditions {
  std::optional<double> voltage_below_v;
  std::optional<double> voltage_above_v;
  std::optional<double> current_below_a;  // magnitude, for charge tapers
  std::optional<double> time_s;
  std::optional<double> charge_mah;  // magnitude delivered (either sign)
  std::optional<double> energy_wh;
  std::optional<double> temperature_above_c;
  bool any() const {
    return voltage_below_v || voltage_above_v || current_below_a || time_s || charge_mah || energy_wh || temperature_above_c;
  }
};

enum class StepKind {
  kRest,
  kConstantCurrent,
  kConstantPower,
  kConstantResistance,
  kPulseTrain,      // segments[0..1] repeated
  kDutyCycle,       // a named profile's segments repeated
  kResistanceTest,  // DC-IR two-current method: segments[0] then segments[1], once
  kCharge,          // supply: constant current, then constant voltage
  kChamberSet,      // chamber: new set point (load off); ends at the next reading
  kChamberSoak,     // chamber: wait (load off) until stable around the set point
};
const char* StepKindName(StepKind kind);

// One commanded level held for a time inside a pulse train, duty cycle or
// resistance test. `real_duration_s` is what the profile describes; a
// compressed phase runs for `duration_s` < `real_duration_s` so a long test
// fits in a night, and analysis scales that phase back with the ratio.
struct Segment {
  std::string name;
  LoadMode mode = LoadMode::kCurrent;
  double level = 0.0;  // A, Ohm or W per mode; 0 A means load off
  double duration_s = 0.0;
  double real_duration_s = 0.0;
  bool compressed() const { return duration_s < real_duration_s; }
};

struct Step {
  StepKind kind = StepKind::kRest;
  std::string label;
  double current_a = 0.0;         // kConstantCurrent (> 0 discharges)
  double power_w = 0.0;           // kConstantPower
  double resistance_ohm = 0.0;    // kConstantResistance
  std::vector<Segment> segments;  // kPulseTrain, kDutyCycle, kResistanceTest
  std::string profile_name;       // kDutyCycle
  double charge_current_a = 0.0;  // kCharge: constant-current phase (supply limit)
  double charge_voltage_v = 0.0;  // kCharge: constant-voltage setting
  // kChamberSet: the set point; kChamberSoak: the set point it judges against
  // (the latest chamber step before it), within ±soak_band_c for soak_hold_s,
  // the run aborts when that has not happened soak_max_s after the soak began.
  double chamber_c = 0.0;
  double soak_band_c = 0.0;
  double soak_hold_s = 0.0;
  double soak_max_s = 0.0;
  double sample_period_s = 1.0;
  // Log-on-change: readings keep coming every sample period (for safety), but
  // one is stored only when |dV| since the last stored one reaches this, or
  // `log_max_gap_s` passed, or the step changes.
  std::optional<double> log_change_v;
  double log_max_gap_s = 600.0;
  EndConditions end;
  int source_line = 0;  // where the step was written, for messages

  // Sum of the segments' (run) durations; 0 for steps without segments.
  double CycleSeconds() const;
  // The real (uncompressed) time that `elapsed_s` of run time in this step
  // stands for: analysis uses it to project a compressed duty-cycle test
  // back to the product's life. Identity for steps without compression.
  double RealSeconds(double elapsed_s) const;
};

// A loop over steps [first_step, last_step]. count > 0: run the body that many
// times. count == 0: repeat until `until` holds (checked on every reading while
// inside the body; time and charge count from the loop's start).
struct Loop {
  int first_step = 0;
  int last_step = 0;
  int count = 0;
  EndConditions until;
  int source_line = 0;
};

// The one repeat limit: a step runs at most this many times through the
// repeats around it, nested counts multiplied (`repeat 1000` inside
// `repeat 1000` is 1,000,000 passes). The parser refuses more with one
// message; `check` estimates with the same product.
inline constexpr int64_t kMaxRepeatPasses = 1000000;

// Passes of the steps of `l` through `l` and every counted repeat nested in
// it (the deepest chain; until-loops count once).
int64_t NestedPasses(const std::vector<Loop>& loops, const Loop& l);

struct Plan {
  std::string name;         // procedure name (file stem or built-in name)
  std::string source_text;  // the text it was compiled from, stored with the run
  CellSpec cell;
  SafetyLimits limits;
  std::vector<Step> steps;
  std::vector<Loop> loops;  // outer loops before the inner ones they contain
  // After every setpoint change the engine takes a reading this soon, so charge
  // counting follows the edges (at least the rig's fastest sample period).
  // It is also the fastest limit-check rate: between logged samples the engine
  // takes extra readings as an end condition or safety limit approaches.
  double edge_settle_s = 0.05;
  // Two-current DC-IR at the edges inside pulse trains and duty cycles: U2 is
  // read this long after the edge (IEC 61960-3 clause 7.7 reads U2 after 1 s;
  // secondary source); edges whose commanded current changes by less than
  // dcir_min_step_a are not measured.
  double dcir_delay_s = 1.0;
  double dcir_min_step_a = 0.05;
  // Lost regulation: the load is on, the measured current (or power) stays
  // below half of what was commanded for this long: the run aborts.
  double regulation_grace_s = 10.0;
  // What the parser found legal but probably not meant ("line N:col: ..."):
  // `check` and `run` print them.
  std::vector<std::string> warnings;
};

// True for the steps that take charge out of the cell (CC, CP, CR, pulse
// train, duty cycle, DC-IR test).
bool IsDischargeKind(StepKind kind);
bool IsChamberKind(StepKind kind);
// True when some step drives the temperature chamber.
bool PlanUsesChamber(const Plan& plan);
// What a step commands, as stored with its step record: the mode name
// ("current", "power", "resistance", "charge", "segments", "off") and the
// commanded level (A, W, Ohm; the charge current; 0 for a rest; none for
// pulse trains, duty cycles and DC-IR tests, whose levels are their segments).
const char* StepModeName(const Step& step);
std::optional<double> StepLevel(const Step& step);

// What a rig can do at most, from its rig file (or the simulator's options).
// Procedures ask; the rig caps.
struct RigLimits {
  double max_current_a = std::numeric_limits<double>::infinity();
  double max_power_w = std::numeric_limits<double>::infinity();
  double max_voltage_v = std::numeric_limits<double>::infinity();
  double max_temp_c = std::numeric_limits<double>::infinity();
  double min_sample_period_s = 0.05;  // fastest full reading (V, I, T)
  bool has_supply = true;             // charge steps need one
  bool has_chamber = true;            // chamber and soak steps need one
  std::optional<double> chamber_min_c, chamber_max_c;  // set points the rig's chamber may take
};

// Tightens the plan's safety limits to the rig's and returns what cannot run
// on this rig at all (a step asking more current than the load sinks, a
// segment shorter than the rig can sample, a charge step without a supply).
// Each message starts with "line N: ".
std::vector<std::string> ApplyRigLimits(Plan& plan, const RigLimits& rig);

// Built-in rated-capacity check: discharge at 0.2 It to the end voltage, as in
// IEC 61960-3 clause 7.3.1 (0.2 It to the manufacturer's end-of-discharge
// voltage at 20 ± 5 °C; secondary source, see analysis/METHODS.md).
Plan RatedCapacityPlan(const CellSpec& cell, double sample_period_s = 1.0);

}  // namespace kp
