// The load's commanded timeline, rebuilt from a run's procedure and its step
// records, for analysis: every pulse-train and duty-cycle segment as
// (start, end, current). Lets the report integrate charge per commanded
// segment when the samples are sparser than the segments (see
// analysis/integrate.h), instead of a trapezoid that could alias.
#pragma once

#include <vector>

#include "analysis/integrate.h"
#include "analysis/run_analysis.h"
#include "procedures/plan.h"
#include "rig/store.h"

namespace kp {

// Segments of every constant-current pulse-train / duty-cycle step the run
// executed, clipped to the step's recorded end. A step that was held (heat or
// operator pause) shifts its phase; its segments after the hold are not
// trustworthy, so a step whose record shows a hold is left out (the report then
// falls back to the sample trapezoid for it).
std::vector<CommandedSegment> CommandedSegmentsFor(const Plan& plan, const std::vector<StepRow>& steps,
                                                   const std::vector<EventRow>& events);

// The commanded segments of one step instance (pulse train, duty cycle or
// DC-IR test with constant-current segments), from its start to its recorded
// end; empty for other steps, for a step that was held (its phase after the
// hold is not the commanded one) and for one without a recorded end.
std::vector<CommandedSegment> SegmentsOfInstance(const Step& step, const StepRow& row, const std::vector<EventRow>& events);

// A stored step row as analysis reads it (segments left empty).
StepRecord StepRecordOf(const StepRow& row);

}  // namespace kp
