// Store: the only door to disk. One SQLite database (WAL mode) holds cells,
// runs (with the procedure text they ran), steps, samples, events and control
// requests.
//
// Writing: one runner process writes; samples go through one prepared
// statement into an open transaction that is committed at least once per
// second of wall time (Commit / MaybeCommit), at every event and step change,
// and at run end — so a killed process loses at most about a second of samples
// and never leaves a partial batch visible.
// Reading: any number of other processes read concurrently (WAL).
// Not thread-safe: one Store per thread.
#pragma once

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "analysis/sample.h"
#include "drivers/clock.h"
#include "drivers/status.h"
#include "rig/equipment.h"
#include "rig/sample_summary.h"
#include "rig/sqlite.h"

namespace kp {

inline constexpr int kSchemaVersion = 5;
// PRAGMA application_id of every Kneepoint database (set from schema v5 on):
// the bytes "KnPt". A database with another non-zero id is refused.
inline constexpr int32_t kApplicationId = 0x4B6E5074;
// Samples per stored block summary (sample_blocks, schema v4): a block's
// samples are seq / kSamplesPerBlock.
inline constexpr int64_t kSamplesPerBlock = 128;

enum class Outcome { kRunning, kCompleted, kAborted, kInterrupted };
const char* OutcomeName(Outcome o);
std::optional<Outcome> ParseOutcome(std::string_view s);

struct NewRun {
  std::string cell_name;
  std::string chemistry;
  double rated_mah = 0.0;
  std::string procedure_name;
  std::string procedure_text;
  std::string rig;  // rig description ("sim", rig file path...)
  std::optional<double> thermometer_tolerance_c{};  // ± degC, stored with the run
  // The traceable record (schema v5). Everything optional: empty text is stored
  // as empty.
  std::string uuid{};           // empty: a new random (v4) UUID is drawn
  std::string bench{};          // bench name (rig file [bench] name, or `run --bench`)
  std::string host{};           // empty: this machine's host name
  std::string operator_name{};  // who ran it
  std::string cell_serial{}, cell_lot{}, cell_part{};  // the cell's serial, lot and manufacturer part number
  std::vector<std::string> tags{};
  std::string note{};           // free text, recorded as a `note` event at t = 0
  std::string rig_text{};       // the rig file's text (empty for the built-in simulator)
  std::vector<InstrumentRecord> instruments{};
  std::string software_version{}, software_commit{};  // empty: this binary's (rig/version.h)
};

struct RunRow {
  int64_t id = 0;
  std::string cell;
  std::string chemistry;
  double rated_mah = 0.0;
  std::string procedure_name;
  std::string procedure_text;
  std::string rig;
  std::string started_at;
  std::string ended_at;  // empty while running
  Outcome outcome = Outcome::kRunning;
  std::string reason;
  int64_t sample_count = 0;  // committed samples (schema v4 column, kept with every batch)
  // The latest discharge as the runner keeps it (schema v3; empty for older
  // runs), and the net charge of the whole record.
  std::optional<double> delivered_mah, delivered_wh;
  double net_mah = 0.0;
  // The traceable record (schema v5; runs stored before it have a UUID drawn
  // when the database was migrated and empty text elsewhere).
  std::string uuid, bench, host, operator_name, cell_serial, cell_lot, cell_part;
  std::vector<std::string> tags;  // sorted
  // The capacity verdict recorded when the run ended: "pass", "fail", "not
  // judged"; empty when none was recorded (runs before v5, a live run).
  std::string verdict;
};

// What a run was made with (schema v5): instruments, the rig file's text, the
// software. Empty for runs recorded before v5.
struct EquipmentRow {
  std::vector<InstrumentRecord> instruments;
  std::string rig_text;
  std::string software_version, software_commit;
};

// `kneepoint runs` filters. Text filters are case-insensitive (ASCII) and
// match the whole field, with `*` for any run of characters and `?` for one;
// every filter given must hold.
struct RunFilter {
  std::string cell, serial, lot, part, tag, operator_name, procedure, bench;
  std::optional<Outcome> outcome;
  std::string verdict;  // "pass", "fail" or "not judged"
  // started_at bounds, ISO 8601 (a date or a date and time, UTC), both inclusive.
  std::string since, until;
  // Substring searched (case-insensitive) in the cell name, serial, lot, part,
  // tags, operator, bench, procedure name, outcome reason, UUID and notes.
  std::string text;
  bool empty() const;
};

// Where a run stands, written in the same transaction as the samples it
// accounts for, so a killed run can resume exactly from its last commit.
struct RunProgress {
  std::string engine_snapshot;  // StepEngine::Snapshot after the latest sample
  double t_s = 0.0;             // run time of that sample
  double delivered_mah = 0.0;   // net since the run started (charging counts negative): runs.net_mah
  double delivered_wh = 0.0;    // runs.net_wh
  // The discharge under way or last completed (from the first discharge-kind
  // step after a charge, or the run start): runs.delivered_mah / delivered_wh.
  double discharge_mah = 0.0;
  double discharge_wh = 0.0;
  double charged_mah = 0.0;  // charged into the cell in the whole run: runs.charged_mah
  bool discharge_open = false;  // a discharge-kind step ran since the last charge
};

// The cheap part of RunProgress, known after every sample.
struct ProgressFigures {
  double t_s = 0.0;
  double delivered_mah = 0.0;  // net (runs.net_mah)
  double delivered_wh = 0.0;   // net (runs.net_wh)
  // The discharge under way or last completed, and the charge put in (see RunProgress).
  double discharge_mah = 0.0;
  double discharge_wh = 0.0;
  double charged_mah = 0.0;
  bool discharge_open = false;
};

// The summary of samples [index * kSamplesPerBlock, (index + 1) * kSamplesPerBlock)
// of a run, as committed so far (the last block of a live run grows).
struct SampleBlock {
  int64_t index = 0;
  SampleSummary summary;
};

// What a reopened (resumed) run continues from.
struct ReopenedRun {
  int64_t next_seq = 0;                // first sample seq of the resumed part
  std::optional<Sample> last_sample;   // the latest committed sample
  std::optional<RunProgress> progress; // empty when the run never committed one
  double gap_s = 0.0;                  // wall seconds since the runner last committed
  int resumes = 0;                     // how many times it was resumed before
};

struct EventRow {
  double t_s = 0.0;
  std::string kind;  // "step", "abort", "fault", "retry", "note", ...
  std::string message;
  std::string wall_at;
};

// A control request written by another process (panel, `kneepoint abort`...).
struct RequestRow {
  int64_t id = 0;
  int64_t run_id = 0;
  std::string action;  // "abort", "pause", "continue"
  std::string requested_by;
  std::string requested_at;
};

struct StepRow {
  int64_t seq = 0;
  int index = 0;  // 0-based plan index; the step number users see is index + 1
  std::string kind;
  std::string label;
  double started_s = 0.0;
  std::optional<double> ended_s;
  std::string end_reason;
  std::string mode;             // "current", "power", "resistance", "segments", "charge", "off"; empty when migrated
  std::optional<double> level;  // commanded A, W or Ohm (charge: A); empty for segments, rests and migrated rows
  int pass = 0;                 // pass of the innermost loop around the step (1-based; 0 outside loops)
  int cycle = 0;                // 0 before the first charge; +1 at each charge that follows a non-charge step
  double held_s = 0.0;          // time the step was held (heat, operator pause, lost link)
  bool migrated = false;        // recorded before schema v3: mode, level and pass are unknown
  // What the step delivered, as the engine integrated it over every reading
  // (not only the stored ones); empty until the step ended, and for old rows.
  std::optional<double> charge_mah, energy_wh, voltage_time_vs;
};

// What the runner records when a step instance starts.
struct NewStep {
  int index = 0;
  std::string kind;
  std::string label;
  std::string mode;
  std::optional<double> level;
  int pass = 0;
  int cycle = 0;
};

// A DC-IR point the engine measured at a commanded edge (dcir step or an edge
// inside a pulse train or duty cycle), valid or with the reason it is not.
struct DcirRow {
  int64_t step_seq = 0;
  std::string source;  // "dcir step", "pulse edge"
  double t_edge_s = 0.0;
  double u1_v = 0.0, i1_a = 0.0, t1_s = 0.0;
  double u2_v = 0.0, i2_a = 0.0;
  std::optional<double> t2_s;
  double resistance_ohm = 0.0;
  bool valid = false;
  std::string why_invalid;
};

class Store {
 public:
  struct Options {
    double commit_interval_s = 1.0;  // wall seconds between batch commits
    bool create = true;
    bool read_only = false;
    std::string vfs;  // SQLite VFS name; empty = default (tests inject faults with a wrapper)
    // A database with a newer schema than this binary's is opened read-only
    // (newer_schema() says so) instead of refused. Readers set it; writers never.
    bool read_only_if_newer = false;
  };
  // Opens or creates `path`, migrating an older schema in a transaction;
  // refuses a newer schema. `wall` times the batch commits.
  static Result<std::unique_ptr<Store>> Open(const std::string& path, Clock& wall, Options options);
  static Result<std::unique_ptr<Store>> Open(const std::string& path, Clock& wall) { return Open(path, wall, Options{}); }
  ~Store();

