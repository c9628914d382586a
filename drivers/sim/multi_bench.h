// Simulated multi-channel bench: N cells, each on its own SimBench, behind one
// multi-channel electronic load, one multi-channel meter (a scanner), one
// multi-channel thermometer and one multi-channel supply. Each of the four is
// a LineDevice that routes a line to the channel it names, in either of the
// two ways instruments select channels:
//
//   - a select command before the command: "INST:NSEL 3" (INSTrument:NSELect,
//     the SCPI instrument-selection subsystem), kept until the next select;
//     "INST:NSEL?" asks which one is selected;
//   - the channel in the command itself, a SCPI channel list at its end:
//     "CURR 0.5,(@3)", "INP ON,(@3)", "MEAS:VOLT? (@3)".
//
// Everything else ("*OPC?", "SYST:ERR?", compound messages) goes to the
// selected channel; "*IDN?" is answered by the instrument itself. A channel
// out of range queues "-222,Data out of range" on the instrument (read by the
// next SYST:ERR?). The thermometer also has an enclosure probe on channel 0:
// the bench's air temperature, which a test can raise (SetEnclosure).
//
// The selection is one per instrument, as on most real multi-channel
// instruments: two programs talking to one instrument over two links must use
// the channel-list style. Thread-safe.
#pragma once

#include <cstdint>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "drivers/sim/cell_file.h"
#include "drivers/sim/sim_bench.h"

namespace kp::sim {

// N cells of one batch: the nominal cell varied by the preset's spread with
// seeds seed+1 .. seed+n (seed 0 and a zero spread: N nominal cells).
std::vector<CellParams> BatchCells(const CellParams& nominal, const CellSpread& spread, int n, uint64_t seed);

class SimMultiBench {
 public:
  SimMultiBench(std::vector<CellParams> cells, Clock& clock, SimOptions options = {});
  ~SimMultiBench();
  SimMultiBench(const SimMultiBench&) = delete;
  SimMultiBench& operator=(const SimMultiBench&) = delete;

  int channels() const { return static_cast<int>(benches_.size()); }
  // One channel's bench, 1-based (observers: load state, cell).
  SimBench& channel(int n) { return *benches_.at(static_cast<size_t>(n - 1)); }

  LineDevice& load();
  LineDevice& meter();
  LineDevice& thermometer();
  LineDevice& supply();

  // The enclosure probe (thermometer channel 0).
  void SetEnclosure(double c);
  double enclosure_c() const;
  // Select lines ("INST:NSEL n") every instrument received so far.
  long select_lines() const;

  class Router;  // implementation detail

 private:
  std::vector<std::unique_ptr<SimBench>> benches_;
  mutable std::mutex mu_;
  double enclosure_c_ = 25.0;
  std::unique_ptr<Router> load_, meter_, thermometer_, supply_;
};

}  // namespace kp::sim
