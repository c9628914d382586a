#include "rig/commanded_segments.h"

#include <algorithm>

namespace kp {

std::vector<CommandedSegment> CommandedSegmentsFor(const Plan& plan, const std::vector<StepRow>& steps,
                                                   const std::vector<EventRow>& events) {
  std::vector<CommandedSegment> out;
  for (const StepRow& row : steps) {
    if (row.index < 0 || row.index >= static_cast<int>(plan.steps.size())) continue;
    const Step& step = plan.steps[static_cast<size_t>(row.index)];
    if (step.kind != StepKind::kPulseTrain && step.kind != StepKind::kDutyCycle) continue;
    std::vector<CommandedSegment> segs = SegmentsOfInstance(step, row, events);
    out.insert(out.end(), segs.begin(), segs.end());
  }
  return out;
}

StepRecord StepRecordOf(const StepRow& s) {
  StepRecord r;
  r.index = s.index;
  r.kind = s.kind;
  r.started_s = s.started_s;
  r.ended_s = s.ended_s;
  r.end_reason = s.end_reason;
  r.mode = s.mode;
  r.level = s.level;
  r.pass = s.pass;
  r.cycle = s.cycle;
  r.held_s = s.held_s;
  return r;
}

std::vector<CommandedSegment> SegmentsOfInstance(const Step& step, const StepRow& row, const std::vector<EventRow>& events) {
  std::vector<CommandedSegment> out;
  if (!row.ended_s || row.held_s > 0) return out;
  if (step.kind != StepKind::kPulseTrain && step.kind != StepKind::kDutyCycle && step.kind != StepKind::kResistanceTest) return out;
  bool current_only = !step.segments.empty() && std::all_of(step.segments.begin(), step.segments.end(), [](const Segment& s) {
    return s.mode == LoadMode::kCurrent && s.duration_s > 0;
  });
  if (!current_only) return out;
  // Rows from before step records kept the hold time: the events tell.
  bool held = std::any_of(events.begin(), events.end(), [&](const EventRow& e) {
    return (e.kind == "pause" || e.kind == "control" || e.kind == "gap") && e.t_s >= row.started_s && e.t_s <= *row.ended_s;
  });
  if (held) return out;
  double t = row.started_s;
  const double end = *row.ended_s;
  const bool once = step.kind == StepKind::kResistanceTest;
  while (t < end) {
    for (const Segment& seg : step.segments) {
      if (t >= end) break;
      double stop = std::min(end, t + seg.duration_s);
      out.push_back({t, stop, seg.level});
      t = stop;
    }
    if (once) break;
  }
  return out;
}

}  // namespace kp
