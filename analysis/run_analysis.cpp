#include "analysis/run_analysis.h"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>

namespace kp {

StepClass StepClassFromKind(std::string_view k) {
  if (k == "rest") return StepClass::kRest;
  if (k == "constant-current discharge") return StepClass::kConstantCurrent;
  if (k == "constant-power discharge") return StepClass::kConstantPower;
  if (k == "constant-resistance discharge") return StepClass::kConstantResistance;
  if (k == "pulse train") return StepClass::kPulseTrain;
  if (k == "duty cycle") return StepClass::kDutyCycle;
  if (k == "dc resistance") return StepClass::kDcir;
  if (k == "charge") return StepClass::kCharge;
  return StepClass::kUnknown;
}

bool IsDischargeClass(StepClass c) {
  return c == StepClass::kConstantCurrent || c == StepClass::kConstantPower || c == StepClass::kConstantResistance ||
         c == StepClass::kPulseTrain || c == StepClass::kDutyCycle || c == StepClass::kDcir;
}

bool ReachedVoltageCutoff(std::string_view reason) {
  size_t v = reason.find("voltage ");
  return v != std::string_view::npos && reason.find(" <= ", v) != std::string_view::npos;
}

namespace {

constexpr double kEps = 1e-9;

}  // namespace

std::string DescribeDischarge(const std::vector<InstanceFigures>& in, size_t first, size_t last, double rated_mah, bool& constant_current,
                     std::string& not_cc) {
  std::optional<double> cc_level;
  bool several = false;
  std::string other, other_kind;
  for (size_t k = first; k <= last; ++k) {
    const InstanceFigures& g = in[k];
    switch (g.cls) {
      case StepClass::kConstantCurrent:
        if (g.level) {
          if (cc_level && std::abs(*cc_level - *g.level) > 1e-9) several = true;
          cc_level = g.level;
        }
        break;
      case StepClass::kConstantPower:
        other = g.level ? fmt::format("constant power {:.4g} W", *g.level) : "constant power";
        other_kind = "constant-power discharge";
        break;
      case StepClass::kConstantResistance:
        other = g.level ? fmt::format("constant resistance {:.4g} Ohm", *g.level) : "constant resistance";
        other_kind = "constant-resistance discharge";
        break;
      case StepClass::kDcir:
        other = "DC-IR tests";
        other_kind = "DC-IR tests inside the discharge";
        break;
      default:
        break;
    }
  }
  constant_current = cc_level && !several && other.empty();
  if (several) {
    not_cc = "several constant-current levels";
    return "constant current at several levels";
  }
  if (!other.empty()) {
    not_cc = other_kind;
    return cc_level ? fmt::format("{} and constant current {:.4g} A", other, *cc_level) : other;
  }
  if (cc_level) {
    double it = rated_mah > 0 ? *cc_level / (rated_mah / 1000.0) : 0.0;
    return rated_mah > 0 ? fmt::format("constant current {:.4g} A ({:.2f} It)", *cc_level, it)
                         : fmt::format("constant current {:.4g} A", *cc_level);
  }
  return "";
}


std::vector<DischargeSpan> DischargeSpans(const std::vector<StepRecord>& recs, double record_end_s) {
  std::vector<DischargeSpan> out;
  auto cls = [&](size_t k) { return StepClassFromKind(recs[k].kind); };
  auto end_of = [&](size_t k) {
    return recs[k].ended_s ? *recs[k].ended_s : (k + 1 < recs.size() ? recs[k + 1].started_s : record_end_s);
  };
  for (size_t i = 0; i < recs.size();) {
    if (cls(i) == StepClass::kCharge) {
      ++i;
      continue;
    }
    size_t j = i;
    while (j < recs.size() && cls(j) != StepClass::kCharge) ++j;  // group [i, j)
    std::optional<size_t> first, last;
    for (size_t k = i; k < j; ++k) {
      if (!IsDischargeClass(cls(k))) continue;
      if (!first) first = k;
      last = k;
      if (ReachedVoltageCutoff(recs[k].end_reason)) break;
    }
    if (first) {
      DischargeSpan d;
      d.first = *first;
      d.last = *last;
      d.start_s = recs[*first].started_s;
      d.end_s = end_of(*last);
      d.cycle = recs[*first].cycle;
      for (size_t k = *first; k <= *last; ++k) d.reached_cutoff = d.reached_cutoff || ReachedVoltageCutoff(recs[k].end_reason);
      out.push_back(d);
    }
    i = j;
  }
  return out;
}

void SettleAttemptsAndCycles(RunAnalysis& a, const RunContext& ctx) {
  const std::vector<InstanceFigures>& in = a.instances;
  // --- capacity attempts and the main discharge ---
  bool any_charge = std::any_of(in.begin(), in.end(), [](const InstanceFigures& g) { return g.cls == StepClass::kCharge; });
  for (size_t k = 0; k < a.discharges.size(); ++k)
    if (!any_charge || a.discharges[k].cycle >= 1) a.attempts.push_back(k);
  if (a.attempts.empty())
    for (size_t k = 0; k < a.discharges.size(); ++k) a.attempts.push_back(k);
  std::optional<size_t> chosen;
  const size_t usable = std::min(a.attempts.size(), static_cast<size_t>(std::max(1, ctx.max_attempts)));
  for (size_t n = 0; n < usable && !chosen; ++n) {
    const CapacityJudgement& j = a.discharges[a.attempts[n]].judgement;
    if (j.judged && j.capacity_pass) chosen = a.attempts[n];
  }
  for (size_t n = 0; n < usable && !chosen; ++n) {
    size_t k = a.attempts[n];
    if (!a.discharges[k].judgement.judged) continue;
    size_t best = k;  // none passed: the best judged attempt
    for (size_t m = n; m < usable; ++m) {
      const DischargeFigures& d = a.discharges[a.attempts[m]];
      if (d.judgement.judged && d.charge_mah > a.discharges[best].charge_mah) best = a.attempts[m];
    }
    chosen = best;
  }
  if (!chosen && !a.attempts.empty()) {
    size_t best = a.attempts.front();  // nothing judged: the attempt that delivered the most
    for (size_t k : a.attempts)
      if (a.discharges[k].charge_mah > a.discharges[best].charge_mah) best = k;
    chosen = best;
  }
  a.main_discharge = chosen;
  if (chosen) {
    DischargeFigures& d = a.discharges[*chosen];
    a.discharge_charge_mah = d.charge_mah;
    a.discharge_energy_wh = d.energy_wh;
    a.main_discharge_step = in[d.first].f.step;
    a.last_discharge_step = in[d.last].f.step;
    a.discharge_start_s = d.start_s;
    a.discharge_duration_s = d.end_s - d.start_s;
    a.mean_voltage_v = d.mean_voltage_v;
    a.mid_voltage_v = d.mid_voltage_v;
    a.time_to_cutoff_s = d.time_to_cutoff_s;
    a.average_current_a = d.average_current_a;
    a.peak_current_a = d.peak_current_a;
    a.pulsed = d.pulsed;
    a.method = d.method;
    a.discharge_description = d.description;
    std::string not_cc;
    DescribeDischarge(in, d.first, d.last, ctx.rated_mah, a.constant_current, not_cc);
    a.constant_current = a.constant_current && !d.pulsed;
    a.verdict = d.judgement;
    if (a.attempts.size() > 1) {
      size_t n = static_cast<size_t>(std::find(a.attempts.begin(), a.attempts.end(), *chosen) - a.attempts.begin());
      a.verdict.text += fmt::format(" (attempt {} of {}", n + 1, a.attempts.size());
      if (a.attempts.size() > usable) a.verdict.text += fmt::format("; only the first {} count", usable);
      a.verdict.text += ")";
    }
  }
  // --- cycles ---
  if (any_charge) {
    std::map<int, CycleFigures> by;
    for (const InstanceFigures& g : in) {
      CycleFigures& c = by[g.cycle];
      c.cycle = g.cycle;
      if (g.cls == StepClass::kCharge) {
        c.charge_in_mah += std::max(0.0, -g.f.charge_mah);
        c.charge_in_wh += std::max(0.0, -g.f.energy_wh);
      }
    }
    for (size_t k = 0; k < a.discharges.size(); ++k) {
      CycleFigures& c = by[a.discharges[k].cycle];
      c.cycle = a.discharges[k].cycle;
      c.discharge = k;
      c.discharge_mah = a.discharges[k].charge_mah;
      c.discharge_wh = a.discharges[k].energy_wh;
    }
    std::optional<double> first_mah;
    for (auto& [n, c] : by) {
      // Efficiencies only when the cycle put in a charge worth comparing (at
      // least 1 % of what it gave back): a charge step that found the cell
      // full puts in next to nothing, and a ratio over it means nothing.
      if (c.discharge && c.charge_in_mah > 0.01 * c.discharge_mah) {
        c.coulombic_efficiency = c.discharge_mah / c.charge_in_mah;
        if (c.charge_in_wh > 0) c.energy_efficiency = c.discharge_wh / c.charge_in_wh;
      }
      if (c.discharge && c.cycle >= 1) {
        if (!first_mah && c.discharge_mah > 0) first_mah = c.discharge_mah;
        if (first_mah) c.retention = c.discharge_mah / *first_mah;
      }
      a.cycles.push_back(c);
    }
  }

}

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// Intervals between samples, kept with a stride that doubles whenever the
// buffer fills: a bounded, evenly spread set for a median.
class SpacingSample {
 public:
  void Add(double dt) {
    if (n_++ % stride_ != 0) return;
    kept_.push_back(dt);
    if (kept_.size() >= kMax) {
      for (size_t i = 0; 2 * i < kept_.size(); ++i) kept_[i] = kept_[2 * i];
      kept_.resize((kept_.size() + 1) / 2);
      stride_ *= 2;
    }
  }
  double Median() const {
    if (kept_.empty()) return 0.0;
    std::vector<double> v = kept_;
    auto mid = v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2);
    std::nth_element(v.begin(), mid, v.end());
    return *mid;
  }
  bool empty() const { return kept_.empty(); }
  void Clear() { *this = SpacingSample{}; }

