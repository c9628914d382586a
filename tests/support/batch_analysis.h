// The batch (in-memory, random access) analysis of a run, the reference the
// streaming analysis is checked against: see batch_analysis.cpp.
#pragma once

#include "analysis/run_analysis.h"

namespace kp::testing {

RunAnalysis BatchAnalyseRun(SampleSpan samples, const RunContext& context);

}  // namespace kp::testing
