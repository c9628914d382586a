#include "ui/cli/demo_campaign.h"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>

#include <fmt/format.h>

#include "analysis/svg_plot.h"
#include "drivers/clock.h"
#include "drivers/lockstep_clock.h"
#include "drivers/sim/cell_file.h"
#include "drivers/sim/multi_bench.h"
#include "procedures/estimate.h"
#include "procedures/procedure_parser.h"
#include "rig/bench_run.h"
#include "rig/channel_bench.h"
#include "rig/rig_file.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "ui/cli/demo_procedures.h"
#include "ui/report/batch_report.h"
#include "ui/report/run_report.h"

namespace kp {
namespace {

// The invented batch: cell k of the batch is the built-in Li-ion preset varied
// by its spread with seed kBatchSeed * 1000 + k, so the same k gives the same
// cell on every run of the demo.
constexpr uint64_t kBatchSeed = 2026;
uint64_t CellSeed(int index) { return kBatchSeed * 1000 + static_cast<uint64_t>(index); }

// The failing cell starts heating itself this long into its run (simulated
// seconds): after the 5 min rest, one minute into the 1 It discharge.
constexpr double kRunawayStartS = 360.0;

Result<std::string_view> ProcedureText(std::string_view file) {
  for (const embedded::EmbeddedText& p : embedded::kDemoProcedures)
    if (p.file == file) return p.text;
  return NotFound(fmt::format("no demo procedure '{}'", file));
}

Status WriteFile(const std::filesystem::path& path, const std::string& text) {
  std::ofstream f(path, std::ios::binary | std::ios::trunc);
  if (!f) return IoError(fmt::format("cannot write '{}'", path.string()));
  f << text;
  f.close();
  if (!f) return IoError(fmt::format("cannot write '{}'", path.string()));
  return Status::Ok();
}

struct PlannedRun {
  std::string part;
  std::string file;
  std::string cell;
  Plan plan;
  double estimate_s = 0.0;
  ReportOptions report;
};

class Campaign {
 public:
  Campaign(const DemoOptions& options, Store& store) : options_(options), store_(store) {}

  Status Plan(const std::string& part, const std::string& file, const std::string& cell, const ReportOptions& report = {}) {
    KP_ASSIGN_OR_RETURN(std::string_view text, ProcedureText(file));
    KP_ASSIGN_OR_RETURN(kp::Plan plan, CompileProcedure(text, "procedures/library/demo/" + file));
    PlannedRun p{part, file, cell, std::move(plan), 0.0, report};
    PlanEstimate est = EstimatePlan(p.plan);
    p.estimate_s = std::max(1.0, est.total_s);
    total_estimate_s_ += p.estimate_s;
    planned_.push_back(std::move(p));
    return Status::Ok();
  }

  const PlannedRun& planned(size_t i) const { return planned_[i]; }

  // Runs planned run `i` on `rig`, then analyses it from the store and writes its page.
  Result<DemoRun> Run(size_t i, SimRig& rig, Clock& clock) {
    const PlannedRun& p = planned_[i];
    RunController controller(store_, clock, rig.roles());
    RunOptions ro;
    ro.cell_name = p.cell;
    ro.stop = options_.stop;
    double done = done_estimate_s_;
    double est = p.estimate_s;
    ro.on_sample = [&](const Reading& r, double) {
      if (options_.on_progress) options_.on_progress((done + std::min(r.t_s, est)) / total_estimate_s_, p.part);
    };
    KP_ASSIGN_OR_RETURN(RunResult result, controller.Execute(p.plan, ro));
    done_estimate_s_ += est;
    if (options_.on_progress) options_.on_progress(done_estimate_s_ / total_estimate_s_, p.part);

    KP_ASSIGN_OR_RETURN(RunReport rep, BuildRunReport(store_, result.run_id, p.report));
    KP_RETURN_IF_ERROR(RecordVerdict(store_, rep));
    DemoRun run;
    run.run_id = result.run_id;
    run.part = p.part;
    run.cell = p.cell;
    run.procedure = p.file;
    run.outcome = rep.run.outcome;
    run.reason = rep.run.reason;
    run.discharge_mah = rep.analysis.discharge_charge_mah;
    run.discharge_wh = rep.analysis.discharge_energy_wh;
    run.discharge_h = rep.analysis.discharge_duration_s / 3600.0;
    run.mean_voltage_v = rep.analysis.mean_voltage_v;
    run.max_temperature_c = rep.analysis.max_temperature_c;
    run.samples = static_cast<int64_t>(rep.figures.sample_count);
    run.virtual_s = rep.figures.duration_s;  // the record starts at t = 0
    run.report_file = fmt::format("run-{}.html", result.run_id);
    KP_RETURN_IF_ERROR(WritePage(run.report_file, RunReportHtml(rep)));
    reports_.push_back(std::move(rep));
    return run;
  }

