// Role drivers: what the run controller needs from each instrument, mapped to
// SCPI text by a command dialect. The dialect is data (filled from an
// instrument profile file); the defaults here are a generic SCPI dialect that
// the built-in simulator understands.
//
// A `{}` in a command is replaced by the formatted number. An empty command
// means "this instrument cannot do that" and the call fails with kInvalidInput.
// Drivers borrow their ScpiSession; the caller keeps it alive.
#pragma once

#include <optional>
#include <string>
#include <string_view>

#include "drivers/scpi_session.h"

namespace kp {

enum class LoadMode { kCurrent, kResistance, kPower };
const char* LoadModeName(LoadMode mode);

// Linear correction applied to a reading: corrected = raw * gain + offset
// (from the rig file's calibration keys). Setpoints are sent uncorrected.
struct Calibration {
  double offset = 0.0;
  double gain = 1.0;
  double Apply(double raw) const { return raw * gain + offset; }
};

// The load's own protections, set by every run from the procedure's limits
// (the backstops when the controller is gone): the input goes off below a
// voltage, above a current or a power, or when no command arrived within a
// time (watchdog). Names are the profile keys' suffixes (`guard-NAME`) and the
// words a rig file's `unguarded` list acknowledges.
enum class LoadGuard { kUnderVoltage, kOverCurrent, kOverPower, kWatchdog };
inline constexpr LoadGuard kLoadGuards[] = {LoadGuard::kUnderVoltage, LoadGuard::kOverCurrent, LoadGuard::kOverPower,
                                            LoadGuard::kWatchdog};
const char* LoadGuardName(LoadGuard g);  // "undervoltage", "overcurrent", "overpower", "watchdog"
const char* LoadGuardUnit(LoadGuard g);  // "V", "A", "W", "s"

// The query that reads back what `command` sets, by the SCPI convention: the
// command's header (the text before its first space) with '?' appended
// ("VOLT:PROT:LOW {}" -> "VOLT:PROT:LOW?", "INP OFF" -> "INP?"). Empty for an
// empty command.
std::string ReadBackQuery(std::string_view command);
// "1"/"0"/"ON"/"OFF" (any case, surrounding blanks, a leading '+') as a state;
// nullopt for anything else.
std::optional<bool> ParseStateReply(std::string_view reply);

struct LoadCommands {
  std::string mode_current = "FUNC CURR";
  std::string mode_resistance = "FUNC RES";
  std::string mode_power = "FUNC POW";
  std::string set_current = "CURR {}";
  std::string set_resistance = "RES {}";
  std::string set_power = "POW {}";
  std::string input_on = "INP ON";
  std::string input_off = "INP OFF";
  std::string measure_voltage = "MEAS:VOLT?";
  std::string measure_current = "MEAS:CURR?";
  std::string under_voltage_backstop = "VOLT:PROT:LOW {}";  // hardware backstop below cutoff
  std::string measure_power;           // optional
  std::string over_current_backstop = "CURR:PROT {}";  // the load's own current protection
  std::string over_power_backstop = "POW:PROT {}";     // the load's own power protection
  std::string watchdog_backstop = "PROT:WATC {}";      // input off after {} s without a command
  // Optional read-back queries; empty: ReadBackQuery of the command.
  std::string under_voltage_read, over_current_read, over_power_read, watchdog_read;
  std::string input_state;  // optional; empty: ReadBackQuery(input_off)
  // Optional read-backs used to reconcile what the load holds with what the
  // run commanded; empty: ReadBackQuery of mode_current / of the level command.
  std::string mode_read;
  std::string remote_sense_on;         // optional: 4-wire sense at the cell
  std::string remote_sense_off;
};

// Whether `c` has a command for the guard (empty = the load cannot).
bool LoadHasGuard(const LoadCommands& c, LoadGuard g);

// Electronic load. Current is positive when the load sinks it (cell discharging).
class LoadDriver {
 public:
  LoadDriver(ScpiSession& session, LoadCommands commands = {}) : session_(session), cmd_(std::move(commands)) {}
  Status SetMode(LoadMode mode);
  // Level in A, Ohm or W depending on mode. Selects the mode first when it changed.
  Status SetLevel(LoadMode mode, double level);
  Status SetInput(bool on);
  Status SetUnderVoltageBackstop(double volts);
  Status SetOverCurrentBackstop(double amps);
  // Whether the profile has a command for the guard (empty = none).
  bool HasGuard(LoadGuard g) const;
  // Sets a guard (V, A, W or s) / reads back what the load holds.
  Status SetGuard(LoadGuard g, double value);
  Result<double> ReadGuard(LoadGuard g);
  // The input's state as the load reports it.
  Result<bool> InputState();
  // The mode the load reports (its reply matched against the argument of each
  // mode command, short or long form) and the level it holds in that mode.
  Result<LoadMode> ReadMode();
  Result<double> ReadLevel(LoadMode mode);
  // The watchdog guard is armed only on loads reached over a link (rig
  // files): a simulated load in this process dies with it. The instrument
  // counts in its own seconds: wall seconds on hardware, simulated ones on
  // `kneepoint sim --speed K` (K of them per wall second, the rig file's
  // clock_speed). 0: not armed (the default).
  void EnableWatchdog(double instrument_seconds_per_wall_second) { watchdog_scale_ = instrument_seconds_per_wall_second; }
  double watchdog_scale() const { return watchdog_scale_; }
  const LoadCommands& commands() const { return cmd_; }
  Status SetRemoteSense(bool on);
  Result<double> MeasureVoltage();
  Result<double> MeasureCurrent();
  Result<double> MeasurePower();
  ScpiSession& session() { return session_; }

