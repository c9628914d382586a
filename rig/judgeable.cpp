#include "rig/judgeable.h"

#include <fmt/format.h>

#include <algorithm>
#include <cstdlib>

namespace kp {

std::string WhyNotJudged(const RunRow& run, const RunAnalysis& a) {
  if (run.outcome != Outcome::kCompleted) {
    std::string why = fmt::format("the run is {}", OutcomeName(run.outcome));
    if (!run.reason.empty()) why += " (" + run.reason + ")";
    return why;
  }
  if (a.discharge_duration_s > 0) {
    const double start = a.discharge_start_s, end = a.discharge_start_s + a.discharge_duration_s;
    double unseen = 0.0;
    for (const Gap& g : a.gaps) unseen += std::max(0.0, std::min(g.t_end_s, end) - std::max(g.t_start_s, start));
    if (unseen > kMaxUnseenShare * a.discharge_duration_s)
      return fmt::format("readings missing for {:.0f} % of the discharge ({:.0f} s of {:.0f} s)", 100.0 * unseen / a.discharge_duration_s,
                         unseen, a.discharge_duration_s);
  }
  return {};
}

void NoteExpectedSpacing(const Plan& plan, std::vector<StepRecord>& records) {
  for (StepRecord& r : records) {
    if (r.index < 0 || r.index >= static_cast<int>(plan.steps.size())) continue;
    const Step& s = plan.steps[static_cast<size_t>(r.index)];
    // Segmented steps sample at their edges too; the period still bounds the spacing.
    r.expected_spacing_s = s.log_change_v ? std::max(s.log_max_gap_s, s.sample_period_s) : s.sample_period_s;
  }
}

std::string OutageNote(const std::vector<EventRow>& events, bool& estimated) {
  estimated = false;
  std::string out;
  for (const EventRow& e : events) {
    if (e.kind != "outage") continue;
    if (e.message.find("method=estimate") != std::string::npos) estimated = true;
    out += (out.empty() ? "" : "; ") + e.message;
  }
  return out;
}

std::vector<std::pair<double, double>> OutageCharges(const std::vector<EventRow>& events) {
  std::vector<std::pair<double, double>> out;
  for (const EventRow& e : events) {
    if (e.kind != "outage") continue;
    size_t at = e.message.find(" mAh counted");
    if (at == std::string::npos) continue;
    size_t start = e.message.rfind(' ', at - 1);
    double mah = std::strtod(e.message.c_str() + (start == std::string::npos ? 0 : start + 1), nullptr);
    if (mah > 0.0) out.emplace_back(e.t_s, mah);
  }
  return out;
}

}  // namespace kp
