// Simulated bench: one cell wired to a simulated electronic load, a DC supply
// (for charging), a 4-wire voltmeter and a temperature probe. Each instrument is a LineDevice that
// parses the same generic SCPI text a real one would (see roles.h for the
// dialect); the cell is integrated lazily up to the injected Clock's Now()
// whenever an instrument is addressed. The cell lives as long as the bench, so
// consecutive runs continue from the state (charge, wells, temperature) the
// previous one left.
//
// Load and supply may both be connected: the cell current is the load current
// minus the supply current. The supply regulates its output voltage (CV) up to
// its current limit (CC), so VOLT 4.2 / CURR 1.25 / OUTP ON charges a Li-ion
// cell CC-CV with the current tapering as the cell fills.
//
// Thread-safe: the instruments may be served from different threads.
#pragma once

#include <cstdint>
#include <deque>
#include <memory>
#include <mutex>
#include <random>
#include <string>

#include "drivers/clock.h"
#include "drivers/roles.h"
#include "drivers/sim/cell_model.h"
#include "drivers/transport.h"

namespace kp::sim {

struct SimOptions {
  // Integration step limits. While the current depends on the cell's state
  // (resistance/power modes, supply on, protection active, near empty) steps
  // stay below max_step_s; at constant current the exact updates allow longer
  // steps, and at rest longer still.
  double max_step_s = 1.0;
  double max_constant_current_step_s = 10.0;
  double max_rest_step_s = 600.0;
  double meter_noise_v = 0.0;  // Gaussian noise on voltage readings (1 sigma)
  uint64_t seed = 1;           // noise seed
  double load_max_current_a = 30.0;
  double supply_max_voltage_v = 20.0;
  double supply_max_current_a = 10.0;
  // Thermal-runaway fault: from this simulated time on (< 0: never), the cell
  // produces extra heat growing by `runaway_heat_rate_w_per_s` each second.
  double runaway_start_s = -1.0;
  double runaway_heat_rate_w_per_s = 0.05;
};

class SimBench {
 public:
  SimBench(CellParams cell, Clock& clock, SimOptions options = {});
  ~SimBench();
  SimBench(const SimBench&) = delete;
  SimBench& operator=(const SimBench&) = delete;

  LineDevice& load();
  LineDevice& meter();
  LineDevice& thermometer();
  LineDevice& supply();

  // Observers for tests and the simulator console.
  bool load_input_on() const;
  // Whether the load is under remote control (SYSTem:REMote / :RWLock; :LOCal gives it back).
  bool load_remote() const;
  // Why the load's own protection last switched its input off ("", "undervoltage"
  // is a limit, not a trip: "overcurrent", "overpower", "watchdog").
  std::string load_trip() const;
  double load_current_a() const;  // current flowing now
  bool supply_output_on() const;
  double supply_current_a() const;  // >= 0, into the cell's terminals
  double cell_current_a() const;    // load − supply; > 0 discharges
  double cell_soc() const;
  double cell_temperature_c() const;
  // A copy of the cell as it is now (integrated up to the clock first).
  CellModel cell();
  // Changes the surrounding temperature from now on (a climate chamber).
  void SetAmbient(double ambient_c);

  class Device;  // implementation detail, shared by the three instruments

 private:
  friend class Device;
  struct Flows {
    double load_a = 0.0;
    double supply_a = 0.0;
    double cell_a = 0.0;  // load_a − supply_a
    double terminal_v = 0.0;
    bool state_dependent = false;  // the flows change with the cell's state
  };
  void AdvanceLocked();
  Flows FlowsLocked() const;
  double LoadCurrentAt(double terminal_v) const;

  mutable std::mutex mu_;
  CellModel cell_;
  Clock& clock_;
  SimOptions options_;
  Seconds sim_time_;
  std::mt19937_64 rng_;

  bool input_on_ = false;
  bool load_remote_ = false;
  LoadMode mode_ = LoadMode::kCurrent;
  double level_current_a_ = 0.0;
  double level_resistance_ohm_ = 1e6;
  double level_power_w_ = 0.0;
  double uv_protect_v_ = 0.0;  // 0: disabled
  // The load's protections (0: disabled): over-current and over-power switch
  // the input off when exceeded; the watchdog switches it off when no line
  // reached the load for watchdog_s_ of simulated time.
  double oc_protect_a_ = 0.0;
  double op_protect_w_ = 0.0;
  double watchdog_s_ = 0.0;
  Seconds last_load_line_{0};
  std::string trip_;
  void TripLocked();

  bool supply_on_ = false;
  double supply_voltage_v_ = 0.0;
  double supply_current_limit_a_ = 0.0;

  std::unique_ptr<Device> load_, meter_, thermometer_, supply_;
};

}  // namespace kp::sim
