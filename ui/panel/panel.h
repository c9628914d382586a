// Panel: the whole window's contents, drawn once per frame from the FeedState
// snapshot (Dear ImGui style: the panel owns view state, never the data).
// Actions go out as requests through RunFeed (pause / continue / abort) or as
// child processes (`kneepoint check`, a detached `kneepoint run`); nothing here
// talks to instruments, and no run depends on this window staying open.
// UI thread only.
#pragma once

#include <cstdint>
#include <future>
#include <map>
#include <optional>
#include <set>
#include <string>
#include <vector>

#include "procedures/plan.h"
#include "ui/panel/bench_overview.h"
#include "ui/panel/child_process.h"
#include "ui/panel/plot_widget.h"
#include "ui/panel/run_feed.h"
#include "ui/panel/theme.h"

namespace kp::ui {

enum class Tab { kLive, kCompare, kBench };

// A state badge as last drawn (for the headless check).
struct DrawnBadge {
  ImVec2 min, max;
  ImU32 colour = 0;
  std::string text;
};

// A plot as last drawn, with the colours of its traces (for the headless check).
struct DrawnPlot {
  std::string name;
  PlotResult result;
  std::vector<ImU32> trace_colours;
};

struct PanelOptions {
  std::string db_path;
  std::optional<int64_t> run_id;  // the run shown first (newest when absent)
  std::set<int64_t> compare;      // runs overlaid in the compare view
  Tab tab = Tab::kLive;
  bool dark = true;
  float scale = 1.0f;
  std::string new_run_procedure;  // non-empty: open the start dialog with this file
};

class Panel {
 public:
  Panel(RunFeed& feed, PanelOptions options, Fonts fonts);
  // Draws one frame covering the whole viewport; call between NewFrame and Render.
  void Frame();
  // Where the live voltage plot was last drawn (for the headless check).
  const PlotResult& voltage_plot() const { return voltage_plot_; }
  // Every plot and the state badge of the last frame.
  const std::vector<DrawnPlot>& plots() const { return plots_; }
  const std::optional<DrawnBadge>& badge() const { return badge_; }
  // The bench overview's tiles of the last frame: each tile's box, its state
  // colour (the tile's badge) and its slot.
  const std::vector<DrawnBadge>& tiles() const { return tiles_; }
  const Theme& theme() const { return theme_; }
  const FeedState& state() const { return state_; }
  std::optional<int64_t> selected() const { return selected_; }
  Tab tab() const { return tab_; }
  // True while something outside the data feed may change what is drawn
  // (a plan check running in a child process).
  bool Waiting() const { return check_job_.valid(); }

 private:
  void Shortcuts();
  void TopBar();
  void RunsList();
  void LiveView();
  void CompareView();
  void BenchView();
  // The parsed plan of a run's stored procedure (nullptr when it does not parse), kept per run.
  const Plan* PlanOf(const RunData& d);
  void StartDialog();
  void AbortDialog();
  void FileBrowser(char* path, size_t size, const char* id);
  void Headline(const RunData& d, const RunStatus& status);
  void EventLog(const RunData& d);
  void CycleTable(const RunData& d);
  void ControlButtons(const RunData& d, const RunStatus& status);
  void CycleCapacityPlot(const std::vector<const RunData*>& runs, const std::vector<std::string>& labels, float height);
  PlotResult Plot(const char* id, const char* name, const PlotSpec& spec, XView& view, ImVec2 size);
  void NoteField(const RunData& d);
  void SetTheme(bool dark);
  // True when `d`'s raw window covers `x` and the overview is coarser than
  // `width_px` pixel columns there; asks the feed for that window otherwise.
  bool UseRaw(const RunData& d, Range x, float width_px);

  RunFeed& feed_;
  PanelOptions options_;
  Fonts fonts_;
  Theme theme_;
  FeedState state_;
  std::optional<int64_t> selected_;
  std::set<int64_t> compare_;
  Tab tab_;
  XView live_x_;
  XView cmp_time_x_;
  XView cmp_charge_x_;
  XView cmp_cycle_x_;
  std::set<int64_t> cmp_shown_;  // the compare set the views were fitted to
  PlotResult voltage_plot_;
  std::vector<DrawnPlot> plots_;
  std::optional<DrawnBadge> badge_;
  std::vector<DrawnBadge> tiles_;
  std::string bench_key_;  // the bench or batch the overview shows (empty: the first)
  std::map<int64_t, std::optional<Plan>> plans_;
  std::map<int64_t, std::pair<int64_t, int64_t>> asked_windows_;  // run -> seq range last asked
  char filter_[128] = "";
  char run_note_[512] = "";
  bool focus_filter_ = false;
  bool open_start_ = false;
  bool open_abort_ = false;
  // Start dialog.
  char proc_path_[512] = "";
  char rig_path_[512] = "sim";
  char cell_name_[128] = "";
  char speed_[32] = "";
  bool cautions_read_ = false;
  std::future<Result<Captured>> check_job_;
  std::optional<Captured> check_result_;
  std::string check_for_;  // procedure path the check result belongs to
  std::string start_message_;
  // File browser of the start dialog: the listed folder and its entries (folders end in '/').
  std::string browse_dir_;
  std::vector<std::string> browse_entries_;
  int browse_target_ = 0;  // 0 closed, 1 procedure, 2 rig
};

}  // namespace kp::ui
