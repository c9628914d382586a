// SimRig: the built-in simulated bench assembled as a rig — a SimBench behind
// in-process transports, SCPI sessions and the same role drivers real
// instruments use (load, meter, thermometer, a DC supply for charging and a
// temperature chamber around the cell, whose temperature is the cell's ambient).
// Owns everything; RigRoles points into it. The simulated cell lives as long
// as the SimRig, so consecutive runs continue from the state the last left.
#pragma once

#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "drivers/roles.h"
#include "drivers/scpi_session.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/sim/sim_chamber.h"
#include "drivers/supply.h"
#include "rig/run_controller.h"
#include "rig/store.h"

namespace kp {

class SimRig {
 public:
  SimRig(Clock& clock, sim::CellParams cell, sim::SimOptions options = {});

  RigRoles roles();
  sim::SimBench& bench() { return bench_; }
  ScpiSession& load_session() { return *load_session_; }
  ScpiSession& supply_session() { return *supply_session_; }
  sim::SimChamber& chamber_device() { return *chamber_dev_; }
  // Traces every exchange of the four simulated instruments.
  void SetTrace(const ScpiTraceHook& hook);

 private:
  sim::SimBench bench_;
  std::unique_ptr<sim::SimChamber> chamber_dev_;
  std::unique_ptr<ScpiSession> load_session_, meter_session_, thermo_session_, supply_session_, chamber_session_;
  std::unique_ptr<LoadDriver> load_;
  std::unique_ptr<MeterDriver> meter_;
  std::unique_ptr<ThermometerDriver> thermometer_;
  std::unique_ptr<SupplyDriver> supply_;
  std::unique_ptr<ChamberDriver> chamber_;
  std::vector<InstrumentRecord> instruments_;  // asked once, at construction
};

// Which simulated cell a run on the built-in simulator uses: a preset (or a
// cell file) built to a rated capacity, optionally one cell of the preset's
// batch, starting at a state of charge. Recorded with the run (an event of
// kind "sim-cell", `SimCellText`) so `resume --rig sim` rebuilds the same cell.
struct SimCellChoice {
  std::string preset;        // built-in preset name or cell-file path
  double rated_mah = 0.0;    // 0: the preset's own rating
  uint64_t seed = 0;         // 0: the nominal cell
  double start_soc = 1.0;    // state of charge at the start, 0..1
  std::optional<double> ambient_c;  // surroundings (and the cell at the start); empty: the preset's
  double fade = 0.0;         // ageing: capacity lost, 0..0.9 of the preset's (resistances grow with it)
};

// Resistance growth that goes with a capacity fade: +2.5 % per 1 % lost, so
// a cell at 80 % of its capacity (a usual end-of-life point) has 1.5 times
// its resistance (from memory: aged cells commonly show +30 % to +100 % there).
inline constexpr double kResistanceGrowthPerFade = 2.5;

// The cell a choice names (preset loaded, scaled, varied, part-charged).
Result<sim::CellParams> BuildSimCell(const SimCellChoice& choice);
// One line, "preset=li-ion rated_mah=2500 seed=0 soc=0.4 [ambient_c=0] [fade=0.2]",
// and back (the preset or path is everything between "preset=" and the last
// " rated_mah=", so a path may hold spaces).
std::string SimCellText(const SimCellChoice& choice);
Result<SimCellChoice> ParseSimCellText(std::string_view text);

// The state the simulated cell of a logged run was in at its last logged
// sample: starts `cell` as it was built and integrates it over the stored
// samples, the current between two samples taken as the closing sample's
// (the reading taken at the setpoint that held over the interval) and as zero
// across a "gap" event (the load was off while no readings came). Used to
// continue the same cell on resume.
sim::CellState ReplayLoggedCell(const sim::CellParams& cell, SampleSpan samples, const std::vector<EventRow>& events);

}  // namespace kp