  // --- writer side ---
  Result<int64_t> BeginRun(const NewRun& run);
  // Same, with the progress a run has before its first reading (the engine at
  // the start of step 1), committed with the run row: a runner killed before
  // its first sample leaves a run that resumes from the start.
  Result<int64_t> BeginRun(const NewRun& run, const RunProgress& initial);
  // Buffered into the open batch; commits when the batch is a second old.
  Status AppendSample(int64_t run_id, const Sample& s);
  // Buffers a sample without ever committing; pair with SetProgress +
  // MaybeCommit so the progress always matches the committed samples.
  Status StageSample(int64_t run_id, const Sample& s);
  // Remembers where the run stands; written with the next commit.
  void SetProgress(int64_t run_id, RunProgress progress);
  // Same, with the engine snapshot produced only when a commit writes it
  // (once per batch instead of once per sample). `snapshot` is called at most
  // once, inside the next commit, so whatever it reads must not change
  // before then (the next SetProgress replaces it).
  void SetProgress(int64_t run_id, const ProgressFigures& figures, std::function<std::string()> snapshot);
  // Takes over an interrupted run as this process's run: outcome back to
  // running, this process as runner, sample numbering continued. Refuses a run
  // that is not interrupted.
  Result<ReopenedRun> ReopenRun(int64_t run_id);
  // Samples committed so far in this store's current run (for crash tests and progress displays).
  int64_t committed_samples() const { return committed_seq_; }
  Status BeginStep(int64_t run_id, const NewStep& step, double t_s);
  Status BeginStep(int64_t run_id, int index, std::string_view kind, std::string_view label, double t_s) {
    return BeginStep(run_id, NewStep{index, std::string(kind), std::string(label), "", std::nullopt, 0, 0}, t_s);
  }
  // Adds held time to the open step instance (written with the next commit).
  Status NoteStepHeld(int64_t run_id, double held_s);
  // Written with the next commit.
  Status AddDcirPoint(int64_t run_id, const DcirRow& point);
  Status EndStep(int64_t run_id, double t_s, std::string_view reason);
  // Same, with what the step delivered as the engine integrated it.
  struct StepTotals {
    double charge_mah = 0.0, energy_wh = 0.0, voltage_time_vs = 0.0;
  };
  Status EndStep(int64_t run_id, double t_s, std::string_view reason, const StepTotals& totals);
  // Events commit the open batch with them.
  Status AddEvent(int64_t run_id, double t_s, std::string_view kind, std::string_view message);
  Status FinishRun(int64_t run_id, Outcome outcome, std::string_view reason);
  // Records the capacity verdict of a finished run (what `runs --verdict`
  // filters on): `verdict` "pass", "fail" or "not judged", its text and the
  // percentage of the rated capacity it judged (empty when not judged).
  Status SetVerdict(int64_t run_id, std::string_view verdict, std::string_view text, std::optional<double> percent_of_rated);
  // A free-text note on any run, live or finished, from any process: an
  // event of kind `note` at the run's latest committed run time, committed at once.
  Status AddNote(int64_t run_id, std::string_view text);
  Status Commit();
  Status MaybeCommit();
  // The writes made while a group is open (a step change: the step's end,
  // the next step's start, its event, DC-IR points) share one commit, made
  // when the group closes: one durable commit instead of several, so runs
  // sharing the database file (a multi-channel bench) wait less for each
  // other at their edges. Groups nest; Commit() inside one is deferred.
  class CommitGroup {
   public:
    explicit CommitGroup(Store& store) : store_(&store) { ++store_->group_depth_; }
    ~CommitGroup() { (void)Close(); }
    CommitGroup(const CommitGroup&) = delete;
    CommitGroup& operator=(const CommitGroup&) = delete;
    // Commits what the group deferred (when it is the outermost one).
    Status Close();

