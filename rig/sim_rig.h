// SimRig: the built-in simulated bench assembled as a rig — a SimBench behind
// in-process transports, SCPI sessions and the same role drivers real
// instruments use (load, meter, thermometer and a DC supply for charging).
// Owns everything; RigRoles points into it. The simulated cell lives as long
// as the SimRig, so consecutive runs continue from the state the last left.
#pragma once

#include <memory>

#include "drivers/roles.h"
#include "drivers/scpi_session.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/supply.h"
#include "rig/run_controller.h"

namespace kp {

class SimRig {
 public:
  SimRig(Clock& clock, sim::CellParams cell, sim::SimOptions options = {});

  RigRoles roles();
  sim::SimBench& bench() { return bench_; }
  ScpiSession& load_session() { return *load_session_; }
  ScpiSession& supply_session() { return *supply_session_; }
  // Traces every exchange of the four simulated instruments.
  void SetTrace(const ScpiTraceHook& hook);

 private:
  sim::SimBench bench_;
  std::unique_ptr<ScpiSession> load_session_, meter_session_, thermo_session_, supply_session_;
  std::unique_ptr<LoadDriver> load_;
  std::unique_ptr<MeterDriver> meter_;
  std::unique_ptr<ThermometerDriver> thermometer_;
  std::unique_ptr<SupplyDriver> supply_;
};

}  // namespace kp