  const RunReport& last_report() const { return reports_.back(); }

  Status WritePage(const std::string& name, const std::string& html) {
    KP_RETURN_IF_ERROR(WriteFile(std::filesystem::path(options_.report_dir) / name, html));
    pages_.push_back(name);
    return Status::Ok();
  }
  std::vector<std::string> pages() const { return pages_; }

 private:
  const DemoOptions& options_;
  Store& store_;
  std::vector<PlannedRun> planned_;
  std::vector<RunReport> reports_;
  std::vector<std::string> pages_;
  double total_estimate_s_ = 0.0;
  double done_estimate_s_ = 0.0;
};

// The product's duty cycle as the life projection needs it, from the plan's
// duty-cycle step (real durations; compressed phases marked).
std::optional<DutyProfile> ProfileFromPlan(const Plan& plan) {
  for (const Step& s : plan.steps) {
    if (s.kind != StepKind::kDutyCycle) continue;
    DutyProfile d;
    for (const Segment& seg : s.segments) {
      d.levels.push_back({seg.level, seg.real_duration_s, seg.compressed()});
      if (seg.compressed() && seg.duration_s > 0) d.compression_factor = seg.real_duration_s / seg.duration_s;
    }
    return d;
  }
  return std::nullopt;
}

std::string Esc(const std::string& s) { return XmlEscape(s); }

std::string IndexHtml(const DemoFigures& f) {
  std::string o;
  o += "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n";
  o += "<head><meta charset=\"UTF-8\"/><title>Kneepoint demo campaign</title>\n";
  o += "<style>body{font-family:sans-serif;max-width:70em;margin:1em auto;color:#222}"
       "table{border-collapse:collapse}td,th{border:1px solid #bbb;padding:.2em .5em;text-align:right}"
       "td.t,th{text-align:left}.bad{color:#b00}</style></head>\n<body>\n";
  o += "<h1>Kneepoint demo campaign</h1>\n";
  o += "<p>Incoming qualification of LN-2500 Li-ion cells (an invented cell code) for a field sensor node, run on the "
       "built-in simulated rig in virtual time. Every figure here was computed from the samples logged in the database.</p>\n";
  o += "<h2>Runs</h2>\n<table><tr><th>run</th><th>plan item</th><th>cell</th><th>outcome</th><th>discharge mAh</th>"
       "<th>Wh</th><th>hours</th><th>mean V</th><th>max &#176;C</th><th>samples</th><th>report</th></tr>\n";
  for (const DemoRun& r : f.runs) {
    o += fmt::format(
        "<tr><td>{}</td><td class=\"t\">{}</td><td class=\"t\">{}</td><td class=\"t{}\">{}</td><td data-figure=\"run{}.mah\" "
        "data-value=\"{:.17g}\">{:.0f}</td><td>{:.2f}</td><td>{:.2f}</td><td>{:.3f}</td><td>{:.1f}</td><td>{}</td>"
        "<td class=\"t\"><a href=\"{}\">{}</a></td></tr>\n",
        r.run_id, Esc(r.part), Esc(r.cell), r.outcome == Outcome::kCompleted ? "" : " bad", OutcomeName(r.outcome), r.run_id,
        r.discharge_mah, r.discharge_mah, r.discharge_wh, r.discharge_h, r.mean_voltage_v, r.max_temperature_c, r.samples,
        Esc(r.report_file), Esc(r.report_file));
  }
  o += "</table>\n";
  o += "<h2>Q1 Rated capacity</h2>\n";
  o += fmt::format("<p>Measured {:.0f} mAh at 0.2 It against a datasheet claim of {:.0f} mAh: {:.1f} % of rated. {}</p>\n",
                   f.measured_mah, f.rated_mah, f.percent_of_rated, Esc(f.verdict_text));
  if (f.batch_mate_run > 0)
    o += fmt::format("<p>Cell 2 of the same batch, discharged at the same 0.2 It in its Peukert series (run {}), delivered "
                     "{:.1f} % of the claim: one cell's verdict sits inside the batch's spread.</p>\n",
                     f.batch_mate_run, f.batch_mate_percent);
  o += "<h2>Q2 The product's load</h2>\n";
  o += fmt::format("<p>Duty cycle {:.0f} mAh, 2 A pulses {:.0f} mAh, 2 A continuous {:.0f} mAh. "
                   "<a href=\"compare-product-load.html\">Comparison table and overlays</a>.</p>\n",
                   f.duty_mah, f.pulsed_mah, f.continuous_mah);
  if (!f.ratios.empty()) {
    o += "<table><tr><th>pulsed</th><th>continuous</th><th>basis</th><th>capacity ratio</th><th>energy ratio</th></tr>\n";
    for (const RatioFigures& r : f.ratios)
      o += fmt::format("<tr><td class=\"t\">{}</td><td class=\"t\">{}</td><td class=\"t\">{}</td><td>{:.3f}</td><td>{:.3f}</td></tr>\n",
                       Esc(r.pulsed_label), Esc(r.continuous_label), Esc(r.basis), r.capacity_ratio, r.energy_ratio);
    o += "</table>\n";
  }
  o += "<h2>Q3 DC internal resistance over depth of discharge</h2>\n<table><tr><th>depth of discharge %</th><th>R mOhm</th></tr>\n";
  for (const DcirPoint& p : f.dcir)
    o += fmt::format("<tr><td>{:.0f}</td><td>{:.1f}</td></tr>\n", p.depth_of_discharge * 100.0, p.resistance_ohm * 1000.0);
  o += "</table>\n";
  o += "<h2>Q4 Peukert series (cell 2 of the batch)</h2>\n";
  if (f.peukert)
    o += fmt::format("<p>Fitted exponent k = {:.3f} (R&#178; = {:.4f}, {} points). "
                     "<a href=\"compare-peukert.html\">Comparison table and overlays</a>.</p>\n",
                     f.peukert->exponent_k, f.peukert->r_squared, f.peukert->points);
  o += "<h2>Q5 Product life</h2>\n";
  if (f.life)
    o += fmt::format("<p>{:.0f} mAh at a mean {:.3f} mA: {:.0f} h = {:.0f} days.</p>\n", f.life->capacity_mah,
                     f.life->average_current_a * 1000.0, f.life->hours, f.life->hours / 24.0);
  if (f.life) {
    o += "<ul>\n";
    for (const std::string& a : f.life->assumptions) o += "<li>" + Esc(a) + "</li>\n";
    o += "</ul>\n";
  }
  o += "<h2>Q6 The failing cell</h2>\n";
  o += fmt::format("<p>Run {} {}: {}. Load input after the abort: {} ({:.3f} A). Hottest reading {:.1f} &#176;C.</p>\n",
                   f.failing_run, OutcomeName(f.failing_outcome), Esc(f.failing_reason), f.failing_load_on_after ? "ON" : "off",
                   f.failing_load_current_after_a, f.failing_max_temperature_c);
  o += "<h2>Q7 Batch qualification on a four-channel bench</h2>\n";
  if (f.batch_capacity.n > 0)
    o += fmt::format("<p>Cells 4 to 7 of the lot ({}) at once, one channel each: mean {:.0f} mAh, standard deviation {:.1f} mAh, "
                     "{:.0f} to {:.0f} mAh; {} of {} pass; {} outlier(s). <a href=\"{}\">Batch report</a>.</p>\n",
                     Esc(f.batch_name), f.batch_capacity.mean, f.batch_capacity.stddev.value_or(0.0), f.batch_capacity.min,
                     f.batch_capacity.max, f.batch_passes, f.batch_runs.size(), f.batch_outliers, Esc(f.batch_page));
  o += "</body>\n</html>\n";
  return o;
}

// Plan item Q7's bench: one multi-channel load, scanner, thermometer and
// supply of the simulator (both channel-select styles), four cell positions.
constexpr const char* kDemoBench = R"([bench]
name = "demo four-channel bench"
max_current_a = 5.0
max_voltage_v = 4.3

[[instrument]]
name = "mload"
address = "tcp:127.0.0.1:5025"
profile = "kneepoint-sim-select"
roles = ["load"]
confirm_writes = true

[[instrument]]
name = "scanner"
address = "tcp:127.0.0.1:5026"
profile = "kneepoint-sim-chlist"
roles = ["meter"]

[[instrument]]
name = "tlog"
address = "tcp:127.0.0.1:5027"
profile = "kneepoint-sim-chlist"
roles = ["thermometer"]

[[instrument]]
name = "psu"
address = "tcp:127.0.0.1:5028"
profile = "kneepoint-sim-select"
roles = ["supply"]
confirm_writes = true

[[channel]]
slot = "B1"
load = "mload#1"
sense = "scanner#1"
temperature = "tlog#1"
supply = "psu#1"

[[channel]]
slot = "B2"
load = "mload#2"
sense = "scanner#2"
temperature = "tlog#2"
supply = "psu#2"

[[channel]]
slot = "B3"
load = "mload#3"
sense = "scanner#3"
temperature = "tlog#3"
supply = "psu#3"

[[channel]]
slot = "B4"
load = "mload#4"
sense = "scanner#4"
temperature = "tlog#4"
supply = "psu#4"

[enclosure]
sensor = "tlog#0"
max_c = 45
)";

}  // namespace