 private:
  static constexpr size_t kMax = 8192;
  std::vector<double> kept_;
  size_t n_ = 0, stride_ = 1;
};

// One plot column: its lowest and highest point.
struct Extremes {
  bool any = false;
  double lo_t = 0, lo = 0, lo_x = 0, hi_t = 0, hi = 0, hi_x = 0;
  void Add(double t, double v, double x) {
    if (!any || v < lo) lo_t = t, lo = v, lo_x = x;
    if (!any || v > hi) hi_t = t, hi = v, hi_x = x;
    any = true;
  }
  void EmitTo(PlotPoints& p, bool by_x) const {
    if (!any) return;
    bool lo_first = lo_t <= hi_t;
    auto put = [&](bool low) {
      p.x.push_back(by_x ? (low ? lo_x : hi_x) : (low ? lo_t : hi_t));
      p.y.push_back(low ? lo : hi);
    };
    put(lo_first);
    if (lo_t != hi_t) put(!lo_first);
  }
};

// Columns over [t0, t1]; one series of extremes.
class Decimator {
 public:
  Decimator() = default;
  Decimator(double t0, double t1, size_t columns) : t0_(t0), t1_(t1), cols_(std::max<size_t>(columns, 1)) {}
  void Add(double t, double v, double x, PlotPoints& out, bool by_x) {
    size_t c = Column(t);
    if (c != col_) {
      cur_.EmitTo(out, by_x);
      cur_ = Extremes{};
      col_ = c;
    }
    cur_.Add(t, v, x);
  }
  void Flush(PlotPoints& out, bool by_x) {
    cur_.EmitTo(out, by_x);
    cur_ = Extremes{};
  }

