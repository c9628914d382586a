#include "ui/panel/run_feed.h"

#include "rig/commanded_segments.h"

#include <algorithm>
#include <map>

#include <algorithm>
#include <chrono>
#include <span>

#include <fmt/format.h>

#include "drivers/clock.h"
#include "rig/lab/pg.h"
#include "rig/store_open.h"

namespace kp::ui {

void RunOverview::Put(const SampleBlock& b) {
  const SampleSummary& s = b.summary;
  if (s.count == 0) return;
  if (b.index == last_index && !t_s.empty()) {
    // The same block, grown: replace the last element.
    const size_t keep = t_s.size() - 1;
    t_s.resize(keep);
    t_end_s.resize(keep);
    charge_mah.resize(keep);
    voltage_time_vs.resize(keep);
    voltage.Truncate(keep);
    current.Truncate(keep);
    temperature.Truncate(keep);
  } else {
    done.Merge(last);
  }
  last = s;
  last_index = b.index;
  SampleSummary upto = done;
  upto.Merge(s);
  t_s.push_back(s.first.t_s);
  t_end_s.push_back(s.last.t_s);
  charge_mah.push_back(upto.net_mah);
  voltage_time_vs.push_back(upto.voltage_time_vs);
  const float vmin = static_cast<float>(s.min_voltage_v), vmax = static_cast<float>(s.max_voltage_v);
  const float imin = static_cast<float>(s.min_current_a), imax = static_cast<float>(s.max_current_a);
  const float cmin = static_cast<float>(s.min_temperature_c), cmax = static_cast<float>(s.max_temperature_c);
  voltage.AppendBands(&vmin, &vmax, 1);
  current.AppendBands(&imin, &imax, 1);
  temperature.AppendBands(&cmin, &cmax, 1);
}

SampleSummary RunOverview::Total() const {
  SampleSummary t = done;
  t.Merge(last);
  return t;
}

DischargeOverlay OverlayOfDischarge(const RunOverview& o, double start_s, double end_s) {
  DischargeOverlay d;
  d.duration_s = std::max(0.0, end_s - start_s);
  const size_t n = o.size();
  // Cumulative figures at the last block boundary at or before t.
  auto at = [&](double t, const std::vector<double>& cum, double& boundary_t) -> double {
    size_t k = static_cast<size_t>(std::upper_bound(o.t_end_s.begin(), o.t_end_s.end(), t) - o.t_end_s.begin());
    if (k == 0) {
      boundary_t = n ? o.t_s.front() : t;
      return 0.0;
    }
    boundary_t = o.t_end_s[k - 1];
    return cum[k - 1];
  };
  double q_t = 0;
  const double q0 = at(start_s, o.charge_mah, q_t);
  std::vector<float> lo, hi;
  for (size_t i = 0; i < n; ++i) {
    if (o.t_s[i] < start_s || o.t_end_s[i] > end_s) continue;
    d.t_s.push_back(o.t_s[i] - start_s);
    d.t_end_s.push_back(o.t_end_s[i] - start_s);
    d.charge_mah.push_back(o.charge_mah[i] - q0);
    lo.push_back(o.voltage.MinAt(i));
    hi.push_back(o.voltage.MaxAt(i));
  }
  d.voltage.AppendBands(lo.data(), hi.data(), lo.size());
  double t_a = 0, t_b = 0;
  const double vs_a = at(start_s, o.voltage_time_vs, t_a);
  const double vs_b = at(end_s, o.voltage_time_vs, t_b);
  if (t_b > t_a && !d.t_s.empty()) d.mean_voltage_v = (vs_b - vs_a) / (t_b - t_a);
  return d;
}

namespace {
// Net charge at the last block boundary at or before t (0 before the first).
double ChargeAt(const RunOverview& o, double t) {
  size_t k = static_cast<size_t>(std::upper_bound(o.t_end_s.begin(), o.t_end_s.end(), t) - o.t_end_s.begin());
  return k == 0 ? 0.0 : o.charge_mah[k - 1];
}
}  // namespace

std::vector<CycleRow> CycleRows(const RunOverview& o, const std::vector<StepRow>& steps, double record_end_s) {
  std::vector<CycleRow> out;
  if (std::none_of(steps.begin(), steps.end(), [](const StepRow& s) { return s.kind == "charge"; })) return out;
  auto end_of = [&](size_t k) {
    return steps[k].ended_s ? *steps[k].ended_s : (k + 1 < steps.size() ? steps[k + 1].started_s : record_end_s);
  };
  // Net charge a step delivered (> 0 discharged): its record, else the overview.
  auto delivered = [&](size_t k) {
    if (steps[k].charge_mah) return *steps[k].charge_mah;
    return ChargeAt(o, end_of(k)) - ChargeAt(o, steps[k].started_s);
  };
  std::map<int, CycleRow> by;
  for (size_t k = 0; k < steps.size(); ++k) {
    CycleRow& c = by[steps[k].cycle];
    c.cycle = steps[k].cycle;
    if (steps[k].kind == "charge") c.charged_mah += std::max(0.0, -delivered(k));
  }
  std::vector<StepRecord> recs;
  for (const StepRow& s : steps) recs.push_back(StepRecordOf(s));
  for (const DischargeSpan& d : DischargeSpans(recs, record_end_s)) {
    CycleRow& c = by[d.cycle];
    c.cycle = d.cycle;
    c.discharged_mah = 0.0;
    for (size_t k = d.first; k <= d.last; ++k) c.discharged_mah += delivered(k);
  }
  std::optional<double> first;
  for (auto& [n, c] : by) {
    if (c.discharged_mah > 0 && c.charged_mah > 0.01 * c.discharged_mah) c.coulombic = c.discharged_mah / c.charged_mah;
    if (c.cycle >= 1 && c.discharged_mah > 0) {
      if (!first) first = c.discharged_mah;
      c.retention = c.discharged_mah / *first;
    }
    out.push_back(c);
  }
  return out;
}

DischargeOverlay OverlayOfDischarge(const RunData& run, const DischargeSpan& span) {
  DischargeOverlay d;
  const std::vector<Sample>& tail = run.tail;
  if (!tail.empty() && tail.front().t_s <= span.start_s) {
    // The newest raw samples reach back to the discharge's start: draw them.
    d.raw = true;
    d.duration_s = std::max(0.0, span.end_s - span.start_s);
    std::vector<float> v;
    double q_as = 0.0, vs = 0.0, t_span = 0.0;
    const Sample* prev = nullptr;
    for (const Sample& x : tail) {
      if (x.t_s > span.end_s + 1e-9) break;
      if (x.t_s < span.start_s - 1e-9) continue;
      if (prev != nullptr) {
        const double dt = x.t_s - prev->t_s;
        q_as += 0.5 * (x.current_a + prev->current_a) * dt;
        vs += 0.5 * (x.voltage_v + prev->voltage_v) * dt;
        t_span += dt;
      }
      prev = &x;
      d.t_s.push_back(x.t_s - span.start_s);
      d.t_end_s.push_back(x.t_s - span.start_s);
      d.charge_mah.push_back(q_as / 3.6);
      v.push_back(static_cast<float>(x.voltage_v));
    }
    d.voltage.Append(v.data(), v.size());
    if (t_span > 0) d.mean_voltage_v = vs / t_span;
  } else {
    d = OverlayOfDischarge(run.overview, span.start_s, span.end_s);
  }
  // The mean voltage from the step records when every step of the discharge has ended with its integral.
  double vs = 0.0, t_span = 0.0;
  bool all = span.last < run.steps.size();
  for (size_t k = span.first; all && k <= span.last; ++k) {
    const StepRow& s = run.steps[k];
    if (!s.voltage_time_vs || !s.ended_s) {
      all = false;
      break;
    }
    vs += *s.voltage_time_vs;
    t_span += *s.ended_s - s.started_s - s.held_s;
  }
  if (all && t_span > 0) d.mean_voltage_v = vs / t_span;
  return d;
}

std::optional<DischargeSpan> LatestDischarge(const std::vector<StepRow>& steps, double record_end_s) {
  std::vector<StepRecord> recs;
  for (const StepRow& s : steps) recs.push_back(StepRecordOf(s));
  std::vector<DischargeSpan> spans = DischargeSpans(recs, record_end_s);
  if (spans.empty()) return std::nullopt;
  return spans.back();
}

size_t RunOverview::Bytes() const {
  return (t_s.capacity() + t_end_s.capacity() + charge_mah.capacity() + voltage_time_vs.capacity()) * sizeof(double) +
         voltage.Bytes() + current.Bytes() + temperature.Bytes();
}

void RawWindow::Append(const Sample* more_data, size_t count) {
  if (count == 0) return;
  std::span<const Sample> more(more_data, count);
  std::vector<float> v, i, temp;
  v.reserve(count);
  i.reserve(count);
  temp.reserve(count);
  for (const Sample& s : more) {
    figures.Add(s);
    t_s.push_back(s.t_s);
    charge_mah.push_back(base_charge_mah + figures.charge_mah());
    v.push_back(static_cast<float>(s.voltage_v));
    i.push_back(static_cast<float>(s.current_a));
    temp.push_back(static_cast<float>(s.temperature_c));
  }
  voltage.Append(v.data(), v.size());
  current.Append(i.data(), i.size());
  temperature.Append(temp.data(), temp.size());
}

size_t RawWindow::Bytes() const {
  return (t_s.capacity() + charge_mah.capacity()) * sizeof(double) + voltage.Bytes() + current.Bytes() + temperature.Bytes();
}

size_t RunData::TakeBacklog(size_t budget) {
  size_t n = std::min(budget, BacklogSize());
  for (size_t k = 0; k < n; ++k) overview.Put(backlog[backlog_pos + k]);
  backlog_pos += n;
  if (backlog_pos == backlog.size()) {
    backlog.clear();
    backlog.shrink_to_fit();
    backlog_pos = 0;
  }
  if (n > 0) figures = RunningFigures(overview.Total());
  return n;
}

size_t FeedState::Backlog() const {
  size_t n = 0;
  for (const auto& [id, d] : watched) n += d.BacklogSize();
  return n;
}

Range RunData::DataX() const {
  Range r;
  if (overview.size() > 0) {
    r.Include(overview.t_s.front());
    r.Include(overview.t_end_s.back());
  }
  if (!tail.empty()) {
    r.Include(tail.front().t_s);
    r.Include(tail.back().t_s);
  }
  return r;
}

void RunData::AppendTail(int64_t first_seq, const std::vector<Sample>& more, size_t keep) {
  if (more.empty()) return;
  if (first_seq != tail_end_seq) tail.clear();  // not contiguous (a fresh start): keep only the new ones
  tail.insert(tail.end(), more.begin(), more.end());
  tail_end_seq = first_seq + static_cast<int64_t>(more.size());
  if (tail.size() > 2 * keep) tail.erase(tail.begin(), tail.end() - static_cast<ptrdiff_t>(keep));
  // A window that reaches the newest samples follows them (a live run seen
  // close up), up to twice the size it was asked at; past that the overview
  // has enough blocks to draw from.
  // (The window may already hold some of them: it was read in its own transaction.)
  const int64_t more_end = first_seq + static_cast<int64_t>(more.size());
  if (window.first_seq >= 0 && window.end_seq() >= first_seq && window.end_seq() < more_end) {
    const size_t skip = static_cast<size_t>(window.end_seq() - first_seq);
    if (window.size() + more.size() - skip <= std::max<size_t>(4 * keep, 1 << 19))
      window.Append(more.data() + skip, more.size() - skip);
    else
      window.Clear();
  }
}

void RunData::SetWindow(int64_t first_seq, const std::vector<Sample>& samples) {
  window.Clear();
  if (samples.empty()) return;
  window.first_seq = first_seq;
  // Charge up to first_seq: the cumulative charge at the end of the block
  // before, when the window starts on that block's last sample.
  const int64_t block = (first_seq + 1) / kSamplesPerBlock;
  if (first_seq > 0 && (first_seq + 1) % kSamplesPerBlock == 0 && block >= 1 && static_cast<size_t>(block - 1) < overview.size())
    window.base_charge_mah = overview.charge_mah[static_cast<size_t>(block - 1)];
  window.Append(samples.data(), samples.size());
}

size_t RunData::Bytes() const {
  return overview.Bytes() + window.Bytes() + tail.capacity() * sizeof(Sample) + backlog.capacity() * sizeof(SampleBlock);
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

void RunFeed::AddNote(int64_t run_id, const std::string& text) {
  std::lock_guard<std::mutex> lock(mu_);
  run_notes_.emplace_back(run_id, text);
  wake_ = true;
}

void RunFeed::FetchWindow(int64_t run_id, int64_t first_seq, int64_t end_seq) {
  std::lock_guard<std::mutex> lock(mu_);
  window_asks_[run_id] = {first_seq, end_seq};
  wake_ = true;
}

bool RunFeed::Drain(FeedState& state) {
  std::map<int64_t, Pending> pending;
  std::vector<std::string> notes;
  std::set<int64_t> watch;
  bool news = false;
  {
    std::lock_guard<std::mutex> lock(mu_);
    pending.swap(pending_);
    if (!pending.empty()) wake_ = true;  // the worker may read on (see still_pending in Poll)
    notes.swap(notes_);
    if (runs_fresh_) {
      state.runs = runs_;
      runs_fresh_ = false;
      news = true;
    }
    news = news || news_ || state.connected != connected_;
    news_ = false;
    state.connected = connected_;
    watch = watch_;
  }
  state.db_path = options_.db_path;
  news = news || !notes.empty();
  for (auto& n : notes) state.notes.push_back(std::move(n));
  for (auto it = state.watched.begin(); it != state.watched.end();)
    it = watch.count(it->first) ? std::next(it) : state.watched.erase(it);
  for (auto& [id, p] : pending) {
    if (!watch.count(id)) continue;
    news = true;
    RunData& d = state.watched[id];
    if (p.reset) d.Clear();
    if (p.has_meta) {
      d.row = std::move(p.row);
      d.events = std::move(p.events);
      d.steps = std::move(p.steps);
      d.requests = std::move(p.requests);
      d.limits = LimitsForRun(d.row.procedure_text, d.row.procedure_name, d.steps);
    }
    d.backlog.insert(d.backlog.end(), p.blocks.begin(), p.blocks.end());
    if (p.has_window) d.SetWindow(p.window_first_seq, p.window);
    d.AppendTail(p.tail_first_seq, p.tail, options_.tail_samples);
  }
  size_t budget = options_.max_append_per_frame;
  for (auto& [id, d] : state.watched) {
    size_t took = d.TakeBacklog(budget);
    budget -= took;
    news = news || took > 0;
  }
  return news;
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
  lab_ = pg::IsPostgresUrl(options_.db_path);
  Seconds opened_at{0};
  const std::string shown_path = lab_ ? pg::RedactUrl(options_.db_path) : options_.db_path;
  while (true) {
    {
      std::lock_guard<std::mutex> lock(mu_);
      if (stop_) return;
    }
    wake_ = false;
    bool news = false;
    if (lab_ && store) {  // a fresh copy: after a while, or when other runs are watched
      std::lock_guard<std::mutex> lock(mu_);
      if (clock.Now() - opened_at >= Seconds(options_.lab_refresh_s) || watch_ != lab_watch_) store.reset();
    }
    if (!store) {
      Result<std::unique_ptr<Store>> opened = NotFound("");
      if (lab_) {
        std::vector<std::string> refs;
        {
          std::lock_guard<std::mutex> lock(mu_);
          lab_watch_ = watch_;
          for (int64_t id : watch_) refs.push_back(std::to_string(id));
        }
        opened = OpenDbForReading(options_.db_path, clock, refs);
      } else {
        opened = OpenExistingDb(options_.db_path, clock);
      }
      opened_at = clock.Now();
      std::lock_guard<std::mutex> lock(mu_);
      if (opened.ok()) {
        store = std::move(*opened);
        connected_ = true;
      } else {
        connected_ = false;
        notes_.push_back(fmt::format("cannot open {}: {}", shown_path, opened.status().message()));
      }
      news = true;
    }
    bool caught_up = false;
    bool read_ok = false;
    bool throttled = false;
    if (store) {
      Status st = Poll(*store, &caught_up, &news, &throttled);
      read_ok = st.ok();
      if (!st.ok()) {
        std::lock_guard<std::mutex> lock(mu_);
        notes_.push_back("read failed: " + st.message());
        caught_up = false;
        news = true;
      }
    }
    {
      std::lock_guard<std::mutex> lock(mu_);
      ++polls_done_;
      if (caught_up) caught_up_poll_ = polls_done_;
      if (news) news_ = true;
      if (stop_) return;
    }
    cv_.notify_all();
    if (news && options_.on_news) options_.on_news();
    if (!caught_up && read_ok && !throttled) continue;  // more to read: go on at once (Drain wakes a throttled worker)
    clock.SleepUntil(clock.Now() + Seconds(options_.poll_s), &wake_);
  }
}

Status RunFeed::ReadBlocks(Store& store, const RunRow& run, BlockCursor& cursor, std::vector<SampleBlock>* keep, bool* more) {
  if (cursor.count_seen == run.sample_count) return Status::Ok();  // nothing committed since
  const int64_t limit = static_cast<int64_t>(std::max<size_t>(options_.max_rows_per_poll, 2));
  KP_ASSIGN_OR_RETURN(auto blocks, store.LoadBlocks(run.id, cursor.next_block, limit));
  for (const SampleBlock& b : blocks) {
    if (b.index != cursor.next_block) {
      cursor.done.Merge(cursor.last);
      cursor.next_block = b.index;
    }
    cursor.last = b.summary;
  }
  if (keep) keep->insert(keep->end(), blocks.begin(), blocks.end());
  if (static_cast<int64_t>(blocks.size()) >= limit) {
    *more = true;  // the rest next poll (the last block read is read again)
  } else {
    cursor.count_seen = run.sample_count;
  }
  return Status::Ok();
}

Status RunFeed::Poll(Store& store, bool* caught_up, bool* news, bool* throttled) {
  std::set<int64_t> watch;
  std::vector<std::pair<int64_t, std::string>> requests, run_notes;
  std::map<int64_t, std::pair<int64_t, int64_t>> window_asks;
  // Watched runs with max_pending_blocks summaries waiting for the UI: read
  // no more of them until they are taken (bounds the memory a slow UI can
  // make the worker hold).
  std::set<int64_t> still_pending;
  {
    std::lock_guard<std::mutex> lock(mu_);
    watch = watch_;
    // A lab copy holds samples only of the runs watched when it was taken:
    // a run watched since waits for the next copy (read now, its cursor
    // would mark samples the copy lacks as seen).
    if (lab_)
      for (auto it = watch.begin(); it != watch.end();) it = lab_watch_.count(*it) ? std::next(it) : watch.erase(it);
    requests.swap(requests_);
    run_notes.swap(run_notes_);
    window_asks.swap(window_asks_);
    for (const auto& [id, p] : pending_)
      if (p.blocks.size() >= options_.max_pending_blocks) still_pending.insert(id);
  }
  if (lab_ && (!requests.empty() || !run_notes.empty())) {
    std::lock_guard<std::mutex> lock(mu_);
    notes_.push_back("the lab database is read only: pause, abort, continue and notes go to the bench's own database file");
    *news = true;
    requests.clear();
    run_notes.clear();
  }
  for (auto& [run_id, action] : requests) {
    auto r = store.AddRequest(run_id, action, "panel");
    std::lock_guard<std::mutex> lock(mu_);
    notes_.push_back(r.ok() ? fmt::format("{} requested for run {} (request {})", action, run_id, *r)
                            : fmt::format("{} request for run {} failed: {}", action, run_id, r.status().message()));
    *news = true;
  }
  for (auto& [run_id, text] : run_notes) {
    Status st = store.AddNote(run_id, text);
    std::lock_guard<std::mutex> lock(mu_);
    notes_.push_back(st.ok() ? fmt::format("note added to run {}", run_id)
                             : fmt::format("note for run {} failed: {}", run_id, st.message()));
    *news = true;
  }

  // A runner that died while the panel watched: mark its run interrupted
  // (every few seconds; the store checks the runner's pid and host).
  // Not on a lab copy: its runners are on other hosts, and the copy is not the record.
  if (++worker_polls_ % 20 == 0 && !lab_) KP_RETURN_IF_ERROR(store.ReconcileOrphans().status());
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
    WatchCursor& c = watch_cursors_[id];
    // Block summaries: at most one poll's worth waiting for the UI at a time.
    if (still_pending.count(id)) {
      *throttled = true;  // more to read once the UI has taken what waits
      more = true;
    } else {
      KP_RETURN_IF_ERROR(ReadBlocks(store, *found, c.blocks, &p.blocks, &more));
    }
    // The newest raw samples.
    const int64_t keep = static_cast<int64_t>(options_.tail_samples);
    if (c.tail_seq == -2) c.tail_seq = std::max<int64_t>(-1, found->sample_count - keep - 1);
    if (c.tail_seq + 1 < found->sample_count) {
      p.tail_first_seq = c.tail_seq + 1;
      KP_ASSIGN_OR_RETURN(p.tail, store.LoadSampleRange(id, c.tail_seq + 1, c.tail_seq + 1 + keep));
      c.tail_seq += static_cast<int64_t>(p.tail.size());
      if (c.tail_seq + 1 < found->sample_count) more = true;
    }
    if (auto ask = window_asks.find(id); ask != window_asks.end()) {
      p.has_window = true;
      p.window_first_seq = ask->second.first;
      KP_ASSIGN_OR_RETURN(p.window, store.LoadSampleRange(id, ask->second.first, ask->second.second));
    }
    p.row = *found;
    KP_ASSIGN_OR_RETURN(p.events, store.LoadEvents(id));
    KP_ASSIGN_OR_RETURN(p.steps, store.LoadSteps(id));
    if (found->outcome == Outcome::kRunning) {
      KP_ASSIGN_OR_RETURN(p.requests, store.PendingRequests(id));
    }
    // Metadata is handed over when it changed (or with the first read).
    size_t sig = std::hash<std::string>{}(fmt::format("{}|{}|{}|{}|{}|{}|{}", OutcomeName(found->outcome), found->reason, found->ended_at,
                                                      p.events.size(), p.steps.size(), p.requests.size(),
                                                      p.steps.empty() ? 0.0 : p.steps.back().ended_s.value_or(-1.0)));
    p.has_meta = p.reset || sig != c.meta_signature;
    c.meta_signature = sig;
    if (!p.has_meta && p.blocks.empty() && p.tail.empty() && !p.has_window) out.erase(id);
  }

  std::vector<RunListRow> rows;
  std::vector<std::tuple<int64_t, int, int64_t, int64_t, std::string>> signature;
  for (const RunRow& run : runs) {
    BlockCursor& c = list_cursors_[run.id];
    // A watched run was just read: its summaries serve the list too.
    if (auto w = watch_cursors_.find(run.id);
        w != watch_cursors_.end() && w->second.blocks.count_seen == run.sample_count && c.count_seen != run.sample_count)
      c = w->second.blocks;
    KP_RETURN_IF_ERROR(ReadBlocks(store, run, c, nullptr, &more));
    SampleSummary total = c.done;
    total.Merge(c.last);
    rows.push_back(MakeRunListRow(run, RunningFigures(total)));
    if (run.outcome == Outcome::kRunning) {
      // Running runs are few: their events say whether they are paused or held.
      KP_ASSIGN_OR_RETURN(auto events, store.LoadEvents(run.id));
      SetListState(rows.back(), StatusOf(run, events));
    }
    signature.emplace_back(run.id, static_cast<int>(rows.back().run_state), run.sample_count, total.count, rows.back().reason);
  }
  std::sort(rows.begin(), rows.end(), [](const RunListRow& a, const RunListRow& b) { return a.id > b.id; });
  const bool runs_changed = signature != runs_signature_;
  runs_signature_ = std::move(signature);

  std::lock_guard<std::mutex> lock(mu_);
  if (runs_changed) {
    runs_ = std::move(rows);
    runs_fresh_ = true;
  }
  if (runs_changed || !out.empty()) *news = true;
  if (watch != watch_) more = true;  // the watch set changed meanwhile (or a lab copy lacks a watched run)
  for (auto& [id, p] : out) {
    Pending& dst = pending_[id];
    if (p.reset) {
      dst = std::move(p);
      continue;
    }
    dst.blocks.insert(dst.blocks.end(), p.blocks.begin(), p.blocks.end());
    if (!p.tail.empty()) {
      if (dst.tail.empty()) dst.tail_first_seq = p.tail_first_seq;
      dst.tail.insert(dst.tail.end(), p.tail.begin(), p.tail.end());
    }
    if (p.has_window) {
      dst.has_window = true;
      dst.window_first_seq = p.window_first_seq;
      dst.window = std::move(p.window);
    }
    if (p.has_meta) {
      dst.has_meta = true;
      dst.row = std::move(p.row);
      dst.events = std::move(p.events);
      dst.steps = std::move(p.steps);
      dst.requests = std::move(p.requests);
    }
  }
  *caught_up = !more;
  return Status::Ok();
}

}  // namespace kp::ui
