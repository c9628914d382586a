#include "ui/panel/run_feed.h"

#include <gtest/gtest.h>

#include "analysis/metrics.h"
#include "drivers/clock.h"
#include "tests/support/test_support.h"

namespace kp::ui {
namespace {

NewRun LiveRun() {
  NewRun r;
  r.cell_name = "feed-cell-7";
  r.chemistry = "li-ion";
  r.rated_mah = 1000.0;
  r.procedure_name = "feed-check";
  r.procedure_text = "cell li-ion rated 1000 mAh cutoff 3.000 V max-temp 55 degC\n";
  r.rig = "sim";
  return r;
}

Sample At(int k) { return {k * 1.0, 4.0 - 0.0002 * k, 1.0, 25.0, 0}; }

// The reader thread follows a run that is still being written: what the
// panel holds after each drain equals the samples committed so far, and the
// running figures equal a batch recomputation over them.
TEST(RunFeed, FollowsALiveRunIncrementally) {
  testing::TempDir dir;
  VirtualClock clock;
  auto store = Store::Open(dir.File("feed.db"), clock);
  ASSERT_OK(store.status());
  auto run = (*store)->BeginRun(LiveRun());
  ASSERT_OK(run.status());
  std::vector<Sample> written;
  for (int k = 0; k < 3000; ++k) {
    written.push_back(At(k));
    ASSERT_OK((*store)->AppendSample(*run, written.back()));
  }
  ASSERT_OK((*store)->Commit());

  RunFeed::Options o;
  o.db_path = dir.File("feed.db");
  o.max_rows_per_poll = 7;  // block summaries per poll: several polls per batch exercise the cursor
  RunFeed feed(o);
  feed.Watch({*run});
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  FeedState state;
  feed.Drain(state);
  ASSERT_EQ(state.runs.size(), 1u);
  EXPECT_EQ(state.runs[0].state, "running");
  ASSERT_EQ(state.watched.count(*run), 1u);
  EXPECT_EQ(state.watched[*run].SampleCount(), 3000u);
  ASSERT_TRUE(state.watched[*run].limits.cutoff_v);
  EXPECT_DOUBLE_EQ(*state.watched[*run].limits.cutoff_v, 3.0);

  for (int k = 3000; k < 5000; ++k) {
    written.push_back(At(k));
    ASSERT_OK((*store)->AppendSample(*run, written.back()));
  }
  ASSERT_OK((*store)->AddEvent(*run, 4999.0, "fault", "meter stopped answering"));
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  feed.Drain(state);
  const RunData& d = state.watched[*run];
  ASSERT_EQ(d.SampleCount(), written.size());
  // The newest raw samples are all there (fewer than the tail keeps).
  ASSERT_EQ(d.tail.size(), written.size());
  EXPECT_EQ(d.tail_end_seq, static_cast<int64_t>(written.size()));
  for (size_t i = 0; i < written.size(); i += 997) EXPECT_DOUBLE_EQ(d.tail[i].t_s, written[i].t_s);
  RunFigures batch = ComputeRunFigures(written);
  EXPECT_NEAR(d.figures.charge_mah(), batch.charge_mah, 1e-9);
  EXPECT_NEAR(state.runs[0].delivered_mah, batch.charge_mah, 1e-9);
  // One overview element per block of samples, each band the block's range.
  const size_t blocks = (written.size() + kSamplesPerBlock - 1) / kSamplesPerBlock;
  ASSERT_EQ(d.overview.size(), blocks);
  for (size_t b = 0; b < blocks; ++b) {
    double lo = 1e9, hi = -1e9;
    for (size_t i = b * kSamplesPerBlock; i < std::min(written.size(), (b + 1) * kSamplesPerBlock); ++i) {
      lo = std::min(lo, written[i].voltage_v);
      hi = std::max(hi, written[i].voltage_v);
    }
    EXPECT_FLOAT_EQ(d.overview.voltage.MinAt(b), static_cast<float>(lo)) << b;
    EXPECT_FLOAT_EQ(d.overview.voltage.MaxAt(b), static_cast<float>(hi)) << b;
    EXPECT_DOUBLE_EQ(d.overview.t_s[b], written[b * kSamplesPerBlock].t_s);
  }
  ASSERT_EQ(d.events.size(), 1u);
  EXPECT_EQ(EventSeverity(d.events[0]), Severity::kAlarm);
}

// A long run is taken in over several frames: each Drain takes in at most the
// per-frame budget of block summaries, and the rest arrives intact on later frames.
TEST(RunFeed, BoundsTheWorkPerFrame) {
  testing::TempDir dir;
  VirtualClock clock;
  auto store = Store::Open(dir.File("long.db"), clock);
  ASSERT_OK(store.status());
  auto run = (*store)->BeginRun(LiveRun());
  ASSERT_OK(run.status());
  for (int k = 0; k < 2500; ++k) ASSERT_OK((*store)->AppendSample(*run, At(k)));
  ASSERT_OK((*store)->Commit());
  RunFeed::Options o;
  o.db_path = dir.File("long.db");
  o.max_append_per_frame = 8;  // 2500 samples are 20 blocks of 128
  RunFeed feed(o);
  feed.Watch({*run});
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  FeedState state;
  feed.Drain(state);
  EXPECT_EQ(state.watched[*run].overview.size(), 8u);
  EXPECT_EQ(state.watched[*run].SampleCount(), 8u * kSamplesPerBlock);
  EXPECT_EQ(state.Backlog(), 12u);
  feed.Drain(state);
  feed.Drain(state);
  const RunData& d = state.watched[*run];
  ASSERT_EQ(d.SampleCount(), 2500u);
  EXPECT_EQ(state.Backlog(), 0u);
  for (int k = 0; k < 2500; k += 499) {
    const size_t b = static_cast<size_t>(k) / kSamplesPerBlock;
    EXPECT_LE(d.overview.voltage.MinAt(b), static_cast<float>(At(k).voltage_v));
    EXPECT_GE(d.overview.voltage.MaxAt(b), static_cast<float>(At(k).voltage_v));
  }
}

// A zoomed window: the raw samples asked for, with the delivered charge
// continuing the overview's; a window that reaches the newest sample follows
// the live run; the panel's arrays stay a fraction of the samples.
TEST(RunFeed, FetchesRawSamplesOnlyForTheAskedWindow) {
  testing::TempDir dir;
  VirtualClock clock;
  auto store = Store::Open(dir.File("win.db"), clock);
  ASSERT_OK(store.status());
  auto run = (*store)->BeginRun(LiveRun());
  ASSERT_OK(run.status());
  std::vector<Sample> written;
  for (int k = 0; k < 30000; ++k) {
    written.push_back(At(k));
    ASSERT_OK((*store)->AppendSample(*run, written.back()));
  }
  ASSERT_OK((*store)->Commit());
  RunFeed::Options o;
  o.db_path = dir.File("win.db");
  o.tail_samples = 1000;
  RunFeed feed(o);
  feed.Watch({*run});
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  FeedState state;
  feed.Drain(state);
  const RunData& d = state.watched[*run];
  ASSERT_EQ(d.SampleCount(), written.size());
  EXPECT_EQ(d.window.size(), 0u);  // nothing raw but the tail until asked
  EXPECT_EQ(d.tail.size(), 1000u);
  EXPECT_DOUBLE_EQ(d.tail.front().t_s, written[29000].t_s);
  // Memory: the overview and the tail, not the samples.
  EXPECT_LT(d.Bytes(), written.size() * sizeof(double));

  const int64_t first = 10 * kSamplesPerBlock - 1, end = 20 * kSamplesPerBlock;
  feed.FetchWindow(*run, first, end);
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  feed.Drain(state);
  ASSERT_EQ(d.window.first_seq, first);
  ASSERT_EQ(d.window.size(), static_cast<size_t>(end - first));
  EXPECT_DOUBLE_EQ(d.window.t_s.front(), written[static_cast<size_t>(first)].t_s);
  EXPECT_DOUBLE_EQ(d.window.t_s.back(), written[static_cast<size_t>(end - 1)].t_s);
  EXPECT_FLOAT_EQ(d.window.voltage.At(5), static_cast<float>(written[static_cast<size_t>(first) + 5].voltage_v));
  std::vector<Sample> upto(written.begin(), written.begin() + end);
  EXPECT_NEAR(d.window.charge_mah.back(), ComputeRunFigures(upto).charge_mah, 1e-9);
  EXPECT_TRUE(d.window.Covers(written[1300].t_s, written[2500].t_s));
  EXPECT_FALSE(d.window.Covers(written[100].t_s, written[2500].t_s));

  // The newest stretch, then the run goes on: the window follows.
  const int64_t newest = 226 * kSamplesPerBlock - 1;  // 28927: the last sample of block 225
  feed.FetchWindow(*run, newest, 30000);
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  feed.Drain(state);
  ASSERT_EQ(d.window.end_seq(), 30000);
  for (int k = 30000; k < 30500; ++k) {
    written.push_back(At(k));
    ASSERT_OK((*store)->AppendSample(*run, written.back()));
  }
  ASSERT_OK((*store)->Commit());
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  feed.Drain(state);
  EXPECT_EQ(d.window.end_seq(), 30500);
  EXPECT_DOUBLE_EQ(d.window.t_s.back(), written.back().t_s);
  EXPECT_NEAR(d.window.charge_mah.back(), ComputeRunFigures(written).charge_mah, 1e-9);
  EXPECT_EQ(d.SampleCount(), written.size());
}

// A UI that does not drain holds the worker back (bounded memory), and the
// worker says so: it is not caught up until the waiting summaries are taken,
// and nothing is lost on the way.
TEST(RunFeed, WaitsForTheUiBeyondThePendingBound) {
  testing::TempDir dir;
  VirtualClock clock;
  auto store = Store::Open(dir.File("slow.db"), clock);
  ASSERT_OK(store.status());
  auto run = (*store)->BeginRun(LiveRun());
  ASSERT_OK(run.status());
  std::vector<Sample> written;
  for (int k = 0; k < 2500; ++k) {
    written.push_back(At(k));
    ASSERT_OK((*store)->AppendSample(*run, written.back()));
  }
  ASSERT_OK((*store)->Commit());
  RunFeed::Options o;
  o.db_path = dir.File("slow.db");
  o.max_rows_per_poll = 3;
  o.max_pending_blocks = 5;
  RunFeed feed(o);
  feed.Watch({*run});
  EXPECT_FALSE(feed.WaitCaughtUp(0.5));  // 20 blocks, at most 5 (+3) may wait
  FeedState state;
  int drains = 0;
  while (state.watched[*run].SampleCount() < written.size() && drains < 100) {
    feed.Drain(state);
    ++drains;
    feed.WaitCaughtUp(0.5);
  }
  EXPECT_GT(drains, 1);
  const RunData& d = state.watched[*run];
  ASSERT_EQ(d.SampleCount(), written.size());
  EXPECT_EQ(d.overview.size(), 20u);
  EXPECT_NEAR(d.figures.charge_mah(), ComputeRunFigures(written).charge_mah, 1e-9);
}

// The window and the tail are read in separate transactions: newer samples
// that overlap the window's end extend it once each, in order.
TEST(RunDataWindow, TailOverlappingTheWindowExtendsItOnce) {
  std::vector<Sample> all;
  for (int k = 0; k < 150; ++k) all.push_back(At(k));
  RunData d;
  d.SetWindow(0, std::vector<Sample>(all.begin(), all.begin() + 100));
  ASSERT_EQ(d.window.size(), 100u);
  d.AppendTail(90, std::vector<Sample>(all.begin() + 90, all.end()), 1000);
  ASSERT_EQ(d.window.size(), 150u);
  for (size_t i = 0; i < all.size(); ++i) ASSERT_DOUBLE_EQ(d.window.t_s[i], all[i].t_s) << i;
  EXPECT_NEAR(d.window.charge_mah.back(), ComputeRunFigures(all).charge_mah, 1e-9);
  EXPECT_EQ(d.tail.size(), 60u);
  EXPECT_EQ(d.tail_end_seq, 150);
  // Samples that do not continue it (a gap in what was read) leave it alone.
  d.AppendTail(400, {At(400)}, 1000);
  EXPECT_EQ(d.window.size(), 150u);
  EXPECT_EQ(d.tail.size(), 1u);
}

// Requests from the panel land in the database for the runner to act on.
TEST(RunFeed, RequestsGoThroughTheStore) {
  testing::TempDir dir;
  VirtualClock clock;
  auto store = Store::Open(dir.File("req.db"), clock);
  ASSERT_OK(store.status());
  auto run = (*store)->BeginRun(LiveRun());
  ASSERT_OK(run.status());
  ASSERT_OK((*store)->Commit());
  {
    RunFeed::Options o;
    o.db_path = dir.File("req.db");
    RunFeed feed(o);
    feed.Watch({*run});
    feed.Request(*run, "pause");
    feed.Request(*run, "abort");
    ASSERT_TRUE(feed.WaitCaughtUp(30.0));
    FeedState state;
    feed.Drain(state);
    ASSERT_FALSE(state.notes.empty());
    EXPECT_NE(state.notes.back().find("abort requested for run"), std::string::npos);
    // The panel shows them as waiting until the runner handles them.
    ASSERT_EQ(state.watched[*run].requests.size(), 2u);
    ASSERT_OK((*store)->MarkRequestHandled(state.watched[*run].requests[0].id));
    ASSERT_TRUE(feed.WaitCaughtUp(30.0));
    feed.Drain(state);
    ASSERT_EQ(state.watched[*run].requests.size(), 1u);
    EXPECT_EQ(state.watched[*run].requests[0].action, "abort");
  }
  auto pending = (*store)->PendingRequests(*run);
  ASSERT_OK(pending.status());
  ASSERT_EQ(pending->size(), 1u);
  EXPECT_EQ((*pending)[0].action, "abort");
  EXPECT_EQ((*pending)[0].requested_by, "panel");
}

TEST(RunFeed, MissingDatabaseIsReportedNotCreated) {
  testing::TempDir dir;
  RunFeed::Options o;
  o.db_path = dir.File("absent.db");
  o.poll_s = 0.01;
  RunFeed feed(o);
  EXPECT_FALSE(feed.WaitCaughtUp(0.5));
  FeedState state;
  feed.Drain(state);
  EXPECT_FALSE(state.connected);
  ASSERT_FALSE(state.notes.empty());
  EXPECT_NE(state.notes[0].find("absent.db"), std::string::npos);
  EXPECT_FALSE(std::filesystem::exists(o.db_path));
}

}  // namespace
}  // namespace kp::ui

