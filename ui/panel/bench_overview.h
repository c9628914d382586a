// The bench overview's logic, without any window: which runs make up a
// multi-channel bench or batch (the `slot=` and `batch=` tags RunBench's
// callers put on every channel's run), one tile per channel with its state,
// latest voltage, delivered charge, time left and alarms, and the time-left
// estimate with the basis it rests on. Plain C++, unit-tested in tests/ui/panel.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "procedures/plan.h"
#include "ui/panel/run_feed.h"
#include "ui/panel/view_model.h"

namespace kp::ui {

// The value of the first tag "KEY=value" (`key` given with its '='), or empty.
std::string TagValueOf(const std::vector<std::string>& tags, const std::string& key);

// The runs of one bench or batch: the newest run of each slot, slots in
// natural order ("A2" before "A10").
struct BenchGroup {
  std::string key;    // "batch=NAME", or "bench=NAME" for slot-tagged runs without a batch
  std::string title;  // "batch NAME" / "bench NAME"
  std::vector<std::string> slots;
  std::vector<int64_t> run_ids;  // one per slot, same order
  bool live = false;             // one of its runs is still going (running, paused or held)
  int64_t newest_id = 0;
};

// Groups the runs list's slot-tagged runs (RunListRow::slot) by batch, or by
// bench name for those without a batch; runs without a slot are no bench's.
// Benches with a run going on come first, then the most recently started.
std::vector<BenchGroup> GroupBenches(const std::vector<RunListRow>& runs);

// "A2" < "A10": digit runs compare by value, the rest by character.
bool NaturalLess(const std::string& a, const std::string& b);

// Time left in a run and what the estimate rests on (the tile's tooltip).
struct TimeLeft {
  std::optional<double> s;
  std::string basis;
};
// For a run that is still going:
//  - from the plan, when the step in force and every step after it end on
//    time only and the plan has no loops: the step's time left plus the
//    later steps' times;
//  - otherwise, while discharging, the charge left to the rated capacity
//    (counted from the last charge) at the present current.
// (Common practice, no source: a display aid, never used for control.)
// `plan` may be null (procedure text unreadable); `now_s` is the run time
// of the latest reading.
TimeLeft EstimateTimeLeft(RunState state, const Plan* plan, const std::vector<StepRow>& steps, double now_s, double current_a,
                          double rated_mah, double discharged_since_charge_mah);

// One tile of the overview.
struct BenchTile {
  int64_t run_id = 0;
  std::string slot;
  std::string serial;  // the cell's serial, else the cell name
  RunStatus status;
  std::optional<double> voltage_v;  // latest reading; stale (load off) when status.load_off
  double current_a = 0.0;
  double delivered_mah = 0.0;
  double rated_mah = 0.0;
  TimeLeft left;
  // Abort reasons and safety events, oldest first: the alarm-severity events
  // (EventSeverity) as "t: kind: message", and an abort or interruption
  // reason the events do not already carry.
  std::vector<std::string> alarms;
};
// A tile from a watched run (its row, figures, latest raw samples, events and
// steps). `plan` as for EstimateTimeLeft.
BenchTile MakeTile(const std::string& slot, const RunData& run, const Plan* plan);

}  // namespace kp::ui
