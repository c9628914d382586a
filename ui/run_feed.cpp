#include "ui/run_feed.h"

#include <algorithm>
#include <chrono>
#include <span>

#include <fmt/format.h>

#include "drivers/clock.h"
#include "rig/cli/db_open.h"

namespace kp::ui {

void RunData::Append(const std::vector<Sample>& more) { Append(more.data(), more.size()); }

size_t RunData::TakeBacklog(size_t budget) {
  size_t n = std::min(budget, BacklogSize());
  Append(backlog.data() + backlog_pos, n);
  backlog_pos += n;
  if (backlog_pos == backlog.size()) {
    backlog.clear();
    backlog_pos = 0;
  }
  return n;
}

size_t FeedState::Backlog() const {
  size_t n = 0;
  for (const auto& [id, d] : watched) n += d.BacklogSize();
  return n;
}

void RunData::Append(const Sample* more_data, size_t count) {
  if (count == 0) return;
  std::span<const Sample> more(more_data, count);
  // No exact reserve() on the long arrays: it would defeat geometric growth
  // and copy the whole run on every small live append.
  std::vector<float> v, i, temp;
  v.reserve(count);
  i.reserve(count);
  temp.reserve(count);
  for (const Sample& s : more) {
    figures.Add(s);
    samples.push_back(s);
    t_s.push_back(s.t_s);
    charge_mah.push_back(figures.charge_mah());
    v.push_back(static_cast<float>(s.voltage_v));
    i.push_back(static_cast<float>(s.current_a));
    temp.push_back(static_cast<float>(s.temperature_c));
  }
  voltage.Append(v.data(), v.size());
  current.Append(i.data(), i.size());
  temperature.Append(temp.data(), temp.size());
}

void RunData::Clear() {
  RunRow keep = row;
  *this = RunData{};
  row = keep;
}

RunFeed::RunFeed(Options options) : options_(std::move(options)) { worker_ = std::thread([this] { Loop(); }); }

RunFeed::~RunFeed() {
  {
    std::lock_guard<std::mutex> lock(mu_);
    stop_ = true;
  }
  wake_ = true;
  cv_.notify_all();
  worker_.join();
}

void RunFeed::Watch(const std::set<int64_t>& run_ids) {
  std::lock_guard<std::mutex> lock(mu_);
  if (run_ids == watch_) return;
  watch_ = run_ids;
  wake_ = true;
}

void RunFeed::Request(int64_t run_id, const std::string& action) {
  std::lock_guard<std::mutex> lock(mu_);
  requests_.emplace_back(run_id, action);
  wake_ = true;
}

void RunFeed::Drain(FeedState& state) {
  std::map<int64_t, Pending> pending;
  std::vector<std::string> notes;
  std::set<int64_t> watch;
  {
    std::lock_guard<std::mutex> lock(mu_);
    pending.swap(pending_);
    notes.swap(notes_);
    if (runs_fresh_) {
      state.runs = runs_;
      runs_fresh_ = false;
    }
    state.connected = connected_;
    watch = watch_;
  }
  state.db_path = options_.db_path;
  for (auto& n : notes) state.notes.push_back(std::move(n));
  for (auto it = state.watched.begin(); it != state.watched.end();)
    it = watch.count(it->first) ? std::next(it) : state.watched.erase(it);
  for (auto& [id, p] : pending) {
    if (!watch.count(id)) continue;
    RunData& d = state.watched[id];
    if (p.reset) d.Clear();
    if (p.has_meta) {
      d.row = std::move(p.row);
      d.events = std::move(p.events);
      d.steps = std::move(p.steps);
      d.requests = std::move(p.requests);
      d.limits = LimitsForRun(d.row.procedure_text, d.row.procedure_name, d.steps);
    }
    d.backlog.insert(d.backlog.end(), p.samples.begin(), p.samples.end());
  }
  size_t budget = options_.max_append_per_frame;
  for (auto& [id, d] : state.watched) budget -= d.TakeBacklog(budget);
}

bool RunFeed::WaitCaughtUp(double timeout_s) {
  std::unique_lock<std::mutex> lock(mu_);
  uint64_t after = polls_done_ + 1;  // a poll that starts after now
  wake_ = true;
  return cv_.wait_for(lock, std::chrono::duration<double>(timeout_s), [&] { return caught_up_poll_ > after; });
}

void RunFeed::Loop() {
  SteadyClock steady;
  Clock& clock = options_.clock ? *options_.clock : steady;
  std::unique_ptr<Store> store;
  while (true) {
    {
      std::lock_guard<std::mutex> lock(mu_);
      if (stop_) return;
    }
    wake_ = false;
    if (!store) {
      auto opened = cli::OpenExistingDb(options_.db_path, clock);
      std::lock_guard<std::mutex> lock(mu_);
      if (opened.ok()) {
        store = std::move(*opened);
        connected_ = true;
      } else {
        connected_ = false;
        notes_.push_back(fmt::format("cannot open {}: {}", options_.db_path, opened.status().message()));
      }
    }
    bool caught_up = false;
    bool read_ok = false;
    if (store) {
      Status st = Poll(*store, &caught_up);
      read_ok = st.ok();
      if (!st.ok()) {
        std::lock_guard<std::mutex> lock(mu_);
        notes_.push_back("read failed: " + st.message());
        caught_up = false;
      }
    }
    {
      std::lock_guard<std::mutex> lock(mu_);
      ++polls_done_;
      if (caught_up) caught_up_poll_ = polls_done_;
      if (stop_) return;
    }
    cv_.notify_all();
    if (!caught_up && read_ok) continue;  // more to read: go on at once
    clock.SleepUntil(clock.Now() + Seconds(options_.poll_s), &wake_);
  }
}

Status RunFeed::ReadSince(Store& store, int64_t run_id, Cursor& cursor, std::vector<Sample>* keep, bool* more) {
  KP_ASSIGN_OR_RETURN(auto q, store.db().Prepare(
                                  "SELECT seq, t_s, voltage_v, current_a, temperature_c, step FROM samples"
                                  " WHERE run_id=?1 AND seq>?2 ORDER BY seq LIMIT ?3"));
  q.Bind(1, run_id).Bind(2, cursor.seq).Bind(3, static_cast<int64_t>(options_.max_rows_per_poll));
  size_t n = 0;
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    Sample s{q.Real(1), q.Real(2), q.Real(3), q.Real(4), static_cast<int>(q.Int(5))};
    cursor.seq = q.Int(0);
    cursor.figures.Add(s);
    if (keep) keep->push_back(s);
    ++n;
  }
  if (n >= options_.max_rows_per_poll) *more = true;
  return Status::Ok();
}