namespace kp::ui {
namespace {

// The compare view's overlay: a charge, a rest, a discharge and a rest after
// it, one sample a second. The overlay holds the discharge's whole blocks
// only, charge counted from its start, and the mean voltage of those blocks
// equals a batch trapezoid over their samples (written here).
TEST(DischargeOverlay, CutsTheLatestDischargeOutOfTheOverview) {
  std::vector<Sample> s;
  auto add = [&](double t, double v, double i, int step) { s.push_back({t, v, i, 25.0, step}); };
  double t = 0;
  for (; t < 3000; t += 1) add(t, 4.0 + t * 1e-5, -1.0, 0);      // charge at 1 A
  for (; t < 4000; t += 1) add(t, 4.1, 0.0, 1);                  // rest
  for (; t < 9000; t += 1) add(t, 4.0 - (t - 4000) * 1e-4, 0.5, 2);  // discharge at 0.5 A
  for (; t < 10000; t += 1) add(t, 3.7, 0.0, 3);                 // rest after it
  RunOverview o;
  for (size_t b = 0; b * kSamplesPerBlock < s.size(); ++b) {
    SampleBlock blk;
    blk.index = static_cast<int64_t>(b);
    for (size_t k = b * kSamplesPerBlock; k < std::min(s.size(), (b + 1) * kSamplesPerBlock); ++k) blk.summary.Add(s[k]);
    o.Put(blk);
  }
  std::vector<StepRow> steps(4);
  const char* kinds[] = {"charge", "rest", "constant-current discharge", "rest"};
  const double starts[] = {0, 2999, 3999, 8999}, ends[] = {2999, 3999, 8999, 9999};
  for (int k = 0; k < 4; ++k) {
    steps[k].seq = k;
    steps[k].index = k;
    steps[k].kind = kinds[k];
    steps[k].started_s = starts[k];
    steps[k].ended_s = ends[k];
    steps[k].cycle = 1;
  }
  steps[2].end_reason = "voltage 3.500 V <= 3.500 V";
  auto span = LatestDischarge(steps, 9999);
  ASSERT_TRUE(span.has_value());
  EXPECT_DOUBLE_EQ(span->start_s, 3999);
  EXPECT_DOUBLE_EQ(span->end_s, 8999);  // the rest after it is not the discharge
  DischargeOverlay d = OverlayOfDischarge(o, span->start_s, span->end_s);
  ASSERT_FALSE(d.t_s.empty());
  EXPECT_GE(d.t_s.front(), 0.0);
  EXPECT_LE(d.t_end_s.back(), 5000.0);
  // Charge from the discharge's start: never the charge phase's negative net.
  EXPECT_GT(d.charge_mah.front(), 0.0);
  EXPECT_NEAR(d.charge_mah.back(), 0.5 * d.t_end_s.back() / 3.6, 0.5 * 2 * kSamplesPerBlock / 3.6);
  // Mean voltage between the block boundaries at or before each end.
  double a = 0, b = 0;
  for (size_t k = 0; k < o.size(); ++k) {
    if (o.t_end_s[k] <= 3999) a = o.t_end_s[k];
    if (o.t_end_s[k] <= 8999) b = o.t_end_s[k];
  }
  double vs = 0, span_s = 0;
  for (size_t k = 1; k < s.size(); ++k)
    if (s[k].t_s > a && s[k].t_s <= b) {
      vs += 0.5 * (s[k].voltage_v + s[k - 1].voltage_v) * (s[k].t_s - s[k - 1].t_s);
      span_s += s[k].t_s - s[k - 1].t_s;
    }
  ASSERT_TRUE(d.mean_voltage_v.has_value());
  EXPECT_NEAR(*d.mean_voltage_v, vs / span_s, 1e-9);
  EXPECT_LT(*d.mean_voltage_v, 4.0);  // not lifted by the charge phase's 4.0+ V
}

}  // namespace
}  // namespace kp::ui

