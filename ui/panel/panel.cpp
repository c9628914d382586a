#include "ui/panel/panel.h"

#include <GLFW/glfw3.h>

#include <algorithm>
#include <cctype>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>

#include <fmt/format.h>

#include "analysis/duration_format.h"
#include "analysis/metrics.h"
#include "procedures/procedure_parser.h"
#include "rig/safety_monitor.h"

namespace kp::ui {
namespace {

ImU32 OutcomeColour(const Theme& t, Outcome o) {
  switch (o) {
    case Outcome::kRunning: return t.ok;
    case Outcome::kCompleted: return t.idle;
    case Outcome::kAborted: return t.alarm;
    case Outcome::kInterrupted: return t.interrupted;
  }
  return t.idle;
}

ImU32 StateColour(const Theme& t, RunState s) {
  switch (s) {
    case RunState::kRunning: return t.ok;
    case RunState::kPaused:
    case RunState::kHeld: return t.caution;
    case RunState::kCompleted: return t.idle;
    case RunState::kAborted: return t.alarm;
    case RunState::kInterrupted: return t.interrupted;
  }
  return t.idle;
}

// A filled box in `fill` with the word on it, at the cursor, as tall as a line of `font`.
DrawnBadge Badge(const char* text, ImU32 fill, ImU32 ink, ImFont* font) {
  ImGui::PushFont(font);
  const ImVec2 ts = ImGui::CalcTextSize(text);
  const float pad_x = ImGui::GetFontSize() * 0.45f, pad_y = ImGui::GetFontSize() * 0.12f;
  const ImVec2 p0 = ImGui::GetCursorScreenPos();
  const ImVec2 p1 = {p0.x + ts.x + 2 * pad_x, p0.y + ts.y + 2 * pad_y};
  ImDrawList* dl = ImGui::GetWindowDrawList();
  dl->AddRectFilled(p0, p1, fill, ImGui::GetFontSize() * 0.2f);
  dl->AddText({p0.x + pad_x, p0.y + pad_y}, ink, text);
  ImGui::Dummy({p1.x - p0.x, p1.y - p0.y});
  ImGui::PopFont();
  return {p0, p1, fill, text};
}

Trace MakeTrace(const std::vector<double>* xs, const MinMaxPyramid* ys, ImU32 colour, std::string name, std::string unit,
                const std::vector<double>* xs_end = nullptr, std::optional<double> latest = std::nullopt,
                const std::vector<double>* breaks = nullptr) {
  Trace t;
  t.xs = xs;
  t.ys = ys;
  t.colour = colour;
  t.name = std::move(name);
  t.unit = std::move(unit);
  t.xs_end = xs_end;
  t.latest = latest;
  t.breaks = breaks;
  return t;
}

float MeasureText(const std::string& s, void*) { return ImGui::CalcTextSize(s.c_str()).x; }

// Text cut to the column width with "…", the whole text in a tooltip when cut.
void FittedText(const std::string& text, const std::string& tooltip = {}) {
  const float w = ImGui::GetContentRegionAvail().x;
  std::string shown = Ellipsize(text, w, MeasureText, nullptr);
  ImGui::TextUnformatted(shown.c_str());
  if ((shown != text || !tooltip.empty()) && ImGui::IsItemHovered())
    ImGui::SetTooltip("%s", tooltip.empty() ? text.c_str() : tooltip.c_str());
}

std::string Hms(double s) { return FormatHms(std::max(0.0, s)); }

bool TypingText() { return ImGui::GetIO().WantTextInput; }

bool Key(int glfw_key) { return !TypingText() && ImGui::IsKeyPressed(glfw_key, false); }

void Figure(const Fonts& f, const char* caption, const std::string& value, ImU32 colour, const std::string& note = {},
            ImU32 note_colour = 0) {
  ImGui::BeginGroup();
  ImGui::TextDisabled("%s", caption);
  ImGui::PushFont(f.big);
  ImGui::PushStyleColor(ImGuiCol_Text, colour);
  ImGui::TextUnformatted(value.c_str());
  ImGui::PopStyleColor();
  ImGui::PopFont();
  if (!note.empty()) ImGui::TextColored(ImColor(note_colour), "%s", note.c_str());
  ImGui::EndGroup();
}

}  // namespace

Panel::Panel(RunFeed& feed, PanelOptions options, Fonts fonts)
    : feed_(feed), options_(std::move(options)), fonts_(fonts), tab_(options_.tab) {
  selected_ = options_.run_id;
  compare_ = options_.compare;
  if (!options_.new_run_procedure.empty()) {
    open_start_ = true;
    std::snprintf(proc_path_, sizeof(proc_path_), "%s", options_.new_run_procedure.c_str());
    std::error_code ec;
    if (std::filesystem::is_directory(options_.new_run_procedure, ec)) browse_target_ = 1;  // pick from that folder
  }
  SetTheme(options_.dark);
}

void Panel::SetTheme(bool dark) {
  theme_ = dark ? Theme::Night() : Theme::Day();
  ApplyTheme(theme_, options_.scale);
}

void Panel::Frame() {
  // The one crossing of data per frame: take what the reader thread found.
  feed_.Drain(state_);
  if (!selected_ && !state_.runs.empty()) selected_ = state_.runs.front().id;
  std::set<int64_t> watch = compare_;
  if (selected_) watch.insert(*selected_);
  if (tab_ == Tab::kBench) {
    // The overview's tiles need each channel's latest readings, events and steps.
    std::vector<BenchGroup> groups = GroupBenches(state_.runs);
    for (const BenchGroup& g : groups)
      if (g.key == bench_key_ || (bench_key_.empty() && &g == &groups.front())) watch.insert(g.run_ids.begin(), g.run_ids.end());
  }
  feed_.Watch(watch);

  plots_.clear();
  badge_.reset();
  tiles_.clear();
  Shortcuts();
  const ImGuiViewport* vp = ImGui::GetMainViewport();
  ImGui::SetNextWindowPos(vp->WorkPos);
  ImGui::SetNextWindowSize(vp->WorkSize);
  ImGui::Begin("##kneepoint-panel", nullptr,
               ImGuiWindowFlags_NoDecoration | ImGuiWindowFlags_NoMove | ImGuiWindowFlags_NoBringToFrontOnFocus |
                   ImGuiWindowFlags_NoSavedSettings);
  TopBar();
  float side_w = std::min(ImGui::GetContentRegionAvail().x * 0.38f, ImGui::GetFontSize() * 38.0f);
  ImGui::BeginChild("runs", {side_w, 0}, false);
  RunsList();
  ImGui::EndChild();
  ImGui::SameLine();
  ImGui::BeginChild("main", {0, 0}, false);
  if (tab_ == Tab::kLive)
    LiveView();
  else if (tab_ == Tab::kCompare)
    CompareView();
  else
    BenchView();
  ImGui::EndChild();
  StartDialog();
  AbortDialog();
  ImGui::End();
}

void Panel::Shortcuts() {
  ImGuiIO& io = ImGui::GetIO();
  if (io.KeyCtrl && ImGui::IsKeyPressed(GLFW_KEY_F, false)) focus_filter_ = true;
  if (io.KeyCtrl && ImGui::IsKeyPressed(GLFW_KEY_N, false)) open_start_ = true;
  if (io.KeyCtrl) return;
  if (Key(GLFW_KEY_1) || Key(GLFW_KEY_F1)) tab_ = Tab::kLive;
  if (Key(GLFW_KEY_2) || Key(GLFW_KEY_F2)) tab_ = Tab::kCompare;
  if (Key(GLFW_KEY_3) || Key(GLFW_KEY_F3)) tab_ = Tab::kBench;
  if (Key(GLFW_KEY_T)) SetTheme(!theme_.dark);
  if (Key(GLFW_KEY_F)) {
    live_x_.follow = true;
    if (!live_x_.range.Empty()) live_x_.span = live_x_.range.Span();
  }
  if (Key(GLFW_KEY_HOME)) live_x_ = XView{};
  if (Key(GLFW_KEY_UP) || Key(GLFW_KEY_DOWN)) {
    // Move the selection through the (filtered) runs list.
    std::vector<int64_t> ids;
    for (const RunListRow& r : state_.runs)
      if (MatchesFilter(r, filter_)) ids.push_back(r.id);
    auto it = selected_ ? std::find(ids.begin(), ids.end(), *selected_) : ids.end();
    if (!ids.empty()) {
      if (it == ids.end()) selected_ = ids.front();
      else if (ImGui::IsKeyPressed(GLFW_KEY_UP) && it != ids.begin()) selected_ = *(it - 1);
      else if (ImGui::IsKeyPressed(GLFW_KEY_DOWN) && it + 1 != ids.end()) selected_ = *(it + 1);
      live_x_ = XView{};
    }
  }
  if (selected_ && state_.watched.count(*selected_)) {
    const RunData& d = state_.watched.at(*selected_);
    const RunStatus st = StatusOf(d.row, d.events);
    if (st.can_pause && Key(GLFW_KEY_P)) feed_.Request(*selected_, "pause");
    if (st.can_continue && Key(GLFW_KEY_C)) feed_.Request(*selected_, "continue");
    if (st.can_abort && Key(GLFW_KEY_A)) open_abort_ = true;
  }
}

void Panel::TopBar() {
  ImGui::PushFont(fonts_.medium);
  ImGui::TextUnformatted("KNEEPOINT");
  ImGui::PopFont();
  ImGui::SameLine();
  ImGui::TextDisabled("bench panel  ·  %s%s", state_.db_path.c_str(), state_.connected ? "" : "  (not connected)");
  ImGui::SameLine();
  float right = ImGui::GetWindowContentRegionMax().x;
  float bw = ImGui::GetFontSize() * 7.5f;
  ImGui::SetCursorPosX(right - bw * 5.2f);
  if (ImGui::Selectable("Live  [1]", tab_ == Tab::kLive, 0, {bw, 0})) tab_ = Tab::kLive;
  ImGui::SameLine();
  if (ImGui::Selectable("Compare  [2]", tab_ == Tab::kCompare, 0, {bw, 0})) tab_ = Tab::kCompare;
  ImGui::SameLine();
  if (ImGui::Selectable("Bench  [3]", tab_ == Tab::kBench, 0, {bw, 0})) tab_ = Tab::kBench;
  ImGui::SameLine();
  if (ImGui::Button("New run…  Ctrl+N", {bw * 1.1f, 0})) open_start_ = true;
  ImGui::SameLine();
  if (ImGui::Button(theme_.dark ? "Day  [T]" : "Night  [T]", {bw * 0.8f, 0})) SetTheme(!theme_.dark);
  if (!state_.notes.empty()) {
    ImGui::TextColored(ImColor(theme_.caution), "%s", state_.notes.back().c_str());
  }
  ImGui::Separator();
}

void Panel::RunsList() {
  ImGui::PushFont(fonts_.medium);
  ImGui::TextUnformatted("Runs");
  ImGui::PopFont();
  ImGui::SameLine();
  if (focus_filter_) {
    ImGui::SetKeyboardFocusHere();
    focus_filter_ = false;
  }
  ImGui::SetNextItemWidth(-1);
  ImGui::InputTextWithHint("##filter", "filter: cell, serial, lot, tag, operator, state, pass…  (Ctrl+F)", filter_, sizeof(filter_));
  // Short columns fit their widest entry (and their header); cell and
  // procedure share what is left, cut with "…" and shown whole on hover.
  ImGuiTableFlags flags = ImGuiTableFlags_RowBg | ImGuiTableFlags_ScrollY | ImGuiTableFlags_BordersInnerV |
                          ImGuiTableFlags_SizingFixedFit | ImGuiTableFlags_Resizable;
  bool cmp = tab_ == Tab::kCompare;
  if (!ImGui::BeginTable("runs_table", cmp ? 8 : 7, flags)) return;
  ImGui::TableSetupScrollFreeze(0, 1);
  if (cmp) ImGui::TableSetupColumn("cmp", ImGuiTableColumnFlags_WidthFixed);
  ImGui::TableSetupColumn("#", ImGuiTableColumnFlags_WidthFixed);
  ImGui::TableSetupColumn("state", ImGuiTableColumnFlags_WidthFixed);
  ImGui::TableSetupColumn("cell", ImGuiTableColumnFlags_WidthStretch, 1.0f);
  ImGui::TableSetupColumn("procedure", ImGuiTableColumnFlags_WidthStretch, 1.3f);
  ImGui::TableSetupColumn("elapsed", ImGuiTableColumnFlags_WidthFixed);
  ImGui::TableSetupColumn("mAh", ImGuiTableColumnFlags_WidthFixed);
  ImGui::TableSetupColumn("verdict", ImGuiTableColumnFlags_WidthFixed);
  ImGui::TableHeadersRow();
  for (const RunListRow& r : state_.runs) {
    if (!MatchesFilter(r, filter_)) continue;
    ImGui::PushID(static_cast<int>(r.id));
    ImGui::TableNextRow();
    int col = 0;
    if (cmp) {
      ImGui::TableSetColumnIndex(col++);
      bool on = compare_.count(r.id) > 0;
      if (ImGui::Checkbox("##cmp", &on)) {
        if (on) compare_.insert(r.id);
        else compare_.erase(r.id);
      }
    }
    ImGui::TableSetColumnIndex(col++);
    bool is_sel = selected_ && *selected_ == r.id;
    if (ImGui::Selectable(fmt::format("{}", r.id).c_str(), is_sel,
                          ImGuiSelectableFlags_SpanAllColumns | ImGuiSelectableFlags_AllowItemOverlap)) {
      if (!is_sel) live_x_ = XView{};
      selected_ = r.id;
      if (!cmp) tab_ = Tab::kLive;
    }
    if (ImGui::IsItemHovered()) {
      std::string tip = fmt::format("run {}  ·  {}\ncell {} ({}, {:.0f} mAh rated)\n{}\nstarted {}", r.id, r.state, r.cell,
                                    r.chemistry, r.rated_mah, r.procedure, r.started_at);
      if (!r.reason.empty()) tip += "\n" + r.reason;
      if (!r.verdict.empty() && r.verdict != "-") tip += "\nverdict: " + r.verdict;
      ImGui::SetTooltip("%s", tip.c_str());
    }
    ImGui::TableSetColumnIndex(col++);
    ImGui::TextColored(ImColor(StateColour(theme_, r.run_state)), "%s", r.state.c_str());
    ImGui::TableSetColumnIndex(col++);
    FittedText(r.cell);
    ImGui::TableSetColumnIndex(col++);
    FittedText(r.procedure);
    ImGui::TableSetColumnIndex(col++);
    ImGui::TextUnformatted(Hms(r.elapsed_s).c_str());
    ImGui::TableSetColumnIndex(col++);
    ImGui::Text("%.0f", r.delivered_mah);
    ImGui::TableSetColumnIndex(col++);
    ImU32 vc = r.verdict.rfind("PASS", 0) == 0 ? theme_.ok : r.verdict.rfind("FAIL", 0) == 0 ? theme_.alarm : theme_.tick_text;
    // "not judged: pulsed discharge" is too wide for the column: the reason goes in the tooltip.
    const bool not_judged = r.verdict.rfind("not judged", 0) == 0;
    ImGui::TextColored(ImColor(vc), "%s", not_judged ? "not judged" : r.verdict.c_str());
    if (ImGui::IsItemHovered()) ImGui::SetTooltip("%s", r.verdict.c_str());
    ImGui::PopID();
  }
  ImGui::EndTable();
}

void Panel::Headline(const RunData& d, const RunStatus& status) {
  const RunningFigures& f = d.figures;
  const Sample& s = f.last();
  const bool live = status.state == RunState::kRunning;
  const bool ended = d.row.outcome != Outcome::kRunning;
  // State badge, then why (paused by whom, what held it, how it ended).
  badge_ = Badge(status.badge.c_str(), StateColour(theme_, status.state), theme_.badge_text, fonts_.medium);
  ImGui::SameLine();
  ImGui::PushFont(fonts_.medium);
  ImGui::Text("run %lld", static_cast<long long>(d.row.id));
  ImGui::PopFont();
  if (!status.reason.empty()) {
    ImGui::SameLine();
    std::string why = status.reason;
    if (status.state == RunState::kPaused || status.state == RunState::kHeld) why += fmt::format("  (at {})", Hms(status.since_s));
    ImU32 c = status.state == RunState::kAborted ? theme_.alarm : status.state == RunState::kRunning ? theme_.tick_text
                                                                                                      : StateColour(theme_, status.state);
    ImGui::PushStyleColor(ImGuiCol_Text, c);
    ImGui::TextWrapped("%s", why.c_str());
    ImGui::PopStyleColor();
  }
  ImGui::TextWrapped("cell %s (%s, %.0f mAh rated)  ·  %s  ·  rig %s", d.row.cell.c_str(), d.row.chemistry.c_str(),
                     d.row.rated_mah, d.row.procedure_name.c_str(), d.row.rig.c_str());
  if (f.count() == 0) {
    ImGui::TextDisabled("no samples yet");
    return;
  }
  // Voltage colour says how close the cell is to its cutoff.
  ImU32 vcol = theme_.voltage;
  if (live && d.limits.cutoff_v) {
    double margin = s.voltage_v - *d.limits.cutoff_v;
    vcol = margin <= 0.0 ? theme_.alarm : margin < 0.15 ? theme_.caution : theme_.voltage;
  }
  ImU32 tcol = theme_.temperature;
  if (!ended && d.limits.max_temp_c && s.temperature_c > *d.limits.max_temp_c - 5.0) tcol = theme_.alarm;
  // After the run ended the figures are its last reading, not live values.
  if (ended) {
    vcol = theme_.Dimmed(vcol);
    tcol = theme_.Dimmed(tcol);
  }
  const float gap = ImGui::GetFontSize() * 2.0f;
  const char* last = ended ? "  (last reading)" : "";
  // Figures side by side while they fit, the next on a new line otherwise: none is cut at the edge.
  auto next_figure = [&](const std::string& value) {
    ImGui::PushFont(fonts_.big);
    const float w = ImGui::CalcTextSize(value.c_str()).x;
    ImGui::PopFont();
    const float right = ImGui::GetItemRectMax().x + gap + w;
    if (right <= ImGui::GetWindowPos().x + ImGui::GetWindowContentRegionMax().x) ImGui::SameLine(0, gap);
  };
  Figure(fonts_, fmt::format("voltage{}", last).c_str(), fmt::format("{:.3f} V", s.voltage_v), vcol);
  next_figure(status.load_off ? "load off" : fmt::format("{:.3f} A", s.current_a));
  if (status.load_off) {
    // The last current drawn while the load was on, dimmed under "load off".
    std::string note;
    for (auto it = d.tail.rbegin(); it != d.tail.rend(); ++it)
      if (std::fabs(it->current_a) > 0.001) {
        note = fmt::format("last on load: {:.3f} A at {}", it->current_a, Hms(it->t_s));
        break;
      }
    Figure(fonts_, "current", "load off", theme_.tick_text, note, theme_.Dimmed(theme_.current));
  }
  else
    Figure(fonts_, "current", fmt::format("{:.3f} A", s.current_a), theme_.current);
  const std::string temp = fmt::format("{:.1f} °C", s.temperature_c), delivered = fmt::format("{:.0f} mAh", f.discharged_mah());
  next_figure(temp);
  Figure(fonts_, fmt::format("temperature{}", last).c_str(), temp, tcol);
  next_figure(delivered);
  Figure(fonts_, "delivered", delivered, theme_.tick_text);
  std::string remaining = "—";
  if (live) {
    if (auto r = EstimateRemainingS(d.tail, f.discharged_since_charge_mah(), d.row.rated_mah, d.limits.cutoff_v))
      remaining = "~" + Hms(*r);
  }
  ImGui::PushFont(fonts_.medium);
  ImGui::Text("%.2f Wh", f.discharged_wh());
  if (f.charged_mah() >= 1.0) {
    ImGui::SameLine(0, gap);
    ImGui::TextDisabled("charged in");
    ImGui::SameLine();
    ImGui::Text("%.0f mAh", f.charged_mah());
  }
  ImGui::SameLine(0, gap);
  ImGui::TextDisabled("elapsed");
  ImGui::SameLine();
  ImGui::TextUnformatted(Hms(s.t_s - f.first_t_s()).c_str());
  if (live) {
    ImGui::SameLine(0, gap);
    ImGui::TextDisabled("est. remaining");
    ImGui::SameLine();
    ImGui::TextUnformatted(remaining.c_str());
  }
  ImGui::PopFont();

  StepNow step = CurrentStep(d.steps);
  if (step.index >= 0) {
    std::string text = fmt::format("step {}  [{}]  {}", step.index + 1, step.kind, step.label);
    if (step.ended)
      text += fmt::format("  · ended at {}: {}", Hms(s.t_s), step.end_reason);
    else if (status.state == RunState::kPaused || status.state == RunState::kHeld)
      text += fmt::format("  · {} at {}; its clock stands still meanwhile", RunStateWord(status.state), Hms(status.since_s));
    else
      text += fmt::format("  · running for {}", Hms(s.t_s - step.started_s));
    FittedText(text);
  }
  std::string lim;
  if (d.limits.cutoff_v) lim += fmt::format("cutoff {:.3f} V   ", *d.limits.cutoff_v);
  if (d.limits.min_voltage_v) lim += fmt::format("min {:.2f} V   ", *d.limits.min_voltage_v);
  if (d.limits.max_voltage_v) lim += fmt::format("max {:.2f} V   ", *d.limits.max_voltage_v);
  if (d.limits.max_temp_c) lim += fmt::format("max temp {:.0f} °C", *d.limits.max_temp_c);
  if (!lim.empty()) {
    ImGui::TextDisabled("limits: %s", lim.c_str());
  }
}

// A note for the selected run (live or finished), stored as a timestamped
// `note` event through the feed's worker, like `kneepoint note`.
void Panel::NoteField(const RunData& d) {
  ImGui::SetNextItemWidth(ImGui::GetFontSize() * 28);
  const bool enter = ImGui::InputTextWithHint("##run-note", "note for this run (serial checked, probe re-taped…)", run_note_,
                                              sizeof(run_note_), ImGuiInputTextFlags_EnterReturnsTrue);
  ImGui::SameLine();
  const bool click = ImGui::Button("Add note");
  std::string text = run_note_;
  if ((enter || click) && text.find_first_not_of(" \t") != std::string::npos) {
    feed_.AddNote(d.row.id, text);
    run_note_[0] = '\0';
  }
}

void Panel::ControlButtons(const RunData& d, const RunStatus& status) {
  if (!status.can_abort) return;  // the run has ended: nothing to act on
  // Only the actions that apply: pause a running run, continue a paused one;
  // a hold (heat, lost instrument) ends by itself, abort ends any of them.
  if (status.can_pause) {
    if (ImGui::Button("Pause  [P]")) feed_.Request(d.row.id, "pause");
    ImGui::SameLine();
  }
  if (status.can_continue) {
    if (ImGui::Button("Continue  [C]")) feed_.Request(d.row.id, "continue");
    ImGui::SameLine();
  }
  ImGui::PushStyleColor(ImGuiCol_Button, ImColor(theme_.alarm).Value);
  ImGui::PushStyleColor(ImGuiCol_Text, ImColor(theme_.badge_text).Value);
  if (ImGui::Button("Abort…  [A]")) open_abort_ = true;
  ImGui::PopStyleColor(2);
  ImGui::SameLine();
  if (!d.requests.empty()) {
    std::string waiting;
    for (const RequestRow& r : d.requests) waiting += (waiting.empty() ? "" : ", ") + r.action;
    ImGui::TextColored(ImColor(theme_.caution), "sent, waiting for the runner: %s", waiting.c_str());
  } else if (status.state == RunState::kHeld) {
    ImGui::TextDisabled("held by the runner: it continues by itself when the cause clears");
  } else {
    ImGui::TextDisabled("requests go through the database; the runner acts on them even if this panel closes");
  }
}

void Panel::CycleTable(const RunData& d) {
  const Range whole = d.DataX();
  if (whole.Empty()) return;
  std::vector<CycleRow> rows = CycleRows(d.overview, d.steps, whole.hi);
  if (rows.empty()) return;
  ImGui::PushFont(fonts_.medium);
  ImGui::TextUnformatted("Cycles");
  ImGui::PopFont();
  ImGui::SameLine();
  ImGui::TextDisabled("(from the step records; the report gives them to the sample)");
  const float h = ImGui::GetTextLineHeightWithSpacing() * static_cast<float>(std::min<size_t>(rows.size(), 6) + 1.5f);
  if (!ImGui::BeginTable("cycles", 6, ImGuiTableFlags_RowBg | ImGuiTableFlags_BordersInner | ImGuiTableFlags_ScrollY, {0, h}))
    return;
  for (const char* c : {"cycle", "charged mAh", "discharged mAh", "coulombic", "retention", "capacity"}) ImGui::TableSetupColumn(c);
  ImGui::TableHeadersRow();
  double most = 0;
  for (const CycleRow& r : rows) most = std::max(most, r.discharged_mah);
  for (const CycleRow& r : rows) {
    ImGui::TableNextRow();
    ImGui::TableSetColumnIndex(0);
    ImGui::Text("%d", r.cycle);
    ImGui::TableSetColumnIndex(1);
    ImGui::Text("%.1f", r.charged_mah);
    ImGui::TableSetColumnIndex(2);
    ImGui::Text("%.1f", r.discharged_mah);
    ImGui::TableSetColumnIndex(3);
    if (r.coulombic) ImGui::Text("%.1f %%", *r.coulombic * 100.0); else ImGui::TextDisabled("-");
    ImGui::TableSetColumnIndex(4);
    if (r.retention) ImGui::Text("%.1f %%", *r.retention * 100.0); else ImGui::TextDisabled("-");
    ImGui::TableSetColumnIndex(5);
    // Capacity versus cycle, as a bar against the largest cycle.
    ImGui::PushStyleColor(ImGuiCol_PlotHistogram, ImColor(theme_.current).Value);
    ImGui::ProgressBar(most > 0 ? static_cast<float>(r.discharged_mah / most) : 0.0f, {-1, 0}, "");
    ImGui::PopStyleColor();
  }
  ImGui::EndTable();
}

void Panel::EventLog(const RunData& d) {
  ImGui::PushFont(fonts_.medium);
  ImGui::TextUnformatted("Events");
  ImGui::PopFont();
  if (!ImGui::BeginTable("events", 3, ImGuiTableFlags_ScrollY | ImGuiTableFlags_RowBg | ImGuiTableFlags_SizingStretchProp))
    return;
  ImGui::TableSetupColumn("t", 0, 1.0f);
  ImGui::TableSetupColumn("kind", 0, 1.0f);
  ImGui::TableSetupColumn("message", 0, 6.0f);
  // Newest first: alarms must be seen without scrolling.
  for (auto it = d.events.rbegin(); it != d.events.rend(); ++it) {
    ImGui::TableNextRow();
    Severity sev = EventSeverity(*it);
    if (sev == Severity::kAlarm) ImGui::TableSetBgColor(ImGuiTableBgTarget_RowBg0, theme_.alarm_row);
    if (sev == Severity::kNotice) ImGui::TableSetBgColor(ImGuiTableBgTarget_RowBg0, theme_.notice_row);
    ImGui::TableSetColumnIndex(0);
    ImGui::TextUnformatted(Hms(it->t_s).c_str());
    ImGui::TableSetColumnIndex(1);
    if (sev == Severity::kAlarm) ImGui::PushFont(fonts_.medium);
    ImGui::TextUnformatted(it->kind.c_str());
    if (sev == Severity::kAlarm) ImGui::PopFont();
    ImGui::TableSetColumnIndex(2);
    ImGui::TextWrapped("%s", it->message.c_str());
  }
  ImGui::EndTable();
}

PlotResult Panel::Plot(const char* id, const char* name, const PlotSpec& spec, XView& view, ImVec2 size) {
  DrawnPlot p;
  p.name = name;
  p.result = DrawPlot(id, spec, view, size, theme_);
  for (const Trace& t : spec.traces) p.trace_colours.push_back(t.colour);
  plots_.push_back(p);
  return p.result;
}

void Panel::LiveView() {
  if (!selected_) {
    ImGui::TextDisabled(state_.connected ? "No runs in this database yet. Start one with Ctrl+N." : "Opening the database…");
    return;
  }
  auto it = state_.watched.find(*selected_);
  if (it == state_.watched.end()) {
    ImGui::TextDisabled("loading run %lld…", static_cast<long long>(*selected_));
    return;
  }
  const RunData& d = it->second;
  if (d.BacklogSize() > 0) {
    ImGui::TextColored(ImColor(theme_.caution), "loading run %lld: %zu samples shown, %zu blocks of %lld to go…",
                       static_cast<long long>(d.row.id), d.SampleCount(), d.BacklogSize(),
                       static_cast<long long>(kSamplesPerBlock));
  }
  const RunStatus status = StatusOf(d.row, d.events);
  Headline(d, status);
  ControlButtons(d, status);
  NoteField(d);

  Range data_x = d.DataX();
  // Raw samples when the view shows fewer block summaries than pixels,
  // the overview otherwise (see UseRaw).
  const bool raw = UseRaw(d, ResolveX(live_x_, data_x), ImGui::GetContentRegionAvail().x);
  const std::vector<double>* xs = raw ? &d.window.t_s : &d.overview.t_s;
  const std::vector<double>* xs_end = raw ? nullptr : &d.overview.t_end_s;
  // Traces stop only where readings were missing (gap events); sparse
  // logging (a rest logged on change) is joined up as the line it is.
  const std::vector<double> breaks = GapTimes(d.events);
  const RunningFigures& f = d.figures;
  std::optional<double> last_v, last_i, last_c;
  if (f.count() > 0) {
    last_v = f.last().voltage_v;
    last_i = f.last().current_a;
    last_c = f.last().temperature_c;
  }
  float avail_h = ImGui::GetContentRegionAvail().y;
  PlotSpec vspec;
  vspec.data_x = data_x;
  vspec.x_label = "time";
  vspec.traces.push_back(
      MakeTrace(xs, raw ? &d.window.voltage : &d.overview.voltage, theme_.voltage, "voltage", "V", xs_end, last_v, &breaks));
  if (d.limits.cutoff_v) vspec.lines.push_back({*d.limits.cutoff_v, theme_.cutoff, "cutoff", 0, false, true});
  if (d.limits.min_voltage_v) vspec.lines.push_back({*d.limits.min_voltage_v, theme_.limit, "safety min", 0, true, true});
  if (d.limits.max_voltage_v) vspec.lines.push_back({*d.limits.max_voltage_v, theme_.limit, "safety max", 0, true, true});
  const float strip_min = ImGui::GetFontSize() * 7.0f;  // a strip keeps room for its ticks and a readable trace
  voltage_plot_ = Plot("##voltage", "voltage", vspec, live_x_, {0, std::max(avail_h * 0.40f, strip_min * 1.6f)});

  // Current and temperature each on their own strip and axis, sharing the x view.
  PlotSpec ispec;
  ispec.data_x = data_x;
  ispec.x_label = "time";
  ispec.traces.push_back(
      MakeTrace(xs, raw ? &d.window.current : &d.overview.current, theme_.current, "current", "A", xs_end, last_i, &breaks));
  if (status.load_off) ispec.traces.back().legend_note = "load off";
  Plot("##current", "current", ispec, live_x_, {0, std::max(avail_h * 0.18f, strip_min)});

  PlotSpec tspec;
  tspec.data_x = data_x;
  tspec.x_label = "time";
  tspec.min_y_span[0] = 1.0f;  // ±1 °C at least: sensor noise is not drawn as a swing
  tspec.traces.push_back(MakeTrace(xs, raw ? &d.window.temperature : &d.overview.temperature, theme_.temperature, "temperature",
                                   "°C", xs_end, last_c, &breaks));
  // The limit is drawn where it falls, but does not squash the strip to reach it.
  if (d.limits.max_temp_c) tspec.lines.push_back({*d.limits.max_temp_c, theme_.limit, "max temp", 0, true, false});
  Plot("##temperature", "temperature", tspec, live_x_, {0, std::max(avail_h * 0.17f, strip_min)});
  ImGui::TextDisabled("wheel: zoom · drag: pan · double-click/Home: whole run · F: follow newest (%s)",
                      live_x_.follow ? "on" : "off");
  CycleTable(d);
  EventLog(d);
}

bool Panel::UseRaw(const RunData& d, Range x, float width_px) {
  const Range data = d.DataX();
  if (data.Empty() || d.overview.size() == 0) return false;
  const double lo = std::max(x.lo, data.lo), hi = std::min(x.hi, data.hi);
  IndexRange ir = VisibleIndices(d.overview.t_s, lo, hi);
  const size_t blocks = ir.last - ir.first;
  // Enough block summaries for every pixel column: the overview is exact to the pixel.
  if (static_cast<float>(blocks) >= std::max(width_px, 1.0f)) return false;
  if (d.window.Covers(lo, hi)) return true;
  // Ask once for the raw samples of the blocks in view and as many again
  // around them (for panning), from the last sample of the block before, so
  // the window's charge continues the overview's.
  const size_t pad = blocks / 2 + 1;
  const size_t b0 = ir.first > pad ? ir.first - pad : 0;
  const size_t b1 = std::min(d.overview.size(), ir.last + pad);
  const int64_t first = std::max<int64_t>(0, static_cast<int64_t>(b0) * kSamplesPerBlock - 1);
  const int64_t end = static_cast<int64_t>(b1) * kSamplesPerBlock;
  auto key = std::make_pair(first, end);
  auto asked = asked_windows_.find(d.row.id);
  if (asked == asked_windows_.end() || asked->second != key) {
    asked_windows_[d.row.id] = key;
    feed_.FetchWindow(d.row.id, first, end);
  }
  return false;
}

void Panel::CompareView() {
  std::vector<const RunData*> runs;
  for (int64_t id : compare_)
    if (auto it = state_.watched.find(id); it != state_.watched.end()) runs.push_back(&it->second);
  if (runs.empty()) {
    ImGui::TextDisabled("Tick runs in the 'cmp' column to overlay them here.");
    return;
  }
  // A new set of runs: fit the views to it again.
  if (compare_ != cmp_shown_) {
    cmp_shown_ = compare_;
    cmp_time_x_ = cmp_charge_x_ = cmp_cycle_x_ = XView{};
  }
  // Each run is shown by its latest discharge (step records), aligned on the
  // discharge's start: charge and time count from there, so a charge before it
  // or a rest after it is not in the curves or the figures.
  std::vector<DischargeOverlay> overlays;
  std::vector<std::optional<DischargeSpan>> spans;
  overlays.reserve(runs.size());
  bool cycling = false;
  for (const RunData* d : runs) {
    const Range whole = d->DataX();
    spans.push_back(whole.Empty() ? std::nullopt : LatestDischarge(d->steps, whole.hi));
    overlays.push_back(spans.back() ? OverlayOfDischarge(*d, *spans.back()) : DischargeOverlay{});
    if (!whole.Empty() && CycleRows(d->overview, d->steps, whole.hi).size() >= 2) cycling = true;
  }
  const float line = ImGui::GetTextLineHeightWithSpacing();
  const float avail_h = ImGui::GetContentRegionAvail().y;
  const float table_h = line * (static_cast<float>(runs.size()) + 1.6f) + ImGui::GetStyle().CellPadding.y * 2.0f * (runs.size() + 1);
  const float title_h = ImGui::GetFontSize() * 2.0f;
  // The overlays take what the table and the cycle plot leave: no empty space below.
  const float cycle_h = cycling ? std::max(avail_h * 0.26f, ImGui::GetFontSize() * 10.0f) : 0.0f;
  const float plots_h = std::max(ImGui::GetFontSize() * 12.0f, avail_h - table_h - title_h - cycle_h - line * (cycling ? 2.5f : 1.0f));
  const float half_w = ImGui::GetContentRegionAvail().x * 0.5f - ImGui::GetStyle().ItemSpacing.x;
  PlotSpec by_q, by_t;
  by_q.time_x = false;
  by_q.x_label = "charge delivered in the discharge (mAh)";
  by_q.y_label[0] = "voltage (V)";
  by_t.x_label = "time from the discharge start";
  by_t.y_label[0] = "voltage (V)";
  // Curves named by what differs between the runs' procedures (their current,
  // their kind); the table below gives cell and procedure in full.
  std::vector<std::string> procedures;
  for (const RunData* d : runs) procedures.push_back(d->row.procedure_name);
  const std::vector<std::string> labels = DistinctLabels(procedures);
  by_q.legend_values = by_t.legend_values = false;
  for (size_t r = 0; r < runs.size(); ++r) {
    const RunData* d = runs[r];
    const DischargeOverlay& o = overlays[r];
    ImU32 c = theme_.Series(static_cast<int>(r));
    std::string name = fmt::format("#{} {}", d->row.id, Ellipsize(labels[r], half_w * 0.55f, MeasureText, nullptr));
    if (o.t_s.empty()) continue;
    by_q.traces.push_back(MakeTrace(&o.charge_mah, &o.voltage, c, name, "V"));
    by_t.traces.push_back(MakeTrace(&o.t_s, &o.voltage, c, name, "V", o.raw ? nullptr : &o.t_end_s));
    by_t.data_x.Include(0.0);
    by_t.data_x.Include(o.t_end_s.back());
    by_q.data_x.Include(0.0);
    by_q.data_x.Include(o.charge_mah.back());
  }
  Plot("##cmp_q", "compare by charge", by_q, cmp_charge_x_, {half_w, plots_h});
  ImGui::SameLine();
  Plot("##cmp_t", "compare by time", by_t, cmp_time_x_, {0, plots_h});

  ImGui::PushFont(fonts_.medium);
  ImGui::TextUnformatted("Figures of the latest discharge");
  ImGui::PopFont();
  ImGui::SameLine();
  ImGui::TextDisabled("(from its start to its end: a charge or rest around it is not counted)");
  if (ImGui::BeginTable("cmp_figs", 10,
                        ImGuiTableFlags_RowBg | ImGuiTableFlags_BordersInner | ImGuiTableFlags_ScrollY | ImGuiTableFlags_SizingStretchProp,
                        {0, table_h})) {
    for (const char* h : {"run", "cell", "procedure", "state", "mAh", "Wh", "mean V", "min V", "duration", "of rated"})
      ImGui::TableSetupColumn(h);
    ImGui::TableHeadersRow();
    for (size_t r = 0; r < runs.size(); ++r) {
      const RunData* d = runs[r];
      const RunningFigures& f = d->figures;
      const DischargeOverlay& o = overlays[r];
      // The runner keeps the latest discharge on the runs row (schema v3);
      // older runs fall back to what the record discharged.
      const double mah = d->row.delivered_mah.value_or(f.discharged_mah());
      const double wh = d->row.delivered_wh.value_or(f.discharged_wh());
      const RunStatus st = StatusOf(d->row, d->events);
      ImGui::TableNextRow();
      ImGui::TableSetColumnIndex(0);
      ImGui::TextColored(ImColor(theme_.Series(static_cast<int>(r))), "■ %lld", static_cast<long long>(d->row.id));
      ImGui::TableSetColumnIndex(1);
      FittedText(d->row.cell);
      ImGui::TableSetColumnIndex(2);
      FittedText(d->row.procedure_name);
      ImGui::TableSetColumnIndex(3);
      ImGui::TextColored(ImColor(StateColour(theme_, st.state)), "%s", RunStateWord(st.state));
      ImGui::TableSetColumnIndex(4);
      ImGui::Text("%.0f", mah);
      ImGui::TableSetColumnIndex(5);
      ImGui::Text("%.3f", wh);
      ImGui::TableSetColumnIndex(6);
      if (o.mean_voltage_v)
        ImGui::Text("%.3f", *o.mean_voltage_v);
      else
        ImGui::TextDisabled("-");
      ImGui::TableSetColumnIndex(7);
      float vmin = 0, vmax = 0;
      if (o.voltage.Query(0, o.voltage.size(), &vmin, &vmax))
        ImGui::Text("%.3f", vmin);
      else
        ImGui::TextDisabled("-");
      ImGui::TableSetColumnIndex(8);
      ImGui::TextUnformatted(Hms(spans[r] ? o.duration_s : 0.0).c_str());
      ImGui::TableSetColumnIndex(9);
      if (d->row.rated_mah > 0)
        ImGui::Text("%.1f %%", PercentOfRated(mah, d->row.rated_mah));
      else
        ImGui::TextDisabled("-");
    }
    ImGui::EndTable();
  }
  if (cycling) CycleCapacityPlot(runs, labels, ImGui::GetContentRegionAvail().y);
}

void Panel::CycleCapacityPlot(const std::vector<const RunData*>& runs, const std::vector<std::string>& labels, float height) {
  ImGui::PushFont(fonts_.medium);
  ImGui::TextUnformatted("Capacity per cycle");
  ImGui::PopFont();
  ImGui::SameLine();
  ImGui::TextDisabled("(discharged mAh of each cycle, from the step records)");
  // One series per cycling run: x = cycle number, y = what its discharge delivered.
  std::vector<std::vector<double>> xs(runs.size());
  std::vector<MinMaxPyramid> ys(runs.size());
  PlotSpec spec;
  spec.time_x = false;
  spec.integer_x = true;
  spec.x_label = "cycle";
  spec.min_y_span[0] = 10.0f;
  for (size_t r = 0; r < runs.size(); ++r) {
    const RunData* d = runs[r];
    const Range whole = d->DataX();
    if (whole.Empty()) continue;
    std::vector<float> v;
    for (const CycleRow& c : CycleRows(d->overview, d->steps, whole.hi)) {
      xs[r].push_back(c.cycle);
      v.push_back(static_cast<float>(c.discharged_mah));
    }
    if (v.size() < 2) continue;
    ys[r].Append(v.data(), v.size());
    spec.data_x.Include(xs[r].front() - 0.5);
    spec.data_x.Include(xs[r].back() + 0.5);
    spec.traces.push_back(MakeTrace(&xs[r], &ys[r], theme_.Series(static_cast<int>(r)), fmt::format("#{} {}", d->row.id, labels[r]), "mAh"));
  }
  spec.markers = true;
  spec.legend_room = 0.12f * static_cast<float>(spec.traces.size());  // the legend sits above the points
  Plot("##cmp_cycles", "capacity per cycle", spec, cmp_cycle_x_, {0, std::max(height - ImGui::GetFontSize() * 2.0f, 80.0f)});
}

void Panel::StartDialog() {
  if (open_start_) {
    ImGui::OpenPopup("Start a run");
    open_start_ = false;
    start_message_.clear();
  }
  ImVec2 center = ImGui::GetMainViewport()->GetCenter();
  ImGui::SetNextWindowPos(center, ImGuiCond_Appearing, {0.5f, 0.5f});
  ImGui::SetNextWindowSize({ImGui::GetFontSize() * 50, std::min(ImGui::GetFontSize() * 46, ImGui::GetMainViewport()->WorkSize.y * 0.95f)},
                           ImGuiCond_Appearing);
  if (!ImGui::BeginPopupModal("Start a run", nullptr)) return;
  ImGui::InputText("##proc", proc_path_, sizeof(proc_path_));
  ImGui::SameLine();
  if (ImGui::SmallButton("browse##p")) browse_target_ = browse_target_ == 1 ? 0 : 1;
  ImGui::SameLine();
  ImGui::TextUnformatted("procedure file");
  if (browse_target_ == 1) FileBrowser(proc_path_, sizeof(proc_path_), "browse_proc");
  ImGui::InputText("##rig", rig_path_, sizeof(rig_path_));
  ImGui::SameLine();
  if (ImGui::SmallButton("browse##r")) browse_target_ = browse_target_ == 2 ? 0 : 2;
  ImGui::SameLine();
  ImGui::TextUnformatted("rig (sim or RIG.toml)");
  if (browse_target_ == 2) FileBrowser(rig_path_, sizeof(rig_path_), "browse_rig");
  ImGui::InputText("cell id", cell_name_, sizeof(cell_name_));
  ImGui::InputTextWithHint("speed", "simulator time factor, empty = real time", speed_, sizeof(speed_));

  // Check first: the plan as the runner will execute it.
  if (check_job_.valid() && check_job_.wait_for(std::chrono::seconds(0)) == std::future_status::ready) {
    auto r = check_job_.get();
    check_result_ = r.ok() ? *r : Captured{-1, r.status().message()};
  }
  bool checking = check_job_.valid();
  if (ImGui::Button(checking ? "Checking…" : "Check plan") && !checking && proc_path_[0]) {
    check_for_ = proc_path_;
    check_result_.reset();
    std::vector<std::string> argv = {SelfExecutable(), "check", proc_path_};
    check_job_ = std::async(std::launch::async, [argv] { return CaptureOutput(argv); });
  }
  bool checked_ok = check_result_ && check_result_->exit_code == 0 && check_for_ == proc_path_;
  if (check_result_) {
    ImGui::SameLine();
    ImGui::TextColored(ImColor(checked_ok ? theme_.ok : theme_.alarm), checked_ok ? "plan is valid" : "check failed (exit %d)",
                       check_result_->exit_code);
  }
  ImGui::BeginChild("plan", {0, ImGui::GetFontSize() * 10}, true);
  ImGui::TextUnformatted(check_result_ ? check_result_->output.c_str() : "Press 'Check plan' to see the steps before starting.");
  ImGui::EndChild();

  // Lithium safety notes, always in view before a run starts.
  ImGui::PushStyleColor(ImGuiCol_ChildBg, ImColor(theme_.notice_row).Value);
  ImGui::BeginChild("cautions", {0, ImGui::GetFontSize() * 9}, true);
  ImGui::PushFont(fonts_.medium);
  ImGui::TextUnformatted("Before a lithium-cell run");
  ImGui::PopFont();
  ImGui::TextWrapped("%s", SafetyCautions());
  ImGui::EndChild();
  ImGui::PopStyleColor();
  ImGui::Checkbox("I have read the safety notes and the cell is set up accordingly", &cautions_read_);

  bool can_start = checked_ok && cautions_read_ && cell_name_[0] && rig_path_[0];
  ImGui::BeginDisabled(!can_start);
  if (ImGui::Button("Start run")) {
    std::vector<std::string> argv = {SelfExecutable(), "run", proc_path_, "--rig", rig_path_, "--db", options_.db_path,
                                     "--cell", cell_name_};
    if (speed_[0]) {
      argv.push_back("--speed");
      argv.push_back(speed_);
    }
    auto pid = SpawnDetached(argv, options_.db_path + ".runs.log");
    start_message_ = pid.ok() ? fmt::format("runner started (pid {}); its output goes to {}.runs.log", *pid, options_.db_path)
                              : "could not start: " + pid.status().message();
    if (pid.ok()) selected_.reset();  // jump to the newest run when it appears
  }
  ImGui::EndDisabled();
  ImGui::SameLine();
  if (ImGui::Button("Close") || Key(GLFW_KEY_ESCAPE)) ImGui::CloseCurrentPopup();
  if (!start_message_.empty()) ImGui::TextWrapped("%s", start_message_.c_str());
  ImGui::EndPopup();
}

void Panel::FileBrowser(char* path, size_t size, const char* id) {
  namespace fs = std::filesystem;
  std::error_code ec;
  fs::path p(path);
  fs::path dir = fs::is_directory(p, ec) ? p : p.parent_path();
  if (dir.empty()) dir = ".";
  std::string key = dir.string();
  if (key != browse_dir_) {  // list a folder once, not every frame
    browse_dir_ = key;
    browse_entries_.clear();
    std::vector<std::string> dirs, files;
    for (fs::directory_iterator it(dir, ec), end; !ec && it != end; it.increment(ec)) {
      std::string name = it->path().filename().string();
      if (name.empty() || name[0] == '.') continue;
      if (it->is_directory(ec)) dirs.push_back(name + "/");
      else files.push_back(name);
      if (dirs.size() + files.size() > 500) break;
    }
    std::sort(dirs.begin(), dirs.end());
    std::sort(files.begin(), files.end());
    browse_entries_.push_back("../");
    browse_entries_.insert(browse_entries_.end(), dirs.begin(), dirs.end());
    browse_entries_.insert(browse_entries_.end(), files.begin(), files.end());
  }
  ImGui::BeginChild(id, {0, ImGui::GetFontSize() * 8}, true);
  ImGui::TextDisabled("%s", fs::absolute(dir, ec).lexically_normal().string().c_str());
  for (const std::string& e : browse_entries_) {
    if (!ImGui::Selectable(e.c_str())) continue;
    fs::path chosen = (dir / e).lexically_normal();
    std::string text = chosen.string();
    if (e.back() == '/' && (text.empty() || text.back() != '/')) text += "/";
    std::snprintf(path, size, "%s", text.c_str());
    if (e.back() != '/') browse_target_ = 0;
  }
  ImGui::EndChild();
}

void Panel::AbortDialog() {
  if (open_abort_) {
    ImGui::OpenPopup("Abort run?");
    open_abort_ = false;
  }
  ImGui::SetNextWindowPos(ImGui::GetMainViewport()->GetCenter(), ImGuiCond_Appearing, {0.5f, 0.5f});
  if (!ImGui::BeginPopupModal("Abort run?", nullptr, ImGuiWindowFlags_AlwaysAutoResize)) return;
  if (!selected_) {
    ImGui::CloseCurrentPopup();
    ImGui::EndPopup();
    return;
  }
  ImGui::Text("Abort run %lld? The runner switches the load off and records the run as aborted.",
              static_cast<long long>(*selected_));
  ImGui::PushStyleColor(ImGuiCol_Button, ImColor(theme_.alarm).Value);
  if (ImGui::Button("Abort the run")) {
    feed_.Request(*selected_, "abort");
    ImGui::CloseCurrentPopup();
  }
  ImGui::PopStyleColor();
  ImGui::SameLine();
  if (ImGui::Button("Keep running") || Key(GLFW_KEY_ESCAPE)) ImGui::CloseCurrentPopup();
  ImGui::EndPopup();
}

const Plan* Panel::PlanOf(const RunData& d) {
  auto it = plans_.find(d.row.id);
  if (it == plans_.end()) {
    ParseOutput parsed = ParseProcedure(d.row.procedure_text, d.row.procedure_name);
    std::optional<Plan> plan;
    if (parsed.ok()) plan = std::move(parsed.plan);
    it = plans_.emplace(d.row.id, std::move(plan)).first;
  }
  return it->second ? &*it->second : nullptr;
}

// One tile per channel of a multi-channel bench or batch (runs tagged
// `slot=`, grouped by `batch=` or by bench): state badge, voltage, delivered
// charge, time left (its basis in the tooltip) and alarms; a click opens the
// run in the live view.
void Panel::BenchView() {
  std::vector<BenchGroup> groups = GroupBenches(state_.runs);
  if (groups.empty()) {
    ImGui::TextDisabled(state_.connected ? "No multi-channel bench runs in this database (runs started with --slots)."
                                         : "Opening the database…");
    return;
  }
  const BenchGroup* group = &groups.front();
  for (const BenchGroup& g : groups)
    if (g.key == bench_key_) group = &g;
  ImGui::PushFont(fonts_.medium);
  ImGui::TextUnformatted(group->title.c_str());
  ImGui::PopFont();
  ImGui::SameLine();
  ImGui::TextDisabled("%zu channel%s%s", group->run_ids.size(), group->run_ids.size() == 1 ? "" : "s",
                      group->live ? "  ·  running" : "  ·  ended");
  if (groups.size() > 1) {
    ImGui::SameLine();
    ImGui::SetNextItemWidth(ImGui::GetFontSize() * 16.0f);
    if (ImGui::BeginCombo("##bench", group->title.c_str())) {
      for (const BenchGroup& g : groups)
        if (ImGui::Selectable(fmt::format("{}{}##{}", g.title, g.live ? "  (running)" : "", g.key).c_str(), &g == group))
          bench_key_ = g.key;
      ImGui::EndCombo();
    }
  }
  ImGui::Separator();

  const float fs = ImGui::GetFontSize();
  const float gap = ImGui::GetStyle().ItemSpacing.x;
  const ImVec2 tile_size{fs * 17.0f, fs * 10.5f};
  const int cols = std::max(1, static_cast<int>((ImGui::GetContentRegionAvail().x + gap) / (tile_size.x + gap)));
  ImDrawList* dl = ImGui::GetWindowDrawList();
  for (size_t k = 0; k < group->run_ids.size(); ++k) {
    const int64_t id = group->run_ids[k];
    if (k % static_cast<size_t>(cols) != 0) ImGui::SameLine();
    auto it = state_.watched.find(id);
    ImGui::PushID(static_cast<int>(id));
    ImGui::BeginGroup();
    const ImVec2 p0 = ImGui::GetCursorScreenPos();
    const ImVec2 p1{p0.x + tile_size.x, p0.y + tile_size.y};
    const bool clicked = ImGui::InvisibleButton("tile", tile_size);
    const bool hovered = ImGui::IsItemHovered();
    dl->AddRectFilled(p0, p1, theme_.plot_bg, fs * 0.3f);
    if (it == state_.watched.end()) {
      dl->AddRect(p0, p1, theme_.plot_frame, fs * 0.3f);
      dl->AddText({p0.x + fs * 0.6f, p0.y + fs * 0.5f}, theme_.tick_text,
                  fmt::format("{}  ·  loading run {}…", group->slots[k], id).c_str());
      ImGui::EndGroup();
      ImGui::PopID();
      continue;
    }
    const RunData& d = it->second;
    const BenchTile tile = MakeTile(group->slots[k], d, PlanOf(d));
    const ImU32 state_colour = StateColour(theme_, tile.status.state);
    dl->AddRect(p0, p1, tile.alarms.empty() ? state_colour : theme_.alarm, fs * 0.3f, 0, hovered ? 3.0f : 1.5f);
    ImGui::SetCursorScreenPos({p0.x + fs * 0.6f, p0.y + fs * 0.4f});
    ImGui::PushFont(fonts_.medium);
    ImGui::TextUnformatted(tile.slot.c_str());
    ImGui::PopFont();
    ImGui::SameLine();
    const DrawnBadge badge = Badge(tile.status.badge.c_str(), state_colour, theme_.badge_text, fonts_.body);
    tiles_.push_back({p0, p1, state_colour, tile.slot});
    (void)badge;
    const float x = p0.x + fs * 0.6f, inner_w = tile_size.x - fs * 1.2f;
    auto line = [&](float y, ImU32 colour, const std::string& text) {
      ImGui::SetCursorScreenPos({x, y});
      ImGui::PushStyleColor(ImGuiCol_Text, colour);
      ImGui::TextUnformatted(Ellipsize(text, inner_w, MeasureText, nullptr).c_str());
      ImGui::PopStyleColor();
    };
    const float lh = ImGui::GetTextLineHeightWithSpacing();
    float y = p0.y + fs * 0.4f + fs * 1.9f;
    line(y, theme_.tick_text, tile.serial.empty() ? "(no serial)" : tile.serial);
    y += lh;
    ImU32 volt = tile.status.load_off ? theme_.Dimmed(theme_.voltage) : theme_.voltage;
    ImGui::SetCursorScreenPos({x, y});
    ImGui::PushFont(fonts_.medium);
    ImGui::PushStyleColor(ImGuiCol_Text, volt);
    ImGui::TextUnformatted(tile.voltage_v ? fmt::format("{:.3f} V", *tile.voltage_v).c_str() : "– V");
    ImGui::PopStyleColor();
    ImGui::SameLine();
    ImGui::SetCursorScreenPos({x + inner_w * 0.5f, y});
    ImGui::PushStyleColor(ImGuiCol_Text, theme_.charge);
    ImGui::TextUnformatted(fmt::format("{:.0f} mAh", tile.delivered_mah).c_str());
    ImGui::PopStyleColor();
    ImGui::PopFont();
    y += lh * 1.35f;
    const std::string left = tile.left.s ? "time left " + Hms(*tile.left.s) : tile.status.state == RunState::kCompleted ||
                                                                                     tile.status.state == RunState::kAborted ||
                                                                                     tile.status.state == RunState::kInterrupted
                                                                                 ? "ended"
                                                                                 : "time left –";
    line(y, theme_.tick_text, tile.rated_mah > 0 ? fmt::format("{}  ·  {:.0f} % of rated", left, 100.0 * tile.delivered_mah / tile.rated_mah)
                                                 : left);
    const bool over_left = ImGui::IsMouseHoveringRect({x, y}, {x + inner_w, y + lh});
    y += lh;
    if (tile.alarms.empty()) {
      line(y, theme_.tick_text, "no alarms");
    } else {
      line(y, theme_.alarm, fmt::format("{} alarm{}: {}", tile.alarms.size(), tile.alarms.size() == 1 ? "" : "s", tile.alarms.back()));
      if (tile.alarms.size() > 1) line(y + lh, theme_.alarm, tile.alarms[tile.alarms.size() - 2]);
    }
    const bool over_alarms = !tile.alarms.empty() && ImGui::IsMouseHoveringRect({x, y}, {x + inner_w, y + 2 * lh});
    ImGui::SetCursorScreenPos(p0);
    ImGui::Dummy(tile_size);
    ImGui::EndGroup();
    if (hovered) {
      ImGui::BeginTooltip();
      if (over_left) {
        ImGui::TextUnformatted(tile.left.basis.c_str());
      } else if (over_alarms) {
        for (const std::string& a : tile.alarms) ImGui::TextUnformatted(a.c_str());
      } else {
        ImGui::Text("run %lld  ·  %s  ·  click to open it in the live view", static_cast<long long>(id), d.row.procedure_name.c_str());
        if (!tile.status.reason.empty()) ImGui::TextUnformatted(tile.status.reason.c_str());
      }
      ImGui::EndTooltip();
    }
    if (clicked) {
      selected_ = id;
      tab_ = Tab::kLive;
    }
    ImGui::PopID();
  }
}

}  // namespace kp::ui