 private:
  size_t Column(double t) const {
    if (!(t1_ > t0_) || !std::isfinite(t1_)) return 0;
    double f = (t - t0_) / (t1_ - t0_);
    return static_cast<size_t>(std::lround(std::clamp(f, 0.0, 1.0) * static_cast<double>(cols_ - 1)));
  }
  double t0_ = 0, t1_ = 0;
  size_t cols_ = 1;
  size_t col_ = static_cast<size_t>(-1);
  Extremes cur_;
};

struct Trap {
  double as = 0, ws = 0, vs = 0, span = 0;
};

// What the samples say about one step instance.
struct InstanceCapture {
  Trap trap;
  size_t samples = 0;
  double min_v = 0, last_t = 0, last_v = 0;
  double temp_lo = 0, temp_hi = 0, i_lo = 0, i_hi = 0, max_dev = 0;
  std::optional<double> start_temp;
  bool started = false;
  // Per commanded segment (pulse trains and duty cycles with segments).
  SpacingSample spacing;
  std::optional<double> prev_owned_t;
  size_t seg = 0;
  double seg_i = 0, seg_p = 0, seg_as = 0, seg_ws = 0, seg_last_v = 0;
  size_t seg_n = 0, seg_empty = 0;
  bool seg_v_set = false;
};

struct PulseState {
  std::vector<CommandedSegment> pulses;  // the segments above the threshold, in order
  size_t next = 0;                       // first pulse not begun
  std::optional<PulseFigures> open;      // the pulse begun last
  std::vector<PulseFigures> done;
};

// What the samples say about one discharge span.
struct SpanCapture {
  double mid_t = kInf;
  std::optional<double> mid_v, ttc, start_temp;
  bool any = false, mid_done = false;
  double peak = 0, min_v = 0, end_v = 0;
  std::optional<Sample> prev_owned;
  std::vector<std::pair<double, double>> open_tv;  // (t, V), decimated, for an open-ended span's mid-point
  size_t open_stride = 1, open_n = 0;
  std::optional<double> q0;  // charge total at the span's start
  Decimator vq, vt;
  PlotPoints vq_pts, vt_pts;
  std::optional<PulseState> pulses;
};

}  // namespace

struct RunStream::State {
  RunContext ctx;
  std::vector<StepRecord> recs;
  bool synthetic = false;
  std::vector<double> ends;  // of each record (next start, or +inf for an open last one)
  std::vector<DischargeSpan> spans;
  std::vector<InstanceCapture> inst;
  std::vector<SpanCapture> span_caps;
  size_t next_inst = 0;  // first record whose start is not before the latest sample
  // Totals.
  Trap total;
  double charge_as = 0;  // cumulative, also the DoD / pulse reference
  size_t count = 0;
  double first_t = 0, first_temp = 0, min_v = 0, max_temp = 0;
  bool any_charge = false;
  std::optional<Sample> prev;
  // Gaps by blocks of equal step index.
  int block_step = -1;
  SpacingSample block_spacing;
  std::vector<Gap> block_candidates, gaps;
  // Cumulative charge at thresholds (charge ends, DC-IR edges), by time.
  std::vector<double> thresholds;
  std::map<double, double> charge_at;
  size_t next_threshold = 0;
  std::vector<double> gap_events;  // sorted
  size_t next_gap_event = 0;
  std::vector<Gap> event_gaps;
  // Old runs: samples kept for DC-IR from the samples.
  std::vector<Sample> kept;
  // Plots.
  Decimator dv, di, dt;
  RunPlots plots;
  bool finished = false;

  double EndOf(size_t k) const { return ends[k]; }
  std::map<int, double> expected_spacing;  // plan index -> spacing the procedure asked for
  void CloseBlock() {
    const double med = block_spacing.Median();
    double limit = std::max(10.0 * med, 5.0);  // GapOptions defaults (analysis/integrate.h)
    // Absolute: relative to what the procedure asked for, whatever the median.
    if (auto e = expected_spacing.find(block_step); e != expected_spacing.end())
      limit = std::min(limit, std::max(kAbsoluteGapFactor * e->second, 5.0));
    for (const Gap& g : block_candidates)
      if (g.duration_s() > limit) gaps.push_back(g);
    block_candidates.clear();
    block_spacing.Clear();
  }
};