namespace kp::ui {
namespace {

// Per-cycle rows from the step records and the overview: two cycles of a
// 1 A charge for 2000 s then a 0.5 A discharge for 3000 s (Q = I·t, common
// practice, no source), to within one block of samples at each edge.
TEST(CycleRows, ChargeAndDischargePerCycle) {
  std::vector<Sample> s;
  std::vector<StepRow> steps;
  double t = 0;
  for (int cyc = 1; cyc <= 2; ++cyc) {
    for (int part = 0; part < 2; ++part) {
      StepRow r;
      r.seq = static_cast<int64_t>(steps.size());
      r.index = part;
      r.kind = part == 0 ? "charge" : "constant-current discharge";
      r.started_s = t;
      r.cycle = cyc;
      const double len = part == 0 ? 2000 : 3000;
      for (double e = t + len; t < e; t += 1) s.push_back({t + 1, 3.8, part == 0 ? -1.0 : 0.5, 25.0, part});
      r.ended_s = t;
      steps.push_back(r);
    }
  }
  RunOverview o;
  for (size_t b = 0; b * kSamplesPerBlock < s.size(); ++b) {
    SampleBlock blk;
    blk.index = static_cast<int64_t>(b);
    for (size_t k = b * kSamplesPerBlock; k < std::min(s.size(), (b + 1) * kSamplesPerBlock); ++k) blk.summary.Add(s[k]);
    o.Put(blk);
  }
  auto rows = CycleRows(o, steps, t);
  ASSERT_EQ(rows.size(), 2u);
  const double block_mah = kSamplesPerBlock * 1.0 / 3.6;
  for (const CycleRow& r : rows) {
    EXPECT_NEAR(r.charged_mah, 2000 / 3.6, 2 * block_mah);
    EXPECT_NEAR(r.discharged_mah, 0.5 * 3000 / 3.6, 2 * block_mah);
    ASSERT_TRUE(r.coulombic.has_value());
    EXPECT_NEAR(*r.coulombic, r.discharged_mah / r.charged_mah, 1e-12);
  }
  EXPECT_DOUBLE_EQ(*rows[0].retention, 1.0);
  EXPECT_TRUE(CycleRows(o, {steps[1]}, t).empty());  // no charge step: no cycle table
  // With the charge each ended step recorded, the rows take it exactly.
  for (StepRow& r : steps) r.charge_mah = r.kind == "charge" ? -2000 / 3.6 : 0.5 * 3000 / 3.6;
  rows = CycleRows(o, steps, t);
  ASSERT_EQ(rows.size(), 2u);
  EXPECT_DOUBLE_EQ(rows[1].charged_mah, 2000 / 3.6);
  EXPECT_DOUBLE_EQ(rows[1].discharged_mah, 0.5 * 3000 / 3.6);
  EXPECT_DOUBLE_EQ(*rows[1].coulombic, 0.75);
}

}  // namespace
}  // namespace kp::ui