  void SetCalibration(Calibration voltage, Calibration current) {
    cal_v_ = voltage;
    cal_i_ = current;
  }
  // Rig limits: SetLevel refuses (kLimitExceeded) a current above
  // `max_current_a` or a power above `max_power_w` (<= 0: no limit).
  void SetLimits(double max_current_a, double max_power_w) {
    max_current_a_ = max_current_a;
    max_power_w_ = max_power_w;
  }

 private:
  Status Command(const std::string& templ, double value, const char* what);
  Result<double> Reading(const std::string& query, const char* what);

  ScpiSession& session_;
  LoadCommands cmd_;
  bool mode_known_ = false;
  LoadMode mode_ = LoadMode::kCurrent;
  Calibration cal_v_, cal_i_;
  double max_current_a_ = 0.0, max_power_w_ = 0.0;
  double watchdog_scale_ = 0.0;
};

struct MeterCommands {
  std::string measure_voltage = "MEAS:VOLT:DC?";
};

// Voltmeter on the cell's sense terminals (4-wire).
class MeterDriver {
 public:
  MeterDriver(ScpiSession& session, MeterCommands commands = {}) : session_(session), cmd_(std::move(commands)) {}
  Result<double> MeasureVoltage();
  void SetCalibration(Calibration voltage) { cal_ = voltage; }
  // Stuck-reading guard: fail (kProtocol) once the raw reading has been
  // exactly the same `readings` times in a row (0: off). A live cell under
  // load and a real meter's last digit never sit still that long.
  void SetStuckLimit(int readings) { stuck_limit_ = readings; }

  ScpiSession& session() { return session_; }

 private:
  ScpiSession& session_;
  MeterCommands cmd_;
  Calibration cal_;
  int stuck_limit_ = 0;
  int same_count_ = 0;
  double last_raw_ = 0.0;
};

struct ThermometerCommands {
  std::string measure_temperature = "MEAS:TEMP?";
};

// Temperature probe on the cell body, degrees Celsius.
class ThermometerDriver {
 public:
  ThermometerDriver(ScpiSession& session, ThermometerCommands commands = {})
      : session_(session), cmd_(std::move(commands)) {}
  Result<double> MeasureTemperature();
  void SetCalibration(Calibration temperature) { cal_ = temperature; }

  ScpiSession& session() { return session_; }

 private:
  ScpiSession& session_;
  ThermometerCommands cmd_;
  Calibration cal_;
};

// Reads one number and turns overflow / NaN into a kProtocol error naming `what`
// (with the instrument's own SYSTem:ERRor? text when it queued any).
Result<double> ReadFiniteNumber(ScpiSession& session, const std::string& query, const char* what);

}  // namespace kp