RunStream::RunStream(const RunContext& ctx, double t_first_s, double t_last_s, size_t plot_columns) : st_(new State) {
  State& S = *st_;
  S.ctx = ctx;
  S.recs = ctx.steps;
  for (const StepRecord& r : S.recs)
    if (r.expected_spacing_s && *r.expected_spacing_s > 0) S.expected_spacing[r.index] = *r.expected_spacing_s;
  if (S.recs.empty()) {
    // No records: the whole record is one instance (a discharge unless it charges).
    StepRecord r;
    r.kind = "constant-current discharge";
    r.started_s = t_first_s;
    r.ended_s = t_last_s;
    S.recs.push_back(r);
    S.synthetic = true;
  }
  for (size_t k = 0; k < S.recs.size(); ++k)
    S.ends.push_back(S.recs[k].ended_s ? *S.recs[k].ended_s : (k + 1 < S.recs.size() ? S.recs[k + 1].started_s : kInf));
  S.spans = DischargeSpans(S.recs, kInf);
  S.inst.resize(S.recs.size());
  S.span_caps.resize(S.spans.size());
  const size_t dcols = std::max<size_t>(plot_columns / 2, 16);
  for (size_t n = 0; n < S.spans.size(); ++n) {
    const DischargeSpan& d = S.spans[n];
    SpanCapture& c = S.span_caps[n];
    if (std::isfinite(d.end_s)) c.mid_t = d.start_s + 0.5 * (d.end_s - d.start_s);
    const double end = std::isfinite(d.end_s) ? d.end_s : t_last_s;
    c.vq = Decimator(d.start_s, end, dcols);
    c.vt = Decimator(d.start_s, end, dcols);
    // Pulses: the segments of the span's steps above the midpoint of their levels.
    bool pulsed = false;
    std::vector<CommandedSegment> segs;
    for (size_t k = d.first; k <= d.last; ++k) {
      const StepClass cls = StepClassFromKind(S.recs[k].kind);
      pulsed = pulsed || cls == StepClass::kPulseTrain || cls == StepClass::kDutyCycle;
      segs.insert(segs.end(), S.recs[k].segments.begin(), S.recs[k].segments.end());
    }
    if (pulsed && !segs.empty()) {
      auto [lo, hi] = std::minmax_element(segs.begin(), segs.end(), [](const CommandedSegment& a, const CommandedSegment& b) {
        return a.current_a < b.current_a;
      });
      if (hi->current_a > lo->current_a) {
        const double thr = 0.5 * (lo->current_a + hi->current_a);
        PulseState ps;
        for (const CommandedSegment& g : segs)
          if (g.current_a > thr) ps.pulses.push_back(g);
        c.pulses = std::move(ps);
      }
    }
  }
  for (size_t k = 0; k < S.recs.size(); ++k)
    if (StepClassFromKind(S.recs[k].kind) == StepClass::kCharge && std::isfinite(S.ends[k])) S.thresholds.push_back(S.ends[k]);
  for (const DcirPoint& p : ctx.engine_dcir) S.thresholds.push_back(p.t_edge_s);
  std::sort(S.thresholds.begin(), S.thresholds.end());
  S.gap_events = ctx.gap_event_times;
  std::sort(S.gap_events.begin(), S.gap_events.end());
  S.dv = Decimator(t_first_s, t_last_s, plot_columns);
  S.di = Decimator(t_first_s, t_last_s, plot_columns);
  S.dt = Decimator(t_first_s, t_last_s, plot_columns);
}

RunStream::~RunStream() = default;

