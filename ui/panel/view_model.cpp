#include "ui/panel/view_model.h"

#include "procedures/procedure_parser.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <sstream>
#include <cstdlib>

#include <fmt/format.h>

#include "analysis/metrics.h"
#include "analysis/verdict.h"

namespace kp::ui {

double RunningFigures::mean_voltage_v() const {
  double span = s_.last.t_s - s_.first.t_s;
  return span > 0.0 ? s_.voltage_time_vs / span : s_.last.voltage_v;
}

namespace {

std::string Lower(std::string s) {
  for (char& c : s) c = (c == '_') ? '-' : static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return s;
}

std::vector<std::string> Words(const std::string& text) {
  std::vector<std::string> out;
  std::string cur;
  for (char c : text) {
    if (std::isspace(static_cast<unsigned char>(c)) || c == '=' || c == ':' || c == ',' || c == ';' || c == '(' ||
        c == ')' || c == '[' || c == ']' || c == '{' || c == '}' || c == '"') {
      if (!cur.empty()) out.push_back(cur);
      cur.clear();
    } else {
      cur += c;
    }
  }
  if (!cur.empty()) out.push_back(cur);
  return out;
}

// Leading number of a word ("2.75", "2.75V", "60degC"); nullopt when none.
std::optional<double> LeadingNumber(const std::string& w) {
  if (w.empty()) return std::nullopt;
  const char* b = w.c_str();
  char* e = nullptr;
  double v = std::strtod(b, &e);
  if (e == b || !std::isfinite(v)) return std::nullopt;
  return v;
}

bool IsAny(const std::string& w, std::initializer_list<const char*> names) {
  for (const char* n : names)
    if (w == n) return true;
  return false;
}

}  // namespace

DrawnLimits ScanLimits(const std::string& procedure_text, const std::vector<StepRow>& steps) {
  DrawnLimits d;
  // Comments ('#' to end of line) are skipped.
  std::string text;
  bool comment = false;
  for (char c : procedure_text) {
    if (c == '#') comment = true;
    if (c == '\n') comment = false;
    if (!comment) text += c;
  }
  std::vector<std::string> w = Words(Lower(text));
  for (size_t i = 0; i + 1 < w.size(); ++i) {
    std::optional<double>* slot = nullptr;
    if (IsAny(w[i], {"cutoff", "cutoff-v", "cutoff-voltage", "end-voltage", "end-v"})) slot = &d.cutoff_v;
    else if (IsAny(w[i], {"max-temp", "max-temp-c", "max-temperature", "temp-max", "over-temp"})) slot = &d.max_temp_c;
    else if (IsAny(w[i], {"min-voltage", "min-v", "voltage-min", "under-voltage"})) slot = &d.min_voltage_v;
    else if (IsAny(w[i], {"max-voltage", "max-v", "voltage-max", "over-voltage"})) slot = &d.max_voltage_v;
    if (slot == nullptr || slot->has_value()) continue;
    if (auto v = LeadingNumber(w[i + 1])) *slot = *v;
  }
  if (!d.cutoff_v) {
    for (const StepRow& s : steps) {
      std::vector<std::string> lw = Words(Lower(s.label));
      for (size_t i = 0; i + 1 < lw.size(); ++i) {
        if (lw[i] != "to") continue;
        const std::string& num = lw[i + 1];
        bool volts = (!num.empty() && num.back() == 'v') || (i + 2 < lw.size() && lw[i + 2] == "v");
        if (auto v = LeadingNumber(num); v && volts) {
          d.cutoff_v = *v;
          break;
        }
      }
      if (d.cutoff_v) break;
    }
  }
  return d;
}

DrawnLimits LimitsForRun(const std::string& procedure_text, const std::string& procedure_name, const std::vector<StepRow>& steps) {
  ParseOutput parsed = ParseProcedure(procedure_text, procedure_name);
  if (!parsed.ok()) return ScanLimits(procedure_text, steps);
  const Plan& p = parsed.plan;
  DrawnLimits d;
  if (p.cell.cutoff_v > 0) d.cutoff_v = p.cell.cutoff_v;
  if (p.limits.min_voltage_v > 0) d.min_voltage_v = p.limits.min_voltage_v;
  if (std::isfinite(p.limits.max_voltage_v)) d.max_voltage_v = p.limits.max_voltage_v;
  if (std::isfinite(p.limits.max_temp_c)) d.max_temp_c = p.limits.max_temp_c;
  return d;
}

std::string ListVerdict(const RunRow& run, double delivered_mah) {
  ParseOutput parsed = ParseProcedure(run.procedure_text, run.procedure_name);
  if (!parsed.ok()) return "not judged: procedure unreadable";
  DischargeConditions dc;
  dc.rated_mah = run.rated_mah;
  dc.delivered_mah = delivered_mah;
  bool other = false;  // constant power or resistance: no single current to compare
  for (const Step& st : parsed.plan.steps) {
    switch (st.kind) {
      case StepKind::kPulseTrain:
      case StepKind::kDutyCycle:
      case StepKind::kResistanceTest:
        dc.pulsed = true;
        break;
      case StepKind::kConstantCurrent:
        if (st.current_a > 0) dc.mean_current_a = std::max(dc.mean_current_a, st.current_a);
        break;
      case StepKind::kConstantPower:
      case StepKind::kConstantResistance:
        other = true;
        break;
      default:
        break;
    }
  }
  if (other && !dc.pulsed && dc.mean_current_a <= 0.0) return "not judged: constant power or resistance";
  return JudgeCapacityByMethod(MethodForChemistry(run.chemistry), dc).brief;
}

RunListRow MakeRunListRow(const RunRow& run, const RunningFigures& figures) {
  RunListRow r;
  r.id = run.id;
  r.outcome = run.outcome;
  r.state = std::string(OutcomeName(run.outcome));
  r.cell = run.cell;
  r.chemistry = run.chemistry;
  r.procedure = run.procedure_name;
  r.started_at = run.started_at;
  r.elapsed_s = figures.count() > 0 ? figures.last().t_s - figures.first_t_s() : 0.0;
  // The latest discharge as the runner kept it (schema v3), else what the record discharged.
  r.delivered_mah = run.delivered_mah.value_or(figures.discharged_mah());
  r.rated_mah = run.rated_mah;
  r.reason = run.reason;
  r.run_state = run.outcome == Outcome::kCompleted ? RunState::kCompleted
                : run.outcome == Outcome::kAborted  ? RunState::kAborted
                : run.outcome == Outcome::kInterrupted ? RunState::kInterrupted
                                                       : RunState::kRunning;
  r.record = fmt::format("{} {} {} {} {} {}", run.uuid, run.cell_serial, run.cell_lot, run.cell_part, run.operator_name, run.bench);
  for (const std::string& t : run.tags) {
    r.record += " " + t;
    if (r.slot.empty() && t.rfind("slot=", 0) == 0) r.slot = t.substr(5);
    if (r.batch.empty() && t.rfind("batch=", 0) == 0) r.batch = t.substr(6);
  }
  r.bench = run.bench.empty() ? run.rig : run.bench;
  if (run.outcome == Outcome::kAborted || run.outcome == Outcome::kInterrupted) {
    r.verdict = std::string("incomplete");  // a capacity verdict needs a discharge that reached its end
  } else if (run.outcome == Outcome::kRunning || run.rated_mah <= 0.0 || figures.count() == 0) {
    r.verdict = std::string("-");
  } else {
    r.verdict = ListVerdict(run, r.delivered_mah);
  }
  return r;
}

bool MatchesFilter(const RunListRow& row, const std::string& filter) {
  std::string hay = Lower(fmt::format("#{} {} {} {} {} {} {} {} {}", row.id, row.id, row.state, row.cell, row.chemistry,
                                      row.procedure, row.verdict, row.started_at, row.record));
  for (const std::string& word : Words(Lower(filter)))
    if (hay.find(word) == std::string::npos) return false;
  return true;
}

std::optional<double> EstimateRemainingS(const std::vector<Sample>& samples, double delivered_mah, double rated_mah,
                                         std::optional<double> cutoff_v, double window_s) {
  if (samples.empty()) return std::nullopt;
  const Sample& last = samples.back();
  std::optional<double> best;
  auto offer = [&](double s) {
    if (std::isfinite(s) && s >= 0.0 && (!best || s < *best)) best = s;
  };
  if (rated_mah > 0.0 && last.current_a > 1e-6) offer(std::max(0.0, rated_mah - delivered_mah) / (last.current_a * 1000.0) * 3600.0);
  if (cutoff_v && samples.size() >= 2) {
    // Least-squares slope of V(t) over the recent window.
    double t0 = last.t_s - window_s;
    auto it = std::lower_bound(samples.begin(), samples.end(), t0, [](const Sample& s, double t) { return s.t_s < t; });
    double n = 0, st = 0, sv = 0, stt = 0, stv = 0;
    for (; it != samples.end(); ++it) {
      double t = it->t_s - last.t_s;
      n += 1;
      st += t;
      sv += it->voltage_v;
      stt += t * t;
      stv += t * it->voltage_v;
    }
    double den = n * stt - st * st;
    if (n >= 3 && den > 0.0) {
      double slope = (n * stv - st * sv) / den;  // V per second
      if (slope < 0.0 && last.voltage_v > *cutoff_v) offer((last.voltage_v - *cutoff_v) / -slope);
      if (last.voltage_v <= *cutoff_v) offer(0.0);
    }
  }
  return best;
}

Severity EventSeverity(const EventRow& e) {
  std::string k = Lower(e.kind);
  for (const char* alarm : {"abort", "fault", "limit", "safety", "lost", "error", "interrupt"})
    if (k.find(alarm) != std::string::npos) return Severity::kAlarm;
  for (const char* notice : {"retry", "pause", "continue", "resume", "request", "warn"})
    if (k.find(notice) != std::string::npos) return Severity::kNotice;
  return Severity::kInfo;
}

const char* RunStateWord(RunState s) {
  switch (s) {
    case RunState::kRunning: return "running";
    case RunState::kPaused: return "paused";
    case RunState::kHeld: return "held";
    case RunState::kCompleted: return "completed";
    case RunState::kAborted: return "aborted";
    case RunState::kInterrupted: return "interrupted";
  }
  return "?";
}

RunStatus StatusOf(const RunRow& run, const std::vector<EventRow>& events) {
  RunStatus st;
  st.reason = run.reason;
  switch (run.outcome) {
    case Outcome::kCompleted: st.state = RunState::kCompleted; break;
    case Outcome::kAborted: st.state = RunState::kAborted; break;
    case Outcome::kInterrupted: st.state = RunState::kInterrupted; break;
    case Outcome::kRunning: {
      st.state = RunState::kRunning;
      st.reason.clear();
      for (auto it = events.rbegin(); it != events.rend(); ++it) {
        const EventRow& e = *it;
        if (e.kind == "control") {
          if (e.message.rfind("paused by", 0) == 0) {
            st.state = RunState::kPaused;
          } else if (e.message.rfind("continued by", 0) == 0) {
            break;
          } else {
            continue;  // a request the runner ignored
          }
        } else if (e.kind == "pause" || e.kind == "fault") {
          st.state = RunState::kHeld;
        } else if (e.kind == "resume") {
          break;
        } else {
          continue;
        }
        st.reason = e.message;
        st.since_s = e.t_s;
        break;
      }
      break;
    }
  }
  st.badge = RunStateWord(st.state);
  for (char& c : st.badge) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  st.load_off = st.state != RunState::kRunning;
  st.can_pause = st.state == RunState::kRunning;
  st.can_continue = st.state == RunState::kPaused;  // a hold ends by itself (cooled, instrument back)
  st.can_abort = st.state == RunState::kRunning || st.state == RunState::kPaused || st.state == RunState::kHeld;
  return st;
}

void SetListState(RunListRow& row, const RunStatus& status) {
  row.run_state = status.state;
  row.state = RunStateWord(status.state);
  row.reason = status.reason;
}

std::vector<double> GapTimes(const std::vector<EventRow>& events) {
  std::vector<double> out;
  for (const EventRow& e : events)
    if (e.kind == "gap") out.push_back(e.t_s);
  std::sort(out.begin(), out.end());
  return out;
}

std::vector<std::string> DistinctLabels(const std::vector<std::string>& names) {
  if (names.size() < 2) return names;
  std::vector<std::vector<std::string>> words;
  for (const std::string& n : names) {
    std::vector<std::string> w;
    std::istringstream in(n);
    for (std::string x; in >> x;) w.push_back(x);
    words.push_back(std::move(w));
  }
  // The shared leading words, cut back to the last one that ends in ':'.
  size_t shared = 0, head = 0;
  for (;; ++shared) {
    bool same = true;
    for (const auto& w : words) same = same && shared < w.size() && w[shared] == words[0][shared];
    if (!same) break;
    if (words[0][shared].back() == ':') head = shared + 1;
  }
  std::vector<std::string> out;
  for (size_t k = 0; k < names.size(); ++k) {
    std::string label;
    for (size_t i = head; i < words[k].size(); ++i) label += (label.empty() ? "" : " ") + words[k][i];
    out.push_back(label.empty() ? names[k] : label);
  }
  return out;
}

std::string Ellipsize(const std::string& text, float width, float (*measure)(const std::string&, void*), void* ctx) {
  if (measure(text, ctx) <= width) return text;
  static const std::string kDots = "\xE2\x80\xA6";  // U+2026
  size_t n = text.size();
  while (n > 0) {
    // Step back over one UTF-8 character (continuation bytes are 10xxxxxx).
    do --n;
    while (n > 0 && (static_cast<unsigned char>(text[n]) & 0xC0) == 0x80);
    std::string cut = text.substr(0, n);
    while (!cut.empty() && cut.back() == ' ') cut.pop_back();
    if (measure(cut + kDots, ctx) <= width) return cut + kDots;
  }
  return kDots;
}

StepNow CurrentStep(const std::vector<StepRow>& steps) {
  StepNow now;
  if (steps.empty()) return now;
  const StepRow& s = steps.back();
  now.index = s.index;
  now.kind = s.kind;
  now.label = s.label;
  now.started_s = s.started_s;
  now.ended = s.ended_s.has_value();
  now.end_reason = s.end_reason;
  return now;
}

}  // namespace kp::ui