Status RunFeed::Poll(Store& store, bool* caught_up) {
  std::set<int64_t> watch;
  std::vector<std::pair<int64_t, std::string>> requests;
  {
    std::lock_guard<std::mutex> lock(mu_);
    watch = watch_;
    requests.swap(requests_);
  }
  for (auto& [run_id, action] : requests) {
    auto r = store.AddRequest(run_id, action, "panel");
    std::lock_guard<std::mutex> lock(mu_);
    notes_.push_back(r.ok() ? fmt::format("{} requested for run {} (request {})", action, run_id, *r)
                            : fmt::format("{} request for run {} failed: {}", action, run_id, r.status().message()));
  }

  // A runner that died while the panel watched: mark its run interrupted
  // (every few seconds; the store checks the runner's pid and host).
  if (++worker_polls_ % 20 == 0) KP_RETURN_IF_ERROR(store.ReconcileOrphans().status());
  bool more = false;
  KP_ASSIGN_OR_RETURN(auto runs, store.ListRuns());
  std::map<int64_t, Pending> out;
  for (auto it = watch_cursors_.begin(); it != watch_cursors_.end();)
    it = watch.count(it->first) ? std::next(it) : watch_cursors_.erase(it);
  for (int64_t id : watch) {
    auto found = std::find_if(runs.begin(), runs.end(), [&](const RunRow& r) { return r.id == id; });
    if (found == runs.end()) continue;
    Pending& p = out[id];
    if (!watch_cursors_.count(id)) p.reset = true;
    Cursor& c = watch_cursors_[id];
    KP_RETURN_IF_ERROR(ReadSince(store, id, c, &p.samples, &more));
    p.has_meta = true;
    p.row = *found;
    KP_ASSIGN_OR_RETURN(p.events, store.LoadEvents(id));
    KP_ASSIGN_OR_RETURN(p.steps, store.LoadSteps(id));
    if (found->outcome == Outcome::kRunning) {
      KP_ASSIGN_OR_RETURN(p.requests, store.PendingRequests(id));
    }
  }


  std::vector<RunListRow> rows;
  for (const RunRow& run : runs) {
    Cursor& c = list_cursors_[run.id];
    // A watched run was just read from its start: its figures serve the list too.
    if (auto w = watch_cursors_.find(run.id); w != watch_cursors_.end() && w->second.seq > c.seq) c = w->second;
    // Finished runs are read once; running ones follow their tail.
    KP_RETURN_IF_ERROR(ReadSince(store, run.id, c, nullptr, &more));
    rows.push_back(MakeRunListRow(run, c.figures));
  }
  std::sort(rows.begin(), rows.end(), [](const RunListRow& a, const RunListRow& b) { return a.id > b.id; });


  std::lock_guard<std::mutex> lock(mu_);
  runs_ = std::move(rows);
  runs_fresh_ = true;
  if (watch != watch_) more = true;  // the watch set changed meanwhile
  for (auto& [id, p] : out) {
    Pending& dst = pending_[id];
    if (p.reset) {
      dst = std::move(p);
      continue;
    }
    dst.samples.insert(dst.samples.end(), p.samples.begin(), p.samples.end());
    dst.has_meta = true;
    dst.row = std::move(p.row);
    dst.events = std::move(p.events);
    dst.steps = std::move(p.steps);
    dst.requests = std::move(p.requests);
  }
  *caught_up = !more;
  return Status::Ok();
}

}  // namespace kp::ui