void RunStream::Add(const Sample& x) {
  State& S = *st_;
  // Thresholds passed: the cumulative charge of every interval closing at or before them.
  while (S.next_threshold < S.thresholds.size() && x.t_s > S.thresholds[S.next_threshold])
    S.charge_at[S.thresholds[S.next_threshold++]] = S.charge_as;
  if (!S.ctx.dcir_recorded) S.kept.push_back(x);
  // Gap events: the interval from the last sample before each to x.
  while (S.next_gap_event < S.gap_events.size() && x.t_s >= S.gap_events[S.next_gap_event]) {
    if (S.prev) S.event_gaps.push_back({S.prev->t_s, x.t_s, x.step});
    ++S.next_gap_event;
  }
  if (x.current_a < -1e-6) S.any_charge = true;

  // The interval closing at x.
  Trap dtrap;
  if (S.prev && x.t_s > S.prev->t_s) {
    const Sample& p = *S.prev;
    const double dt = x.t_s - p.t_s;
    dtrap.as = 0.5 * (x.current_a + p.current_a) * dt;
    dtrap.ws = 0.5 * (x.voltage_v * x.current_a + p.voltage_v * p.current_a) * dt;
    dtrap.vs = 0.5 * (x.voltage_v + p.voltage_v) * dt;
    dtrap.span = dt;
  }
  if (S.prev) {
    S.total.as += dtrap.as, S.total.ws += dtrap.ws, S.total.vs += dtrap.vs, S.total.span += x.t_s - S.prev->t_s;
    S.charge_as += dtrap.as;
  }
  // Totals.
  if (S.count == 0) {
    S.first_t = x.t_s;
    S.first_temp = x.temperature_c;
    S.min_v = x.voltage_v;
    S.max_temp = x.temperature_c;
  }
  S.min_v = std::min(S.min_v, x.voltage_v);
  S.max_temp = std::max(S.max_temp, x.temperature_c);
  ++S.count;
  // Gaps: blocks of consecutive samples with one step index; the interval
  // bridging into a block belongs to it.
  if (x.step != S.block_step) {
    if (S.block_step >= 0 || S.count > 1) S.CloseBlock();
    S.block_step = x.step;
  }
  if (S.prev) {
    const double d = x.t_s - S.prev->t_s;
    S.block_spacing.Add(d);
    if (d > 5.0) S.block_candidates.push_back({S.prev->t_s, x.t_s, x.step});
  }
  // Plots against time.
  S.dv.Add(x.t_s, x.voltage_v, 0, S.plots.voltage, false);
  S.di.Add(x.t_s, x.current_a, 0, S.plots.current, false);
  S.dt.Add(x.t_s, x.temperature_c, 0, S.plots.temperature, false);

  // Instances whose start this sample passes: their start reading is the one before.
  while (S.next_inst < S.recs.size() && S.recs[S.next_inst].started_s < x.t_s) {
    InstanceCapture& c = S.inst[S.next_inst];
    // The last sample at or before the start (the first of the record when none).
    c.start_temp = (S.prev ? *S.prev : x).temperature_c;
    ++S.next_inst;
  }
  // The instance that owns x: the last started before it, if x is not past its end.
  if (S.next_inst > 0) {
    const size_t k = S.next_inst - 1;
    if (x.t_s <= S.EndOf(k)) {
      InstanceCapture& c = S.inst[k];
      const StepRecord& r = S.recs[k];
      c.trap.as += dtrap.as, c.trap.ws += dtrap.ws, c.trap.vs += dtrap.vs, c.trap.span += dtrap.span;
      if (!c.started) {
        c.min_v = x.voltage_v, c.temp_lo = c.temp_hi = x.temperature_c, c.i_lo = c.i_hi = x.current_a;
        c.started = true;
      }
      c.min_v = std::min(c.min_v, x.voltage_v);
      c.temp_lo = std::min(c.temp_lo, x.temperature_c), c.temp_hi = std::max(c.temp_hi, x.temperature_c);
      c.i_lo = std::min(c.i_lo, x.current_a), c.i_hi = std::max(c.i_hi, x.current_a);
      if (r.level && StepClassFromKind(r.kind) == StepClass::kConstantCurrent)
        c.max_dev = std::max(c.max_dev, std::abs(x.current_a - *r.level));
      ++c.samples;
      c.last_t = x.t_s;
      c.last_v = x.voltage_v;
      // Per commanded segment: each segment owns the samples in (start, end].
      if (!r.segments.empty()) {
        if (c.prev_owned_t) c.spacing.Add(x.t_s - *c.prev_owned_t);
        c.prev_owned_t = x.t_s;
        if (!c.seg_v_set) c.seg_last_v = x.voltage_v, c.seg_v_set = true;
        while (c.seg < r.segments.size() && x.t_s > r.segments[c.seg].t_end_s) {
          const CommandedSegment& g = r.segments[c.seg];
          const double len = g.t_end_s - g.t_start_s;
          if (len > 0) {
            if (c.seg_n == 0) {
              ++c.seg_empty;
              c.seg_as += g.current_a * len, c.seg_ws += g.current_a * c.seg_last_v * len;
            } else {
              c.seg_as += c.seg_i / static_cast<double>(c.seg_n) * len, c.seg_ws += c.seg_p / static_cast<double>(c.seg_n) * len;
            }
          }
          c.seg_i = c.seg_p = 0, c.seg_n = 0;
          ++c.seg;
        }
        if (c.seg < r.segments.size() && x.t_s > r.segments[c.seg].t_start_s) {
          c.seg_i += x.current_a, c.seg_p += x.current_a * x.voltage_v, ++c.seg_n;
        }
        c.seg_last_v = x.voltage_v;
      }
    }
  }
  // Discharge spans.
  for (size_t n = 0; n < S.spans.size(); ++n) {
    const DischargeSpan& d = S.spans[n];
    SpanCapture& c = S.span_caps[n];
    if (x.t_s <= d.start_s + kEps) continue;
    if (!c.q0) {
      c.q0 = S.charge_as - dtrap.as;  // every interval closing at or before the start
      c.start_temp = (S.prev ? *S.prev : x).temperature_c;
    }
    if (x.t_s > d.end_s) continue;
    if (!c.any) c.min_v = x.voltage_v;
    c.any = true;
    c.peak = std::max(c.peak, x.current_a);
    c.min_v = std::min(c.min_v, x.voltage_v);
    c.end_v = x.voltage_v;
    if (S.ctx.cutoff_v && !c.ttc && x.voltage_v <= *S.ctx.cutoff_v) c.ttc = x.t_s - d.start_s;
    if (!c.mid_done && x.t_s >= c.mid_t) {
      if (!c.prev_owned) {
        c.mid_v = x.voltage_v;
      } else {
        const Sample& a = *c.prev_owned;
        const double w = x.t_s > a.t_s ? (c.mid_t - a.t_s) / (x.t_s - a.t_s) : 0.0;
        c.mid_v = a.voltage_v + w * (x.voltage_v - a.voltage_v);
      }
      c.mid_done = true;
    }
    if (!std::isfinite(d.end_s)) {
      if (c.open_n++ % c.open_stride == 0) c.open_tv.push_back({x.t_s, x.voltage_v});
      if (c.open_tv.size() >= 8192) {
        for (size_t i = 0; 2 * i < c.open_tv.size(); ++i) c.open_tv[i] = c.open_tv[2 * i];
        c.open_tv.resize((c.open_tv.size() + 1) / 2);
        c.open_stride *= 2;
      }
    }
    c.prev_owned = x;
    const double q_mah = (S.charge_as - *c.q0) / 3.6;
    c.vq.Add(x.t_s, x.voltage_v, q_mah, c.vq_pts, true);
    c.vt.Add(x.t_s, x.voltage_v, 0, c.vt_pts, false);
  }
  // Pulses of pulsed spans (AnalysePulses' rules, as the samples stream by).
  for (SpanCapture& c : S.span_caps) {
    if (!c.pulses) continue;
    PulseState& ps = *c.pulses;
    while (ps.next < ps.pulses.size() && x.t_s >= ps.pulses[ps.next].t_start_s) {
      // The previous pulse recovers until this one starts: its last sample before it.
      if (ps.open && ps.open->samples > 0) {
        ps.open->recovered_voltage_v = S.prev ? S.prev->voltage_v : x.voltage_v;
        ps.open->recovery_v = ps.open->recovered_voltage_v - ps.open->min_voltage_v;
        ps.open->index = static_cast<int>(ps.done.size());
        ps.done.push_back(*ps.open);
      }
      const CommandedSegment& g = ps.pulses[ps.next++];
      PulseFigures p;
      p.t_start_s = g.t_start_s;
      p.t_end_s = g.t_end_s;
      p.current_a = g.current_a;
      p.rest_voltage_before_v = S.prev ? S.prev->voltage_v : x.voltage_v;
      p.delivered_mah_at_start = (S.charge_as - dtrap.as) / 3.6;
      ps.open = p;
    }
    if (ps.open && x.t_s >= ps.open->t_start_s && x.t_s < ps.open->t_end_s) {
      ps.open->min_voltage_v = ps.open->samples ? std::min(ps.open->min_voltage_v, x.voltage_v) : x.voltage_v;
      ++ps.open->samples;
    }
  }
  S.prev = x;
}

