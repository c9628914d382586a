// Whether a run's record can carry a capacity verdict at all: only a finished
// discharge, with readings for (nearly) all of its time, is judged. The
// figures are reported either way.
#pragma once

#include <string>
#include <vector>

#include "analysis/run_analysis.h"
#include "procedures/plan.h"
#include "rig/store.h"

namespace kp {

// More than this share of the judged discharge without readings (gaps) and
// the run is not judged (common practice, no source: a capacity figure
// integrated over a tenth of its time unseen is a guess).
inline constexpr double kMaxUnseenShare = 0.10;

// Empty when the run may be judged; else why not ("the run was aborted:
// over-current", "readings missing for 41 % of the discharge").
std::string WhyNotJudged(const RunRow& run, const RunAnalysis& analysis);

// The spacing each step asked for (StepRecord::expected_spacing_s).
void NoteExpectedSpacing(const Plan& plan, std::vector<StepRecord>& records);

// Outages accounted on resume ("outage" events, rig/resume.h): one line for
// the report, empty when none; `estimated` is set when any was an estimate.
std::string OutageNote(const std::vector<EventRow>& events, bool& estimated);
// The charge each "outage" event counted, at its run time (RunContext::outage_mah).
std::vector<std::pair<double, double>> OutageCharges(const std::vector<EventRow>& events);

}  // namespace kp
