// Rig: the assembled instruments a run uses, chosen by configuration.
//
// OpenRig("sim", ...) builds the built-in simulated bench; a path to a rig file
// builds real (or simulator-over-TCP) instruments from it. Callers never
// branch on which one they got: they take roles() and the Clock.
#pragma once

#include <memory>
#include <string>

#include "drivers/clock.h"
#include "drivers/sim/cell_model.h"
#include "drivers/sim/sim_bench.h"
#include "rig/run_controller.h"

namespace kp {

class Rig {
 public:
  virtual ~Rig() = default;
  virtual RigRoles roles() = 0;
  // The clock runs use with this rig: virtual for the in-process simulator
  // (unless a speed was asked for), real time for instruments.
  virtual Clock& clock() = 0;
  // Identifies the instruments for the one-runner-per-rig lock (addresses).
  virtual std::string LockKey() const = 0;
};

struct RigOpenOptions {
  // Simulated seconds per wall second for "sim"; 0 = virtual time (as fast as possible).
  double sim_speed = 0.0;
  sim::CellParams sim_cell = sim::DemoLiIonCell();
  sim::SimOptions sim_options;
};

Result<std::unique_ptr<Rig>> OpenRig(const std::string& spec, const RigOpenOptions& options);

}  // namespace kp