Status PrepareDemoDb(const std::string& path) {
  std::error_code ec;
  if (!std::filesystem::exists(path, ec)) return Status::Ok();
  {
    SteadyClock wall;
    Store::Options o;
    o.create = false;
    auto store = Store::Open(path, wall, o);
    if (!store.ok()) return InvalidInput(fmt::format("'{}' exists and is not a kneepoint database; choose another --db", path));
  }
  for (const char* suffix : {"", "-wal", "-shm"}) std::filesystem::remove(path + suffix, ec);
  return Status::Ok();
}

Result<DemoFigures> RunDemoCampaign(const DemoOptions& options) {
  KP_RETURN_IF_ERROR(PrepareDemoDb(options.db_path));
  std::error_code ec;
  std::filesystem::create_directories(options.report_dir, ec);
  if (ec) return IoError(fmt::format("cannot create '{}': {}", options.report_dir, ec.message()));
  SteadyClock wall;
  KP_ASSIGN_OR_RETURN(std::unique_ptr<Store> store, Store::Open(options.db_path, wall));

  KP_ASSIGN_OR_RETURN(sim::CellPreset preset, sim::BuiltInCell("li-ion"));
  Campaign c(options, *store);
  const std::string cell1 = "LN-2500 #1", cell2 = "LN-2500 #2", cell3 = "LN-2500 #3";
  KP_RETURN_IF_ERROR(c.Plan("Q1 rated capacity", "rated-capacity.kpp", cell1));
  KP_RETURN_IF_ERROR(c.Plan("Q2 duty cycle", "node-duty-cycle.kpp", cell1));
  KP_RETURN_IF_ERROR(c.Plan("Q2 pulses at 2 A", "node-peak-pulses.kpp", cell1));
  KP_RETURN_IF_ERROR(c.Plan("Q2 continuous 2 A", "node-peak-continuous.kpp", cell1));
  // U2 at the end of the 1 s I2 pulse (IEC 61960-3 clause 7.7, secondary
  // source): the report's 1 s delay meets the pulse's falling edge, so
  // MeasureDcir reads the pulse's last reading, 0.9 s after the edge.
  KP_RETURN_IF_ERROR(c.Plan("Q3 DC-IR sweep", "dcir-over-dod.kpp", cell1));
  KP_RETURN_IF_ERROR(c.Plan("Q4 rate 0.5 A", "rate-0a5.kpp", cell2));
  KP_RETURN_IF_ERROR(c.Plan("Q4 rate 1 A", "rate-1a.kpp", cell2));
  KP_RETURN_IF_ERROR(c.Plan("Q4 rate 2 A", "rate-2a.kpp", cell2));
  KP_RETURN_IF_ERROR(c.Plan("Q4 rate 3 A", "rate-3a.kpp", cell2));
  KP_RETURN_IF_ERROR(c.Plan("Q6 failing cell", "failing-cell.kpp", cell3));

  DemoFigures f;
  f.self_discharge_per_month = preset.params.self_discharge_per_month;

  // Cell 1: plan items Q1-Q3, one SimRig so the cell's state carries over.
  {
    VirtualClock clock;
    SimRig rig(clock, sim::VaryCell(preset.params, preset.spread, CellSeed(1)));
    for (size_t i = 0; i <= 4; ++i) {
      KP_ASSIGN_OR_RETURN(DemoRun run, c.Run(i, rig, clock));
      const RunReport& rep = c.last_report();
      if (i == 0) {
        f.rated_mah = rep.run.rated_mah;
        f.measured_mah = run.discharge_mah;
        f.percent_of_rated = rep.analysis.verdict.percent_of_rated;
        f.capacity_pass = rep.analysis.verdict.capacity_pass;
        f.verdict_text = rep.analysis.verdict.text;
      } else if (i == 1) {
        f.duty_run = run.run_id;
        f.duty_mah = run.discharge_mah;
      } else if (i == 2) {
        f.pulsed_run = run.run_id;
        f.pulsed_mah = run.discharge_mah;
      } else if (i == 3) {
        f.continuous_run = run.run_id;
        f.continuous_mah = run.discharge_mah;
      } else {
        // The two-current pairs: an up-edge from a non-zero first current.
        for (const DcirPoint& p : rep.analysis.dcir)
          if (p.i1_a > 0.05 && p.i2_a > p.i1_a + 0.05) f.dcir.push_back(p);
      }
      f.runs.push_back(std::move(run));
    }
  }
  {
    KP_ASSIGN_OR_RETURN(CompareReport cmp, BuildCompareReport(*store, {f.duty_run, f.pulsed_run, f.continuous_run}, std::nullopt));
    f.ratios = cmp.ratios;
    KP_RETURN_IF_ERROR(c.WritePage("compare-product-load.html", CompareReportHtml(cmp)));
  }

  // Cell 2 of the same batch: the Peukert series.
  std::vector<int64_t> peukert_runs;
  {
    VirtualClock clock;
    SimRig rig(clock, sim::VaryCell(preset.params, preset.spread, CellSeed(2)));
    for (size_t i = 5; i <= 8; ++i) {
      KP_ASSIGN_OR_RETURN(DemoRun run, c.Run(i, rig, clock));
      const RunAnalysis& a = c.last_report().analysis;
      if (f.rated_mah > 0 && std::abs(a.average_current_a - 0.2 * f.rated_mah / 1000.0) < 0.01 * 0.2 * f.rated_mah / 1000.0) {
        f.batch_mate_run = run.run_id;
        f.batch_mate_percent = 100.0 * run.discharge_mah / f.rated_mah;
      }
      peukert_runs.push_back(run.run_id);
      f.runs.push_back(std::move(run));
    }
  }
  {
    KP_ASSIGN_OR_RETURN(CompareReport cmp, BuildCompareReport(*store, peukert_runs, std::nullopt));
    f.rate_points = RatePointsFromRuns(cmp.summaries);
    f.peukert = cmp.peukert.fit;
    KP_RETURN_IF_ERROR(c.WritePage("compare-peukert.html", CompareReportHtml(cmp)));
  }

  // Plan item Q5: the product's life from the capacity measured under its own duty
  // cycle, at the profile's real (uncompressed) mean current.
  if (std::optional<DutyProfile> profile = ProfileFromPlan(c.planned(1).plan)) {
    f.profile = *profile;
    LifeInputs in;
    in.capacity_mah = f.duty_mah;
    in.average_current_a = ProfileAverageCurrentA(*profile);
    in.self_discharge_per_month = f.self_discharge_per_month;
    LifeOutcome life = ProjectLife(in);
    if (life.projection) {
      f.life = *life.projection;
      f.life->assumptions.push_back(fmt::format(
          "the capacity was measured with the sleep phase compressed {:.0f}x (test mean {:.0f} mA), a harder load than the "
          "product's; the real cell may deliver somewhat more",
          profile->compression_factor, ProfileTestAverageCurrentA(*profile) * 1000.0));
    }
  }

  // Cell 3: the simulator's thermal-runaway fault; the limit must abort it.
  {
    VirtualClock clock;
    sim::SimOptions so;
    so.runaway_start_s = kRunawayStartS;
    SimRig rig(clock, sim::VaryCell(preset.params, preset.spread, CellSeed(3)), so);
    KP_ASSIGN_OR_RETURN(DemoRun run, c.Run(9, rig, clock));
    f.failing_run = run.run_id;
    f.failing_outcome = run.outcome;
    f.failing_reason = run.reason;
    f.failing_max_temperature_c = run.max_temperature_c;
    f.failing_load_on_after = rig.bench().load_input_on();
    f.failing_load_current_after_a = rig.bench().load_current_a();
    f.runs.push_back(std::move(run));
  }

  // Cells 4-7 of the lot: plan item Q7, four at once on a four-channel bench.
  {
    f.batch_name = "LN-2500 lot A";
    LockstepClock clock;
    std::vector<sim::CellParams> cells;
    for (int k = 0; k < 4; ++k) cells.push_back(sim::VaryCell(preset.params, preset.spread, CellSeed(4 + k)));
    sim::SimMultiBench multi(std::move(cells), clock);
    KP_ASSIGN_OR_RETURN(RigFileSpec spec, ParseRigFile(kDemoBench, "demo-bench.toml"));
    BenchOpenOptions bo;
    bo.rig.clock = &clock;
    bo.connect = ConnectToSimBench(multi, clock, "sim:");
    KP_ASSIGN_OR_RETURN(std::unique_ptr<ChannelBench> bench, OpenChannelBench(spec, bo));
    const kp::Plan& plan = c.planned(0).plan;  // the rated-capacity check of Q1
    std::vector<ChannelJob> jobs;
    for (int k = 0; k < 4; ++k) {
      ChannelJob j;
      j.channel = k;
      j.plan = &plan;
      j.options.cell_name = fmt::format("LN-2500 #{}", 4 + k);
      j.options.record.cell_serial = fmt::format("LN25-A-{:03}", 4 + k);
      j.options.record.cell_lot = "A";
      j.options.record.tags = {"slot=" + bench->channel(k).slot, "batch=" + f.batch_name};
      j.options.stop = options.stop;
      jobs.push_back(std::move(j));
    }
    BenchRunOptions bro;
    bro.db_path = options.db_path;
    bro.stop = options.stop;
    bro.take_locks = false;  // the simulated instruments live in this process
    bro.control = false;
    KP_ASSIGN_OR_RETURN(std::vector<ChannelOutcome> outcomes, RunBench(*bench, std::move(jobs), bro));
    for (size_t k = 0; k < outcomes.size(); ++k) {
      const ChannelOutcome& o = outcomes[k];
      KP_RETURN_IF_ERROR(o.status);
      KP_ASSIGN_OR_RETURN(RunReport rep, BuildRunReport(*store, o.result.run_id));
      KP_RETURN_IF_ERROR(RecordVerdict(*store, rep));
      DemoRun run;
      run.run_id = o.result.run_id;
      run.part = "Q7 batch " + o.slot;
      run.cell = rep.run.cell;
      run.procedure = c.planned(0).file;
      run.outcome = rep.run.outcome;
      run.reason = rep.run.reason;
      run.discharge_mah = rep.analysis.discharge_charge_mah;
      run.discharge_wh = rep.analysis.discharge_energy_wh;
      run.discharge_h = rep.analysis.discharge_duration_s / 3600.0;
      run.mean_voltage_v = rep.analysis.mean_voltage_v;
      run.max_temperature_c = rep.analysis.max_temperature_c;
      run.samples = static_cast<int64_t>(rep.figures.sample_count);
      run.virtual_s = rep.figures.duration_s;
      run.report_file = fmt::format("run-{}.html", o.result.run_id);
      KP_RETURN_IF_ERROR(c.WritePage(run.report_file, RunReportHtml(rep)));
      f.batch_runs.push_back(run.run_id);
      f.runs.push_back(std::move(run));
    }
    KP_ASSIGN_OR_RETURN(BatchReport batch, BuildBatchReport(*store, f.batch_name));
    f.batch_capacity = batch.capacity;
    for (const BatchCell& cell : batch.cells) {
      f.batch_passes += cell.verdict == "pass" ? 1 : 0;
      f.batch_outliers += cell.capacity_outlier || cell.resistance_outlier ? 1 : 0;
    }
    f.batch_page = "batch-lot-a.html";
    KP_RETURN_IF_ERROR(c.WritePage(f.batch_page, BatchReportHtml(batch)));
    if (options.on_progress) options.on_progress(1.0, "Q7 batch");
  }

  for (const DemoRun& r : f.runs) f.virtual_hours += r.virtual_s / 3600.0;
  KP_RETURN_IF_ERROR(c.WritePage("index.html", IndexHtml(f)));
  f.pages = c.pages();
  f.index_html = (std::filesystem::path(options.report_dir) / "index.html").string();
  return f;
}

