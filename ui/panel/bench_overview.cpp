#include "ui/panel/bench_overview.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <map>

#include <fmt/format.h>

#include "analysis/duration_format.h"

namespace kp::ui {

std::string TagValueOf(const std::vector<std::string>& tags, const std::string& key) {
  for (const std::string& t : tags)
    if (t.rfind(key, 0) == 0) return t.substr(key.size());
  return {};
}

bool NaturalLess(const std::string& a, const std::string& b) {
  size_t i = 0, j = 0;
  auto digit = [](char c) { return std::isdigit(static_cast<unsigned char>(c)) != 0; };
  while (i < a.size() && j < b.size()) {
    if (digit(a[i]) && digit(b[j])) {
      size_t i2 = i, j2 = j;
      while (i2 < a.size() && digit(a[i2])) ++i2;
      while (j2 < b.size() && digit(b[j2])) ++j2;
      // Compare by value: strip leading zeros, then by length, then by digits.
      size_t ia = i, jb = j;
      while (ia + 1 < i2 && a[ia] == '0') ++ia;
      while (jb + 1 < j2 && b[jb] == '0') ++jb;
      if (i2 - ia != j2 - jb) return i2 - ia < j2 - jb;
      int c = a.compare(ia, i2 - ia, b, jb, j2 - jb);
      if (c != 0) return c < 0;
      i = i2;
      j = j2;
    } else {
      if (a[i] != b[j]) return a[i] < b[j];
      ++i;
      ++j;
    }
  }
  return a.size() - i < b.size() - j;
}

std::vector<BenchGroup> GroupBenches(const std::vector<RunListRow>& runs) {
  std::map<std::string, BenchGroup> groups;
  std::map<std::string, std::map<std::string, const RunListRow*>> newest;  // key -> slot -> row
  for (const RunListRow& r : runs) {
    if (r.slot.empty()) continue;
    const std::string key = r.batch.empty() ? "bench=" + r.bench : "batch=" + r.batch;
    BenchGroup& g = groups[key];
    if (g.key.empty()) {
      g.key = key;
      g.title = r.batch.empty() ? "bench " + r.bench : "batch " + r.batch;
    }
    const RunListRow*& slot_row = newest[key][r.slot];
    if (!slot_row || r.id > slot_row->id) slot_row = &r;
    g.newest_id = std::max(g.newest_id, r.id);
  }
  std::vector<BenchGroup> out;
  for (auto& [key, g] : groups) {
    std::vector<std::pair<std::string, const RunListRow*>> slots(newest[key].begin(), newest[key].end());
    std::sort(slots.begin(), slots.end(), [](const auto& a, const auto& b) { return NaturalLess(a.first, b.first); });
    for (const auto& [slot, row] : slots) {
      g.slots.push_back(slot);
      g.run_ids.push_back(row->id);
      if (row->run_state == RunState::kRunning || row->run_state == RunState::kPaused || row->run_state == RunState::kHeld)
        g.live = true;
    }
    out.push_back(std::move(g));
  }
  std::sort(out.begin(), out.end(), [](const BenchGroup& a, const BenchGroup& b) {
    if (a.live != b.live) return a.live;
    return a.newest_id > b.newest_id;
  });
  return out;
}

namespace {

bool EndsOnTimeOnly(const EndConditions& e) {
  return e.time_s && !e.voltage_below_v && !e.voltage_above_v && !e.current_below_a && !e.charge_mah && !e.energy_wh &&
         !e.temperature_above_c;
}

}  // namespace

TimeLeft EstimateTimeLeft(RunState state, const Plan* plan, const std::vector<StepRow>& steps, double now_s, double current_a,
                          double rated_mah, double discharged_since_charge_mah) {
  TimeLeft t;
  if (state == RunState::kCompleted || state == RunState::kAborted || state == RunState::kInterrupted) {
    t.basis = "the run has ended";
    return t;
  }
  if (plan && plan->loops.empty() && !steps.empty() && !steps.back().ended_s) {
    const StepRow& now = steps.back();
    const size_t first = static_cast<size_t>(std::max(0, now.index));
    bool timed = first < plan->steps.size();
    for (size_t k = first; timed && k < plan->steps.size(); ++k) timed = EndsOnTimeOnly(plan->steps[k].end);
    if (timed) {
      double left = std::max(0.0, *plan->steps[first].end.time_s - (now_s - now.started_s));
      for (size_t k = first + 1; k < plan->steps.size(); ++k) left += *plan->steps[k].end.time_s;
      t.s = left;
      t.basis = fmt::format("from the plan: step {} and the {} after it end on time", now.index + 1, plan->steps.size() - first - 1);
      return t;
    }
  }
  if (rated_mah > 0.0 && current_a > 1e-6) {
    t.s = std::max(0.0, rated_mah - discharged_since_charge_mah) / (current_a * 1000.0) * 3600.0;
    t.basis = fmt::format("from the rated {:.0f} mAh less {:.0f} mAh delivered, at the present {:.3f} A", rated_mah,
                          discharged_since_charge_mah, current_a);
    return t;
  }
  t.basis = rated_mah > 0.0 ? "no estimate: the cell is not discharging and the plan's end is not on time"
                            : "no estimate: no rated capacity and the plan's end is not on time";
  return t;
}

BenchTile MakeTile(const std::string& slot, const RunData& run, const Plan* plan) {
  BenchTile tile;
  tile.run_id = run.row.id;
  tile.slot = slot;
  tile.serial = run.row.cell_serial.empty() ? run.row.cell : run.row.cell_serial;
  tile.status = StatusOf(run.row, run.events);
  tile.rated_mah = run.row.rated_mah;
  const Sample* last = !run.tail.empty() ? &run.tail.back() : run.figures.count() > 0 ? &run.figures.last() : nullptr;
  double now_s = 0.0;
  if (last) {
    tile.voltage_v = last->voltage_v;
    tile.current_a = last->current_a;
    now_s = last->t_s;
  }
  // The latest discharge as the runner keeps it, else what the record discharged (as the runs list).
  tile.delivered_mah = run.row.delivered_mah.value_or(run.figures.discharged_mah());
  tile.left = EstimateTimeLeft(tile.status.state, plan, run.steps, now_s, tile.current_a, run.row.rated_mah,
                               run.figures.discharged_since_charge_mah());
  bool reason_said = run.row.reason.empty();
  for (const EventRow& e : run.events) {
    if (EventSeverity(e) != Severity::kAlarm) continue;
    tile.alarms.push_back(fmt::format("{}: {}: {}", FormatHms(std::max(0.0, e.t_s)), e.kind, e.message));
    if (!reason_said && e.message.find(run.row.reason) != std::string::npos) reason_said = true;
  }
  if (!reason_said && (run.row.outcome == Outcome::kAborted || run.row.outcome == Outcome::kInterrupted))
    tile.alarms.push_back(fmt::format("{}: {}", OutcomeName(run.row.outcome), run.row.reason));
  return tile;
}

}  // namespace kp::ui