namespace kp::ui {
namespace {

// A note typed in the panel reaches the database through the feed's worker,
// as a timestamped `note` event of the run.
TEST(RunFeed, WritesTheNotesThePanelQueues) {
  testing::TempDir dir;
  SteadyClock wall;
  int64_t id = 0;
  {
    auto store = Store::Open(dir.File("notes.db"), wall);
    ASSERT_OK(store.status());
    auto run = (*store)->BeginRun(LiveRun());
    ASSERT_OK(run.status());
    id = *run;
    ASSERT_OK((*store)->FinishRun(id, Outcome::kCompleted, "done"));
  }
  RunFeed::Options o;
  o.db_path = dir.File("notes.db");
  {
    RunFeed feed(o);
    feed.AddNote(id, "lid closed at 14:02");
    ASSERT_TRUE(feed.WaitCaughtUp(30.0));
    FeedState state;
    feed.Drain(state);
  }
  auto store = Store::Open(dir.File("notes.db"), wall);
  ASSERT_OK(store.status());
  auto notes = (*store)->LoadNotes(id);
  ASSERT_OK(notes.status());
  ASSERT_EQ(notes->size(), 1u);
  EXPECT_EQ((*notes)[0].message, "lid closed at 14:02");
}

}  // namespace
}  // namespace kp::ui
