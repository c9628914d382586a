// Simulated bench: one cell wired to a simulated electronic load, a 4-wire
// voltmeter and a temperature probe. Each instrument is a LineDevice that
// parses the same generic SCPI text a real one would (see roles.h for the
// dialect); the cell is integrated lazily up to the injected Clock's Now()
// whenever an instrument is addressed.
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
  double max_step_s = 1.0;       // integration step limit
  double meter_noise_v = 0.0;    // Gaussian noise on voltage readings (1 sigma)
  uint64_t seed = 1;             // noise seed
  double load_max_current_a = 30.0;
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

  // Observers for tests and the simulator console.
  bool load_input_on() const;
  double load_current_a() const;  // current flowing now
  double cell_soc() const;
  double cell_temperature_c() const;

  class Device;  // implementation detail, shared by the three instruments

 private:
  friend class Device;
  void AdvanceLocked();
  double CurrentLocked() const;

  mutable std::mutex mu_;
  CellModel cell_;
  Clock& clock_;
  SimOptions options_;
  Seconds sim_time_;
  std::mt19937_64 rng_;

  bool input_on_ = false;
  LoadMode mode_ = LoadMode::kCurrent;
  double level_current_a_ = 0.0;
  double level_resistance_ohm_ = 1e6;
  double level_power_w_ = 0.0;
  double uv_protect_v_ = 0.0;  // 0: disabled

  std::unique_ptr<Device> load_, meter_, thermometer_;
};

}  // namespace kp::sim
