// RunFeed: reads the database on its own thread so the panel's frame loop
// never waits on disk. The worker polls every `poll_s`: the runs list (with
// running figures kept incrementally per run), and for the runs the panel
// watches, the new samples since the last poll plus their steps and events.
// It also performs the control requests the panel queues (Store::AddRequest),
// so the runner — not the panel — acts on them.
//
// Thread-safety: all public methods are called from one (the UI) thread; the
// worker shares only the pending buffers, under a mutex. Drain() is the one
// place per frame where data crosses over; what it hands out is owned by the
// caller.
#pragma once

#include <atomic>
#include <condition_variable>
#include <cstdint>
#include <map>
#include <memory>
#include <mutex>
#include <set>
#include <string>
#include <thread>
#include <vector>

#include "drivers/clock.h"
#include "drivers/status.h"
#include "rig/store.h"
#include "ui/plot_math.h"
#include "ui/view_model.h"

namespace kp::ui {

// A watched run as the UI thread holds it: samples plus the per-sample x
// arrays and min/max pyramids the plots draw from. Append-only while live.
struct RunData {
  RunRow row;
  std::vector<Sample> samples;
  std::vector<double> t_s;         // x for time plots
  std::vector<double> charge_mah;  // cumulative delivered charge, x for V-vs-charge
  MinMaxPyramid voltage, current, temperature;
  RunningFigures figures;
  std::vector<EventRow> events;
  std::vector<StepRow> steps;
  std::vector<RequestRow> requests;  // sent but not yet handled by the runner
  DrawnLimits limits;
  // Samples read but not yet appended: a long run is taken in over several
  // frames so no single frame stalls.
  std::vector<Sample> backlog;
  size_t backlog_pos = 0;
  // Appends samples in time order, extending the arrays, pyramids and figures.
  void Append(const std::vector<Sample>& more);
  void Append(const Sample* more, size_t count);
  // Moves up to `budget` samples from the backlog; returns how many.
  size_t TakeBacklog(size_t budget);
  size_t BacklogSize() const { return backlog.size() - backlog_pos; }
  void Clear();
};

// What the panel knows, refreshed by RunFeed::Drain once per frame.
struct FeedState {
  std::vector<RunListRow> runs;     // newest first
  std::map<int64_t, RunData> watched;
  std::vector<std::string> notes;   // results of requests, read errors (appended)
  bool connected = false;
  std::string db_path;
  // Samples waiting in the watched runs' backlogs.
  size_t Backlog() const;
};

class RunFeed {
 public:
  struct Options {
    std::string db_path;
    double poll_s = 0.25;             // at least twice a second
    size_t max_rows_per_poll = 400000;  // bounds one poll's work per run
    size_t max_append_per_frame = 100000;  // bounds Drain's work per frame
    Clock* clock = nullptr;  // paces the polls; nullptr: a real-time SteadyClock
  };
  explicit RunFeed(Options options);
  ~RunFeed();  // stops and joins the worker
  RunFeed(const RunFeed&) = delete;
  RunFeed& operator=(const RunFeed&) = delete;

  // The runs whose samples the panel draws; others get list figures only.
  void Watch(const std::set<int64_t>& run_ids);
  // Moves what the worker read since the last call into `state`; at most
  // max_append_per_frame samples are appended per call, the rest waits in
  // the runs' backlogs for the next frames.
  void Drain(FeedState& state);
  // Queues "abort", "pause" or "continue" for `run_id`; the outcome shows up in notes.
  void Request(int64_t run_id, const std::string& action);
  // Blocks until a poll that began after this call has found nothing more to
  // read (or `timeout_s` wall seconds pass). For headless screenshots and tests.
  bool WaitCaughtUp(double timeout_s);

 private:
  struct Pending {
    std::vector<Sample> samples;
    bool reset = false;
    bool has_meta = false;
    RunRow row;
    std::vector<EventRow> events;
    std::vector<StepRow> steps;
    std::vector<RequestRow> requests;
  };
  struct Cursor {
    int64_t seq = -1;
    RunningFigures figures;
  };
  void Loop();
  Status Poll(Store& store, bool* caught_up);
  Status ReadSince(Store& store, int64_t run_id, Cursor& cursor, std::vector<Sample>* keep, bool* more);

  Options options_;
  std::thread worker_;
  std::mutex mu_;
  std::condition_variable cv_;
  bool stop_ = false;
  std::atomic<bool> wake_{false};  // cuts the worker's pause short (stop, request, new watch set)
  // shared, under mu_
  std::set<int64_t> watch_;
  std::vector<std::pair<int64_t, std::string>> requests_;
  std::vector<RunListRow> runs_;
  bool runs_fresh_ = false;
  std::map<int64_t, Pending> pending_;
  std::vector<std::string> notes_;
  bool connected_ = false;
  uint64_t polls_done_ = 0;
  uint64_t caught_up_poll_ = 0;  // last poll that found nothing left to read
  uint64_t worker_polls_ = 0;    // worker only
  // worker only
  std::map<int64_t, Cursor> list_cursors_;
  std::map<int64_t, Cursor> watch_cursors_;
};

}  // namespace kp::ui
