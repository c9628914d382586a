// Rig: the assembled instruments a run uses, chosen by configuration.
//
// OpenRig("sim", ...) builds the built-in simulated bench; a path to a rig file
// builds real (or simulator-over-TCP) instruments from it (rig/rig_file.h). Callers never
// branch on which one they got: they take roles() and the Clock.
#pragma once

#include <functional>
#include <memory>
#include <optional>
#include <string>

#include "drivers/clock.h"
#include "drivers/sim/cell_model.h"
#include "drivers/sim/sim_bench.h"
#include "procedures/plan.h"
#include "rig/run_controller.h"

namespace kp {

// Absolute limits of the bench itself (wiring, load rating), whatever the
// procedure asks; 0 means no limit declared. Runs should use the tighter of
// these and the procedure's limits.
struct BenchLimits {
  double max_current_a = 0.0;
  double max_voltage_v = 0.0;
  double load_rating_w = 0.0;
  // The chamber's set-point range ([bench] chamber_min_c / chamber_max_c).
  std::optional<double> chamber_min_c, chamber_max_c;
};

class Rig {
 public:
  virtual ~Rig() = default;
  virtual RigRoles roles() = 0;
  // The clock runs use with this rig: virtual for the in-process simulator
  // (unless a speed was asked for), real time for instruments.
  virtual Clock& clock() = 0;
  // Identifies the instruments for the one-runner-per-rig lock (addresses).
  virtual std::string LockKey() const = 0;
  virtual BenchLimits limits() const { return {}; }
};

struct RigOpenOptions {
  // Simulated seconds per wall second for "sim"; 0 = virtual time (as fast as possible).
  double sim_speed = 0.0;
  sim::CellParams sim_cell = sim::DemoLiIonCell();
  sim::SimOptions sim_options;
  // Rig files: trace every SCPI exchange to this file (overrides the file's `trace`).
  std::string trace_path;
  // Rig files: use this clock instead of a SteadyClock at the file's
  // clock_speed (tests share a VirtualClock with a simulator server). Not owned.
  Clock* clock = nullptr;
  // Receives notes for the log (termios fallback, refused optional settings).
  std::function<void(std::string_view)> note;
};

// The rig's limits in the form the procedure compiler applies to a plan
// (procedures/plan.h RigLimits): unset bench limits stay unlimited.
RigLimits PlanLimitsFor(Rig& rig);

Result<std::unique_ptr<Rig>> OpenRig(const std::string& spec, const RigOpenOptions& options);

}  // namespace kp