RunPlots RunStream::TakePlots() { return std::move(st_->plots); }

RunAnalysis RunStream::Finish() {
  State& S = *st_;
  const RunContext& ctx = S.ctx;
  RunAnalysis a;
  S.CloseBlock();
  while (S.next_threshold < S.thresholds.size()) S.charge_at[S.thresholds[S.next_threshold++]] = S.charge_as;
  // Totals.
  a.totals.charge_mah = S.total.as / 3.6;
  a.totals.energy_wh = S.total.ws / 3600.0;
  a.totals.sample_count = S.count;
  if (S.count > 0) {
    a.totals.duration_s = S.prev->t_s - S.first_t;
    a.totals.mean_voltage_v = S.total.span > 0 ? S.total.vs / S.total.span : S.prev->voltage_v;
    a.totals.min_voltage_v = S.min_v;
    a.totals.max_temperature_c = S.max_temp;
  }
  a.gaps = S.gaps;
  std::vector<Gap> recorded = ctx.recorded_gaps;
  recorded.insert(recorded.end(), S.event_gaps.begin(), S.event_gaps.end());
  for (const Gap& g : recorded) {
    bool dup = std::any_of(a.gaps.begin(), a.gaps.end(),
                           [&](const Gap& x) { return x.t_start_s <= g.t_end_s && g.t_start_s <= x.t_end_s; });
    if (!dup) a.gaps.push_back(g);
  }
  std::sort(a.gaps.begin(), a.gaps.end(), [](const Gap& x, const Gap& y) { return x.t_start_s < y.t_start_s; });
  DischargeConditions none;
  none.rated_mah = ctx.rated_mah;
  a.verdict = JudgeCapacityByMethod(MethodForChemistry(ctx.chemistry), none);
  S.dv.Flush(S.plots.voltage, false);
  S.di.Flush(S.plots.current, false);
  S.dt.Flush(S.plots.temperature, false);
  if (S.count == 0) return a;
  const double last_t = S.prev->t_s;
  a.start_temperature_c = S.first_temp;
  a.max_temperature_c = a.totals.max_temperature_c;

  // --- step instances ---
  if (S.synthetic && S.any_charge) S.recs[0].kind = "unknown";
  for (size_t k = 0; k < S.recs.size(); ++k) {
    const StepRecord& rec = S.recs[k];
    const InstanceCapture& c = S.inst[k];
    const double end = std::isfinite(S.ends[k]) ? S.ends[k] : last_t;
    InstanceFigures g;
    g.number = rec.index + 1;
    g.kind = rec.kind;
    g.cls = StepClassFromKind(rec.kind);
    g.pass = rec.pass;
    g.cycle = rec.cycle;
    g.started_s = rec.started_s;
    g.ended_s = end;
    g.end_reason = rec.end_reason;
    g.held_s = rec.held_s;
    g.level = rec.level;
    g.mode = rec.mode;
    StepFigures& f = g.f;
    f.step = rec.index;
    f.samples = c.samples;
    f.t_start_s = rec.started_s;
    f.t_end_s = c.samples ? c.last_t : end;
    f.min_voltage_v = c.samples ? c.min_v : 0.0;
    f.charge_mah = c.trap.as / 3.6;
    for (const auto& [t_s, mah] : ctx.outage_mah)
      if (t_s > rec.started_s && t_s <= end) f.charge_mah += mah;
    f.energy_wh = c.trap.ws / 3600.0;
    if (c.trap.span > 0) {
      f.mean_current_a = c.trap.as / c.trap.span;
      f.mean_voltage_v = c.trap.vs / c.trap.span;
    } else if (c.samples) {
      f.mean_current_a = c.i_lo;
      f.mean_voltage_v = c.last_v;
    }
    // Pulse trains and duty cycles sampled more sparsely than their segments:
    // commanded segments × measured levels, for this step only.
    if ((g.cls == StepClass::kPulseTrain || g.cls == StepClass::kDutyCycle) && !rec.segments.empty() && c.samples >= 2) {
      double shortest = kInf;
      for (const CommandedSegment& s : rec.segments)
        if (s.t_end_s > s.t_start_s) shortest = std::min(shortest, s.t_end_s - s.t_start_s);
      if (c.spacing.Median() > 0.5 * shortest) {
        // Segments after the last sample: commanded level at the last voltage.
        double as = c.seg_as, ws = c.seg_ws;
        for (size_t s = c.seg; s < rec.segments.size(); ++s) {
          const CommandedSegment& sg = rec.segments[s];
          const double len = sg.t_end_s - sg.t_start_s;
          if (len <= 0) continue;
          if (s == c.seg && c.seg_n > 0) {
            as += c.seg_i / static_cast<double>(c.seg_n) * len, ws += c.seg_p / static_cast<double>(c.seg_n) * len;
          } else {
            as += sg.current_a * len, ws += sg.current_a * c.seg_last_v * len;
          }
        }
        g.method = IntegrationMethod::kPerSegment;
        f.charge_mah = as / 3.6;
        f.energy_wh = ws / 3600.0;
        const double len = end - rec.started_s;
        if (len > 0) f.mean_current_a = f.charge_mah * 3.6 / len;
      }
    }
    a.instances.push_back(std::move(g));
    a.steps.push_back(a.instances.back().f);
  }
  const std::vector<InstanceFigures>& in = a.instances;

  // --- discharges ---
  const CapacityMethod method = MethodForChemistry(ctx.chemistry);
  std::vector<size_t> span_index;  // discharge -> span
  for (size_t n = 0; n < S.spans.size(); ++n) {
    if (S.synthetic && S.any_charge) break;
    const DischargeSpan& span = S.spans[n];
    const SpanCapture& c = S.span_caps[n];
    DischargeFigures d;
    d.first = span.first;
    d.last = span.last;
    d.cycle = in[d.first].cycle;
    d.start_s = in[d.first].started_s;
    d.end_s = in[d.last].ended_s;
    size_t judged = d.first;
    for (size_t k = d.first; k <= d.last; ++k) {
      const InstanceFigures& g = in[k];
      d.charge_mah += g.f.charge_mah;
      d.energy_wh += g.f.energy_wh;
      if (g.cls == StepClass::kPulseTrain || g.cls == StepClass::kDutyCycle) d.pulsed = true;
      if (g.method == IntegrationMethod::kPerSegment) d.method = IntegrationMethod::kPerSegment;
      if (IsDischargeClass(g.cls) && g.f.charge_mah > in[judged].f.charge_mah) judged = k;
      if (ReachedVoltageCutoff(g.end_reason)) d.reached_cutoff = true;
    }
    if (ReachedVoltageCutoff(in[d.last].end_reason)) judged = d.last;
    d.judged = judged;
    const double dur = d.end_s - d.start_s;
    if (c.any) {
      double vs = 0, t_span = 0;
      for (size_t k = d.first; k <= d.last; ++k) vs += S.inst[k].trap.vs, t_span += S.inst[k].trap.span;
      d.mean_voltage_v = t_span > 0 ? vs / t_span : c.end_v;
      if (c.mid_v) {
        d.mid_voltage_v = *c.mid_v;
      } else if (!c.open_tv.empty()) {
        // Open-ended (the run stopped in it): from the kept points.
        const double mid = d.start_s + 0.5 * dur;
        auto it = std::lower_bound(c.open_tv.begin(), c.open_tv.end(), mid,
                                   [](const std::pair<double, double>& p, double t) { return p.first < t; });
        if (it == c.open_tv.end()) {
          d.mid_voltage_v = c.open_tv.back().second;
        } else if (it == c.open_tv.begin()) {
          d.mid_voltage_v = it->second;
        } else {
          const auto& p = *(it - 1);
          const double w = it->first > p.first ? (mid - p.first) / (it->first - p.first) : 0.0;
          d.mid_voltage_v = p.second + w * (it->second - p.second);
        }
      } else {
        d.mid_voltage_v = c.end_v;
      }
      d.min_voltage_v = c.min_v;
      d.peak_current_a = c.peak;
      d.time_to_cutoff_s = c.ttc;
      if (!d.time_to_cutoff_s && ReachedVoltageCutoff(in[d.last].end_reason)) d.time_to_cutoff_s = dur;
    }
    d.average_current_a = dur > 0 ? d.charge_mah * 3.6 / dur : 0.0;
    if (c.start_temp) d.start_temperature_c = *c.start_temp;
    bool cc = false;
    std::string not_cc;
    d.description = d.pulsed ? "pulsed" : DescribeDischarge(in, d.first, d.last, ctx.rated_mah, cc, not_cc);
    const InstanceFigures& js = in[judged];
    const InstanceCapture& jc = S.inst[judged];
    DischargeConditions dc;
    dc.rated_mah = ctx.rated_mah;
    dc.delivered_mah = d.charge_mah;
    dc.pulsed = d.pulsed;
    dc.not_constant_current = d.pulsed ? "" : not_cc;
    dc.temperature_tolerance_c = ctx.temperature_tolerance_c;
    if (js.cls == StepClass::kConstantCurrent && js.level) dc.commanded_current_a = js.level;
    if (jc.samples > 0) {
      dc.mean_current_a = js.f.mean_current_a;
      dc.max_current_deviation_a =
          dc.commanded_current_a ? jc.max_dev : std::max(jc.i_hi - js.f.mean_current_a, js.f.mean_current_a - jc.i_lo);
      dc.start_temperature_c = jc.start_temp.value_or(jc.temp_lo);
      dc.min_temperature_c = std::min(jc.temp_lo, dc.start_temperature_c);
      dc.max_temperature_c = std::max(jc.temp_hi, dc.start_temperature_c);
      dc.end_voltage_v = c.end_v;
    }
    if (d.first > 0 && in[d.first - 1].cls == StepClass::kRest) dc.rest_before_s = in[d.first - 1].ended_s - in[d.first - 1].started_s;
    d.judgement = JudgeCapacityByMethod(method, dc);
    a.discharges.push_back(std::move(d));
    span_index.push_back(n);
  }

  SettleAttemptsAndCycles(a, ctx);
  if (a.main_discharge) {
    SpanCapture& c = S.span_caps[span_index[*a.main_discharge]];
    if (c.pulses) {
      PulseState& ps = *c.pulses;
      if (ps.open && ps.open->samples > 0) {  // the last pulse recovers to the end of the record
        ps.open->recovered_voltage_v = S.prev->voltage_v;
        ps.open->recovery_v = ps.open->recovered_voltage_v - ps.open->min_voltage_v;
        ps.open->index = static_cast<int>(ps.done.size());
        ps.done.push_back(*ps.open);
        ps.open.reset();
      }
      a.pulses = std::move(ps.done);
    }
    if (ctx.brownout_v) a.brownout = FirstBrownout(a.pulses, *ctx.brownout_v);
  }
  a.temperature_rise_c = a.max_temperature_c - a.start_temperature_c;

  // --- DC-IR: only at commanded edges inside dcir, pulse and duty steps ---
  const double capacity = ctx.rated_mah > 0 ? ctx.rated_mah : a.discharge_charge_mah;
  if (ctx.dcir_recorded) {
    a.dcir = ctx.engine_dcir;
    std::map<std::string, int> why;
    for (const std::string& w : ctx.dcir_invalid) ++why[w];
    for (auto& [w, n] : why) a.dcir_left_out.push_back({w, n});
    for (DcirPoint& p : a.dcir) {
      // Charge delivered since the end of the last charge before the edge.
      double start = 0.0;
      for (const InstanceFigures& g : in)
        if (g.cls == StepClass::kCharge && g.ended_s <= p.t_edge_s) start = g.ended_s;
      const double c_start = start > 0.0 && S.charge_at.count(start) ? S.charge_at[start] : 0.0;
      const double c_edge = S.charge_at.count(p.t_edge_s) ? S.charge_at[p.t_edge_s] : S.charge_as;
      p.delivered_mah = (c_edge - c_start) / 3.6;
      p.depth_of_discharge = capacity > 0 ? std::clamp(p.delivered_mah / capacity, 0.0, 1.0) : 0.0;
    }
  } else {
    std::vector<double> edges;
    for (size_t k = 0; k < S.recs.size(); ++k) {
      const StepClass c = in[k].cls;
      if (c == StepClass::kPulseTrain || c == StepClass::kDutyCycle || c == StepClass::kDcir) {
        std::vector<double> e = EdgesFromSegments(S.recs[k].segments, ctx.dcir.min_step_a);
        for (double t : e)
          if (t > in[k].started_s + kEps && t < in[k].ended_s - kEps) edges.push_back(t);
      }
    }
    std::sort(edges.begin(), edges.end());
    a.dcir = MeasureDcir(S.kept, edges, ctx.dcir, capacity);
    // Depth of discharge from the end of the last charge (as for recorded points).
    for (DcirPoint& p : a.dcir) {
      double start = 0.0;
      for (const InstanceFigures& g : in)
        if (g.cls == StepClass::kCharge && g.ended_s <= p.t_edge_s) start = g.ended_s;
      double as = 0;
      for (size_t i = 1; i < S.kept.size(); ++i)
        if (S.kept[i].t_s > start && S.kept[i].t_s <= p.t_edge_s)
          as += 0.5 * (S.kept[i].current_a + S.kept[i - 1].current_a) * (S.kept[i].t_s - S.kept[i - 1].t_s);
      p.delivered_mah = as / 3.6;
      p.depth_of_discharge = capacity > 0 ? std::clamp(p.delivered_mah / capacity, 0.0, 1.0) : 0.0;
    }
  }

  // --- plots of the discharges ---
  for (size_t k = 0; k < a.discharges.size(); ++k) {
    SpanCapture& c = S.span_caps[span_index[k]];
    c.vq.Flush(c.vq_pts, true);
    c.vt.Flush(c.vt_pts, false);
    for (double& t : c.vt_pts.x) t -= a.discharges[k].start_s;
    S.plots.discharge_vq.push_back(std::move(c.vq_pts));
    S.plots.discharge_vt.push_back(std::move(c.vt_pts));
  }
  S.finished = true;
  return a;
}

RunAnalysis AnalyseRun(SampleSpan s, const RunContext& ctx) {
  RunStream st(ctx, s.empty() ? 0.0 : s.front().t_s, s.empty() ? 0.0 : s.back().t_s);
  for (const Sample& x : s) st.Add(x);
  return st.Finish();
}
void WithholdVerdicts(RunAnalysis& a, const std::string& why) {
  auto withhold = [&](CapacityJudgement& j) {
    if (!j.judged && !j.not_judged_why.empty()) {
      j.text = "not judged: " + why + "; " + j.text;
      return;
    }
    j.judged = false;
    j.capacity_pass = false;
    j.not_judged_why = why;
    j.text = fmt::format("not judged: {} (the figures as recorded: {:.1f} % of rated)", why, j.percent_of_rated);
    j.brief = "not judged: " + why;
  };
  withhold(a.verdict);
  for (DischargeFigures& d : a.discharges) withhold(d.judgement);
}

}  // namespace kp