std::string DemoSummaryText(const DemoFigures& f) {
  std::string o;
  o += fmt::format("{:>3}  {:<18} {:<18} {:<9} {:>7} {:>6} {:>6} {:>6}\n", "run", "plan item", "cell", "outcome", "mAh", "Wh", "hours",
                   "max C");
  for (const DemoRun& r : f.runs)
    o += fmt::format("{:>3}  {:<18} {:<18} {:<9} {:>7.0f} {:>6.2f} {:>6.2f} {:>6.1f}\n", r.run_id, r.part, r.cell,
                     OutcomeName(r.outcome), r.discharge_mah, r.discharge_wh, r.discharge_h, r.max_temperature_c);
  o += "\n";
  o += fmt::format("Q1 rated capacity  {:.0f} mAh at 0.2 It = {:.1f} % of the {:.0f} mAh claimed: {}\n", f.measured_mah,
                   f.percent_of_rated, f.rated_mah, f.capacity_pass ? "PASS" : "FAIL (below the claim)");
  if (f.batch_mate_run > 0)
    o += fmt::format("                   cell 2 of the batch at the same 0.2 It (run {}): {:.1f} % of the claim\n",
                     f.batch_mate_run, f.batch_mate_percent);
  o += fmt::format("Q2 product load    duty cycle {:.0f} mAh; 2 A pulses {:.0f} mAh vs 2 A continuous {:.0f} mAh\n", f.duty_mah,
                   f.pulsed_mah, f.continuous_mah);
  for (const RatioFigures& r : f.ratios)
    o += fmt::format("                   {} / {} ({}): capacity x{:.3f}, energy x{:.3f}\n", r.pulsed_label, r.continuous_label,
                     r.basis, r.capacity_ratio, r.energy_ratio);
  if (!f.dcir.empty()) {
    const DcirPoint& first = f.dcir.front();
    const DcirPoint& last = f.dcir.back();
    o += fmt::format("Q3 DC-IR           {} points: {:.1f} mOhm at {:.0f} % depth of discharge ... {:.1f} mOhm at {:.0f} %\n",
                     f.dcir.size(), first.resistance_ohm * 1000.0, first.depth_of_discharge * 100.0, last.resistance_ohm * 1000.0,
                     last.depth_of_discharge * 100.0);
  }
  if (f.peukert)
    o += fmt::format("Q4 Peukert         k = {:.3f} (R^2 {:.4f}) over {} currents on cell 2\n", f.peukert->exponent_k,
                     f.peukert->r_squared, f.peukert->points);
  if (f.life)
    o += fmt::format("Q5 product life    {:.0f} mAh at a real mean of {:.3f} mA: {:.0f} days ({:.2f} years)\n", f.life->capacity_mah,
                     f.life->average_current_a * 1000.0, f.life->hours / 24.0, f.life->years);
  if (f.life)
    for (const std::string& a : f.life->assumptions) o += fmt::format("                   - {}\n", a);
  o += fmt::format("Q6 failing cell    run {} {}: {}; load input {}\n", f.failing_run, OutcomeName(f.failing_outcome),
                   f.failing_reason, f.failing_load_on_after ? "STILL ON" : "off");
  if (f.batch_capacity.n > 0)
    o += fmt::format("Q7 batch of {}      {}: mean {:.0f} mAh, sd {:.1f} mAh, {:.0f}..{:.0f} mAh; {} pass; {} outlier(s)\n",
                     f.batch_runs.size(), f.batch_name, f.batch_capacity.mean, f.batch_capacity.stddev.value_or(0.0),
                     f.batch_capacity.min, f.batch_capacity.max, f.batch_passes, f.batch_outliers);
  o += fmt::format("\n{} runs, {:.0f} h of simulated bench time.\n", f.runs.size(), f.virtual_hours);
  return o;
}

}  // namespace kp
