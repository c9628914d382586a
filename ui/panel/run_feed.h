// RunFeed: reads the database on its own thread so the panel's frame loop
// never waits on disk. The worker polls every `poll_s`: the runs list (its
// figures put together from the stored block summaries, read once per block),
// and for the runs the panel watches, the new block summaries (the overview
// the plots draw at any zoom that shows more blocks than pixels), the latest
// raw samples (headline, remaining-time estimate) and, when the panel asks,
// the raw samples of a zoomed window; plus their steps and events. Nothing
// holds a whole run's samples: memory follows the number of blocks
// (N / kSamplesPerBlock) plus one bounded window.
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
#include <functional>
#include <cstdint>
#include <map>
#include <memory>
#include <mutex>
#include <set>
#include <string>
#include <thread>
#include <tuple>
#include <vector>

#include "analysis/run_analysis.h"
#include "drivers/clock.h"
#include "drivers/status.h"
#include "rig/store.h"
#include "ui/panel/plot_math.h"
#include "ui/panel/view_model.h"

namespace kp::ui {

// A run's overview: one element per stored block summary (Store::LoadBlocks),
// the last one replaced while a live run's block fills.
struct RunOverview {
  std::vector<double> t_s;         // time of each block's first sample (ascending)
  std::vector<double> t_end_s;     // time of its last sample
  std::vector<double> charge_mah;  // net charge delivered up to its last sample
  std::vector<double> voltage_time_vs;  // integral of V dt up to its last sample
  MinMaxPyramid voltage, current, temperature;  // bands: each block's min and max
  SampleSummary done;              // every block before the last, merged
  SampleSummary last;              // the last block as last read
  int64_t last_index = -1;
  size_t size() const { return t_s.size(); }
  // Appends a block, or replaces the last one when it is the same block grown.
  void Put(const SampleBlock& b);
  SampleSummary Total() const;
  size_t Bytes() const;
};

// One discharge of a run, aligned on its start, for the compare view: times
// from the discharge's start, charge delivered since it, the voltage (bands
// from the block summaries, or the raw samples when the run's newest raw
// samples cover the discharge), and its mean voltage: from the step records
// (each ended step's integral of V dt, as the engine took it) when they have
// it, else over the whole 128-sample blocks inside it.
struct DischargeOverlay {
  std::vector<double> t_s, t_end_s, charge_mah;
  MinMaxPyramid voltage;
  std::optional<double> mean_voltage_v;
  double duration_s = 0.0;
  bool raw = false;  // drawn from raw samples
};
DischargeOverlay OverlayOfDischarge(const RunOverview& overview, double start_s, double end_s);
// Per-cycle figures of a run for the panel: charge put in by its charge
// steps and delivered by its discharge, from the step records (each ended
// step's charge as the engine integrated it); a step still running, or one
// recorded before steps carried their charge, from the overview's cumulative
// charge at block boundaries. Coulombic efficiency when at least 1 % went in,
// retention against the first cycle. Empty when the run has no charge step.
struct CycleRow {
  int cycle = 0;
  double charged_mah = 0.0, discharged_mah = 0.0;
  std::optional<double> coulombic, retention;
};
std::vector<CycleRow> CycleRows(const RunOverview& overview, const std::vector<StepRow>& steps, double record_end_s);

// The discharge the compare view shows for a run: its latest, by the step
// records (the definition of analysis/run_analysis.h); nullopt before one starts.
std::optional<DischargeSpan> LatestDischarge(const std::vector<StepRow>& steps, double record_end_s);

// Raw samples of a stretch of a run (the zoomed window), drawn instead of the
// overview when it covers the visible range.
struct RawWindow {
  int64_t first_seq = -1;  // seq of the first sample; -1: none
  std::vector<double> t_s;
  std::vector<double> charge_mah;  // net charge delivered up to each sample (from the run start)
  MinMaxPyramid voltage, current, temperature;
  RunningFigures figures;          // over the window's samples, to continue the charge
  double base_charge_mah = 0.0;    // charge delivered up to first_seq
  size_t size() const { return t_s.size(); }
  int64_t end_seq() const { return first_seq + static_cast<int64_t>(t_s.size()); }
  void Clear() { *this = RawWindow{}; }
  void Append(const Sample* more, size_t count);
  // True when it holds samples over all of [lo, hi].
  bool Covers(double lo, double hi) const { return !t_s.empty() && t_s.front() <= lo && t_s.back() >= hi; }
  size_t Bytes() const;
};

// A watched run as the UI thread holds it. Append-only while live.
struct RunData {
  RunRow row;
  RunOverview overview;
  RunningFigures figures;    // the whole run, from the overview's summaries
  std::vector<Sample> tail;  // the latest raw samples (at most 2 x Options::tail_samples)
  int64_t tail_end_seq = 0;  // seq after the last tail sample
  RawWindow window;
  std::vector<EventRow> events;
  std::vector<StepRow> steps;
  std::vector<RequestRow> requests;  // sent but not yet handled by the runner
  DrawnLimits limits;
  // Block summaries read but not yet put into the overview: a long run is
  // taken in over several frames so no single frame stalls.
  std::vector<SampleBlock> backlog;
  size_t backlog_pos = 0;
  // Puts up to `budget` block summaries from the backlog into the overview; returns how many.
  size_t TakeBacklog(size_t budget);
  size_t BacklogSize() const { return backlog.size() - backlog_pos; }
  // Samples the overview accounts for.
  size_t SampleCount() const { return figures.count(); }
  // The range of sample times, empty before the first block.
  Range DataX() const;
  // Appends raw samples starting at `first_seq` to the tail, and to the window
  // when they continue it.
  void AppendTail(int64_t first_seq, const std::vector<Sample>& more, size_t keep);
  // Installs raw samples starting at `first_seq` as the window.
  void SetWindow(int64_t first_seq, const std::vector<Sample>& samples);
  // Bytes held by the arrays (capacity), for memory figures.
  size_t Bytes() const;
  void Clear();
};

DischargeOverlay OverlayOfDischarge(const RunData& run, const DischargeSpan& span);

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
    // A lab database (`postgresql://...`, rig/lab/lab_mirror.h) is read into
    // an in-memory copy of the runs list and the watched runs; the copy is
    // taken again this often to show what the benches have synced since.
    // Requests and notes are refused there (they belong to the bench's file).
    double lab_refresh_s = 5.0;
    size_t max_rows_per_poll = 32768;  // block summaries per run and poll (bounds one poll's work)
    size_t max_append_per_frame = 100000;  // block summaries per Drain (bounds a frame's work)
    size_t max_pending_blocks = 65536;     // read no more of a run while this many wait for Drain
    size_t tail_samples = 20000;      // raw samples kept at the end of a watched run
    Clock* clock = nullptr;  // paces the polls; nullptr: a real-time SteadyClock
    // Called on the worker thread after a poll that found something new (to
    // wake an idle frame loop); keep it cheap and thread-safe.
    std::function<void()> on_news;
  };
  explicit RunFeed(Options options);
  ~RunFeed();  // stops and joins the worker
  RunFeed(const RunFeed&) = delete;
  RunFeed& operator=(const RunFeed&) = delete;

  // The runs whose samples the panel draws; others get list figures only.
  void Watch(const std::set<int64_t>& run_ids);
  // Moves what the worker read since the last call into `state`; at most
  // max_append_per_frame block summaries are taken in per call, the rest waits
  // in the runs' backlogs for the next frames. True when anything changed.
  bool Drain(FeedState& state);
  // Asks for the raw samples first_seq <= seq < end_seq of a watched run
  // (replacing any earlier ask for it); they arrive as the run's window. Its
  // charge continues the overview's when first_seq is 0 or the last sample
  // of a block (b * kSamplesPerBlock - 1).
  void FetchWindow(int64_t run_id, int64_t first_seq, int64_t end_seq);
  // Queues "abort", "pause" or "continue" for `run_id`; the outcome shows up in notes.
  void Request(int64_t run_id, const std::string& action);
  // Queues a free-text note for `run_id` (Store::AddNote, live or finished
  // run); the outcome shows up in notes.
  void AddNote(int64_t run_id, const std::string& text);
  // Blocks until a poll that began after this call has found nothing more to
  // read (or `timeout_s` wall seconds pass). For headless screenshots and tests.
  // A run with max_pending_blocks block summaries waiting undrained is read
  // on only after the next Drain (until then the worker is not caught up).
  bool WaitCaughtUp(double timeout_s);

 private:
  struct Pending {
    std::vector<SampleBlock> blocks;
    int64_t tail_first_seq = 0;
    std::vector<Sample> tail;
    bool has_window = false;
    int64_t window_first_seq = 0;
    std::vector<Sample> window;
    bool reset = false;
    bool has_meta = false;
    RunRow row;
    std::vector<EventRow> events;
    std::vector<StepRow> steps;
    std::vector<RequestRow> requests;
  };
  // How far the worker has read a run's block summaries.
  struct BlockCursor {
    int64_t next_block = 0;       // re-read from here (the last block may still grow)
    int64_t count_seen = -1;      // the run's sample count when last read to the end
    SampleSummary done, last;     // merged blocks before next_block; the block at next_block
  };
  struct WatchCursor {
    BlockCursor blocks;
    int64_t tail_seq = -2;        // last raw sample read (-2: not started)
    size_t meta_signature = 0;
  };
  void Loop();
  Status Poll(Store& store, bool* caught_up, bool* news, bool* throttled);
  // Reads the block summaries after `cursor`; `keep` receives them.
  Status ReadBlocks(Store& store, const RunRow& run, BlockCursor& cursor, std::vector<SampleBlock>* keep, bool* more);

  Options options_;
  std::thread worker_;
  std::mutex mu_;
  std::condition_variable cv_;
  bool stop_ = false;
  std::atomic<bool> wake_{false};  // cuts the worker's pause short (stop, request, new watch set)
  // shared, under mu_
  std::set<int64_t> watch_;
  std::vector<std::pair<int64_t, std::string>> requests_;
  std::vector<std::pair<int64_t, std::string>> run_notes_;  // notes to write, from AddNote
  std::vector<RunListRow> runs_;
  bool runs_fresh_ = false;
  std::map<int64_t, Pending> pending_;
  std::map<int64_t, std::pair<int64_t, int64_t>> window_asks_;
  bool news_ = false;
  std::vector<std::string> notes_;
  bool connected_ = false;
  uint64_t polls_done_ = 0;
  uint64_t caught_up_poll_ = 0;  // last poll that found nothing left to read
  uint64_t worker_polls_ = 0;    // worker only
  bool lab_ = false;              // worker only: db_path is a lab database
  std::set<int64_t> lab_watch_;   // worker only: the watched runs whose samples the lab copy holds
  // worker only
  std::map<int64_t, BlockCursor> list_cursors_;
  std::map<int64_t, WatchCursor> watch_cursors_;
  std::vector<std::tuple<int64_t, int, int64_t, int64_t, std::string>> runs_signature_;
};

}  // namespace kp::ui