   private:
    Store* store_;
  };

  // --- control requests (any process) ---
  // Queues a request for the runner of `run_id`; committed at once.
  Result<int64_t> AddRequest(int64_t run_id, std::string_view action, std::string_view requested_by);
  // Requests not yet handled, oldest first.
  Result<std::vector<RequestRow>> PendingRequests(int64_t run_id);
  Status MarkRequestHandled(int64_t request_id);
  // When the runner took request `request_id` (its handled_at), if it did.
  Result<std::optional<std::string>> RequestHandledAt(int64_t request_id);

  // --- reader side ---
  // Marks runs whose runner process is gone as interrupted; returns how many.
  Result<int> ReconcileOrphans();
  Result<std::vector<RunRow>> ListRuns();
  Result<RunRow> GetRun(int64_t run_id);
  // The runs that pass every filter given, in id order.
  Result<std::vector<RunRow>> FindRuns(const RunFilter& filter);
  // A run named by its number ("12") or its UUID (or a unique prefix of at
  // least 8 characters of it).
  Result<int64_t> ResolveRun(std::string_view number_or_uuid);
  Result<EquipmentRow> LoadEquipment(int64_t run_id);
  // The run's notes (events of kind `note`), oldest first.
  Result<std::vector<EventRow>> LoadNotes(int64_t run_id);
  Result<std::vector<Sample>> LoadSamples(int64_t run_id);
  // Streams samples in order without holding them all in memory.
  Status ForEachSample(int64_t run_id, const std::function<Status(const Sample&)>& fn);
  Result<std::vector<EventRow>> LoadEvents(int64_t run_id);
  Result<std::vector<StepRow>> LoadSteps(int64_t run_id);
  Result<std::vector<DcirRow>> LoadDcirPoints(int64_t run_id);
  // Times of a run's first and last sample (nullopt for a run without samples).
  Result<std::optional<std::pair<double, double>>> SampleTimeRange(int64_t run_id);
  // The figures the runner keeps on the runs row (schema v3): net charge of
  // the record, the latest discharge, the charge put in, the thermometer's
  // tolerance. Empty optionals for runs recorded before v3.
  struct RunTotalsRow {
    double net_mah = 0.0, net_wh = 0.0;
    std::optional<double> delivered_mah, delivered_wh, charged_mah, thermometer_tolerance_c;
  };
  Result<RunTotalsRow> LoadRunTotals(int64_t run_id);
  // The progress last committed with the run's samples, if any.
  Result<std::optional<RunProgress>> LoadProgress(int64_t run_id);
  // Block summaries of a run from block `from_block` on, at most `max_blocks`,
  // in order: a run's overview and figures without reading its samples.
  Result<std::vector<SampleBlock>> LoadBlocks(int64_t run_id, int64_t from_block, int64_t max_blocks);
  // Samples with first_seq <= seq < end_seq, in order (a zoomed window).
  Result<std::vector<Sample>> LoadSampleRange(int64_t run_id, int64_t first_seq, int64_t end_seq);
  // The latest `n` samples of a run, oldest first (live displays).
  Result<std::vector<Sample>> LatestSamples(int64_t run_id, int n);

  Result<int> SchemaVersion();
  Result<int> ApplicationId();
  // Non-zero when the database's schema is newer than this binary's: it was
  // opened read-only (Options::read_only_if_newer) and holds that version.
  int newer_schema() const { return newer_schema_; }
  Result<std::string> JournalMode();
  sql::Db& db() { return *db_; }

 private:
  Store(std::unique_ptr<sql::Db> db, Clock& wall, Options options);
  Status Migrate();
  Status WriteRecord(int64_t run_id, const NewRun& run);
  Result<int64_t> BeginRunWith(const NewRun& run, const std::optional<RunProgress>& initial);
  Status EnsureBatch();
  // Staged samples go into the open transaction (opening it): at each
  // commit, and before this connection reads samples back.
  Status FlushStaged();
  Status WriteSample(const Sample& s);
  Status WriteBlock();
  Status ClaimRunner(int64_t run_id);
  Result<int64_t> EnsureCell(const NewRun& run);

  std::unique_ptr<sql::Db> db_;
  Clock& wall_;
  Options options_;
  bool in_batch_ = false;
  int group_depth_ = 0;          // open CommitGroups
  bool group_commit_ = false;    // a commit was asked for inside them
  Seconds batch_started_{0};
  // Samples staged in memory: the write transaction is opened only when they
  // are written at the commit, so other writers (control requests, a second
  // process) find the database free between commits instead of waiting on a
  // batch held open for a whole commit interval.
  std::vector<Sample> staged_;
  int64_t next_seq_ = 0;
  int64_t seq_run_ = -1;
  int64_t step_seq_ = 0;
  int64_t committed_seq_ = 0;
  std::optional<RunProgress> progress_;
  std::optional<RunProgress> committed_progress_;  // what the database holds
  std::function<std::string()> snapshot_fn_;        // fills progress_'s snapshot at the next commit
  bool has_insert_ = false;
  sql::Stmt insert_sample_;
  bool has_heartbeat_ = false;
  sql::Stmt heartbeat_;
  bool has_pending_requests_ = false;
  sql::Stmt pending_requests_;
  // The summary of the block the run's samples are going into.
  SampleSummary block_;
  int64_t block_index_ = -1;
  bool block_dirty_ = false;  // block_ holds samples not yet written
  SampleSummary committed_block_;
  int64_t committed_block_index_ = -1;
  bool has_put_block_ = false;
  sql::Stmt put_block_;
  bool has_load_blocks_ = false;
  sql::Stmt load_blocks_;
  bool has_list_runs_ = false;
  size_t listed_runs_ = 0;  // rows of the last listing (to size the next)
  sql::Stmt list_runs_;
  bool has_get_run_ = false;
  sql::Stmt get_run_;
  int newer_schema_ = 0;
};

}  // namespace kp
