#include "procedures/engine.h"

#include <fmt/format.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdlib>
#include <limits>
#include <map>
#include <sstream>

namespace kp {
namespace {
constexpr double kEps = 1e-9;

bool HasSegments(StepKind k) { return k == StepKind::kPulseTrain || k == StepKind::kDutyCycle || k == StepKind::kResistanceTest; }
}  // namespace

StepEngine::StepEngine(const Plan& plan) : plan_(plan), loops_(plan.loops.size()) {}

Setpoint StepEngine::SegmentSetpoint(const Segment& g) const {
  Setpoint sp;
  sp.load_on = true;
  sp.mode = g.mode;
  sp.level = g.level;
  return sp;
}

Setpoint StepEngine::SetpointFor(const Step& step) const {
  Setpoint sp;
  switch (step.kind) {
    case StepKind::kRest:
    case StepKind::kChamberSet:   // the load stays off while the chamber moves
    case StepKind::kChamberSoak:
      break;
    case StepKind::kConstantCurrent:
      sp.load_on = true;
      sp.mode = LoadMode::kCurrent;
      sp.level = step.current_a;
      break;
    case StepKind::kConstantPower:
      sp.load_on = true;
      sp.mode = LoadMode::kPower;
      sp.level = step.power_w;
      break;
    case StepKind::kConstantResistance:
      sp.load_on = true;
      sp.mode = LoadMode::kResistance;
      sp.level = step.resistance_ohm;
      break;
    case StepKind::kPulseTrain:
    case StepKind::kDutyCycle:
    case StepKind::kResistanceTest:
      sp = SegmentSetpoint(step.segments[seg_]);
      break;
    case StepKind::kCharge:
      sp.supply_on = true;
      sp.supply_v = step.charge_voltage_v;
      sp.supply_a = step.charge_current_a;
      break;
  }
  return sp;
}

void StepEngine::Emit(const Setpoint& sp, EngineOutput& out) {
  if (!applied_ || !(*applied_ == sp)) {
    out.setpoint = sp;
    applied_at_s_ = now_s_;
    low_since_s_.reset();
  }
  applied_ = sp;
}

int StepEngine::pass() const {
  int p = 0;
  for (size_t li = 0; li < plan_.loops.size(); ++li)
    if (plan_.loops[li].first_step <= step_ && step_ <= plan_.loops[li].last_step) p = loops_[li].iter + 1;
  return p;
}

double StepEngine::LimitCheckDelay() const {
  constexpr double kNever = std::numeric_limits<double>::infinity();
  if (!last_ || !before_last_ || finished()) return kNever;
  const double dt = last_->t_s - before_last_->t_s;
  if (dt <= 0) return kNever;
  // A rate across a setpoint change is the step response, not an approach.
  if (before_last_->t_s <= applied_at_s_ + kEps) return kNever;
  const double fast = plan_.edge_settle_s;
  const double v = last_->voltage_v, dv = (last_->voltage_v - before_last_->voltage_v) / dt;
  const double temp = last_->temperature_c, dtemp = (last_->temperature_c - before_last_->temperature_c) / dt;
  double best = kNever;
  // Half the predicted time to the limit at the present rate of approach: the
  // interval shrinks geometrically down to the fastest reading as the limit
  // nears, so the reading that crosses it comes at most one fast reading late.
  auto approach = [&](double value, double rate, double limit, bool falling) {
    const double margin = falling ? value - limit : limit - value;
    const double speed = falling ? -rate : rate;
    if (margin <= 0) {
      best = std::min(best, fast);
    } else if (speed > 0) {
      best = std::min(best, 0.5 * margin / speed);
    }
  };
  // Charge and energy grow at the present current and power.
  const double dq_mah_per_s = std::abs(last_->current_a) / 3.6;
  const double de_wh_per_s = std::abs(last_->current_a * last_->voltage_v) / 3600.0;
  auto conditions = [&](const EndConditions& e, double charge_mah, double energy_wh) {
    if (e.voltage_below_v) approach(v, dv, *e.voltage_below_v, true);
    if (e.voltage_above_v) approach(v, dv, *e.voltage_above_v, false);
    if (e.temperature_above_c) approach(temp, dtemp, *e.temperature_above_c, false);
    if (e.charge_mah) approach(std::abs(charge_mah), dq_mah_per_s, *e.charge_mah, false);
    if (e.energy_wh) approach(std::abs(energy_wh), de_wh_per_s, *e.energy_wh, false);
  };
  const Step& step = plan_.steps[static_cast<size_t>(step_)];
  if (step.kind != StepKind::kResistanceTest) conditions(step.end, step_charge_mah_, step_energy_wh_);
  for (size_t li = 0; li < plan_.loops.size(); ++li) {
    const Loop& l = plan_.loops[li];
    if (l.count == 0 && l.first_step <= step_ && step_ <= l.last_step) conditions(l.until, loops_[li].charge_mah, loops_[li].energy_wh);
  }
  const SafetyLimits& lim = plan_.limits;
  if (lim.min_voltage_v > 0) approach(v, dv, lim.min_voltage_v, true);
  if (std::isfinite(lim.max_voltage_v)) approach(v, dv, lim.max_voltage_v, false);
  if (std::isfinite(lim.max_temp_c)) approach(temp, dtemp, lim.max_temp_c, false);
  return std::max(fast, best);
}

void StepEngine::CheckRegulation(const Reading& r, EngineOutput& out) {
  if (!applied_ || !applied_->load_on || applied_->supply_on) {
    low_since_s_.reset();
    return;
  }
  // What the load should be drawing at this terminal voltage, against what it draws.
  double want = 0.0, got = 0.0;
  const char* unit = "A";
  switch (applied_->mode) {
    case LoadMode::kCurrent:
      want = applied_->level, got = r.current_a;
      break;
    case LoadMode::kPower:
      want = applied_->level, got = r.current_a * r.voltage_v, unit = "W";
      break;
    case LoadMode::kResistance:
      want = applied_->level > 0 ? r.voltage_v / applied_->level : 0.0, got = r.current_a;
      break;
  }
  const bool low = want > 1e-3 && got < 0.5 * want && want - got > 1e-3;
  if (!low) {
    low_since_s_.reset();
    return;
  }
  if (!low_since_s_) low_since_s_ = r.t_s;
  if (r.t_s - *low_since_s_ >= plan_.regulation_grace_s - kEps)
    out.abort_reason = fmt::format(
        "lost regulation in step {}: the load drew {:.4g} {} against {:.4g} {} commanded for {:.0f} s (the cell cannot hold "
        "the level, a load protection clamped it, or a lead is open)",
        step_ + 1, got, unit, want, unit, r.t_s - *low_since_s_);
}

StepResult StepEngine::FirstReading(const char* source, double t_edge_s, const Reading& r) const {
  StepResult res;
  res.step = step_;
  res.name = "dc-resistance";
  res.source = source;
  res.t_edge_s = t_edge_s;
  res.u1_v = r.voltage_v;
  res.i1_a = r.current_a;
  res.t1_s = r.t_s;
  return res;
}

void StepEngine::CompletePulseEdge(const Reading& r, EngineOutput& out) {
  if (!pulse_edge_ || r.t_s < pulse_edge_->t_edge_s + plan_.dcir_delay_s - kEps) return;
  StepResult res = *pulse_edge_;
  pulse_edge_.reset();
  res.u2_v = r.voltage_v;
  res.i2_a = r.current_a;
  res.t2_s = r.t_s;
  const double di = res.i2_a - res.i1_a;
  if (std::abs(di) < 0.5 * plan_.dcir_min_step_a) {
    res.valid = false;
    res.why_invalid = fmt::format("measured currents differ by {:.4f} A only", di);
  } else {
    res.value = (res.u1_v - res.u2_v) / di;
    res.detail = fmt::format("R_dc = {:.6g} Ohm = ({:.6f} V - {:.6f} V) / ({:.6f} A - {:.6f} A) at t = {:.3f} s and {:.3f} s",
                             res.value, res.u1_v, res.u2_v, res.i2_a, res.i1_a, res.t1_s, res.t2_s);
  }
  out.results.push_back(std::move(res));
}

bool StepEngine::Contains(size_t outer, size_t inner) const {
  const Loop& a = plan_.loops[outer];
  const Loop& b = plan_.loops[inner];
  return outer <= inner && a.first_step <= b.first_step && b.last_step <= a.last_step;
}

void StepEngine::PlaceSegment(double t_s) {
  const Step& step = plan_.steps[static_cast<size_t>(step_)];
  seg_ = 0;
  seg_start_s_ = step_start_s_;
  if (!HasSegments(step.kind)) return;
  double cycle = step.CycleSeconds();
  double pos = t_s - step_start_s_;
  if (step.kind != StepKind::kResistanceTest && pos >= cycle) {
    double n = std::floor(pos / cycle);
    seg_start_s_ += n * cycle;
    pos -= n * cycle;
  }
  while (seg_ + 1 < step.segments.size() && pos >= step.segments[seg_].duration_s - kEps) {
    pos -= step.segments[seg_].duration_s;
    seg_start_s_ += step.segments[seg_].duration_s;
    ++seg_;
  }
}

void StepEngine::Schedule(double t_s, bool changed_now) {
  if (finished()) return;
  const Step& step = plan_.steps[static_cast<size_t>(step_)];
  double next = next_regular_s_;
  next = std::min(next, t_s + LimitCheckDelay());
  if (pulse_edge_) next = std::min(next, pulse_edge_->t_edge_s + plan_.dcir_delay_s);
  if (low_since_s_) next = std::min(next, *low_since_s_ + plan_.regulation_grace_s);
  if (changed_now) next = std::min(next, t_s + plan_.edge_settle_s);
  if (HasSegments(step.kind)) next = std::min(next, seg_start_s_ + step.segments[seg_].duration_s);
  if (step.end.time_s) {
    double end_at = step_start_s_ + *step.end.time_s;
    if (end_at > t_s + kEps) next = std::min(next, end_at);
  }
  next_wakeup_s_ = std::max(next, t_s + 1e-6);
}

void StepEngine::EnterStep(int index, double t_s, int looped_back, EngineOutput& out) {
  step_ = index;
  step_start_s_ = t_s;
  now_s_ = t_s;
  step_charge_mah_ = 0.0;
  step_energy_wh_ = 0.0;
  step_vs_ = 0.0;
  dcir_.reset();
  pulse_edge_.reset();
  if (finished()) {
    out.finished = true;
    Emit(Setpoint{}, out);
    return;
  }
  // Loops entered here from outside start afresh.
  for (size_t li = 0; li < plan_.loops.size(); ++li) {
    if (plan_.loops[li].first_step != index) continue;
    if (looped_back >= 0 && Contains(li, static_cast<size_t>(looped_back))) continue;
    loops_[li] = LoopState{0, t_s, 0.0, 0.0};
  }
  const Step& entered = plan_.steps[static_cast<size_t>(step_)];
  const bool charge = entered.kind == StepKind::kCharge;
  if (charge && !last_was_charge_) ++cycle_;
  last_was_charge_ = charge;
  next_regular_s_ = t_s + entered.sample_period_s;
  PlaceSegment(t_s);
  std::optional<Setpoint> before = applied_;
  Emit(SetpointFor(entered), out);
  soak_.reset();
  if (entered.kind == StepKind::kChamberSet) out.chamber_setpoint_c = entered.chamber_c;
  if (entered.kind == StepKind::kChamberSoak)
    soak_.emplace(SoakSpec{entered.chamber_c, entered.soak_band_c, entered.soak_hold_s, entered.soak_max_s}, t_s);
  Schedule(t_s, !before || !(*before == *applied_) || entered.kind == StepKind::kChamberSet);
}

int StepEngine::NextIndex(int ended, int exited_loop, int& looped_back) {
  looped_back = -1;
  for (size_t k = plan_.loops.size(); k-- > 0;) {
    const Loop& l = plan_.loops[k];
    if (l.last_step != ended) continue;
    if (exited_loop >= 0 && Contains(static_cast<size_t>(exited_loop), k)) continue;
    LoopState& st = loops_[k];
    ++st.iter;
    if (l.count == 0 || st.iter < l.count) {
      // Inner loops run afresh on the next pass.
      for (size_t inner = k + 1; inner < plan_.loops.size(); ++inner)
        if (Contains(k, inner)) loops_[inner].iter = 0;
      looped_back = static_cast<int>(k);
      return l.first_step;
    }
    st.iter = 0;
  }
  return ended + 1;
}

EngineOutput StepEngine::Start(double t_s, const std::optional<Reading>& initial) {
  EngineOutput out;
  out.changes.push_back({-1, 0, "start"});
  last_ = initial;
  before_last_.reset();
  cycle_ = 0;
  last_was_charge_ = false;
  EnterStep(0, t_s, -1, out);
  if (out.finished) out.changes.back().started_step = -1;
  out.changes.back().pass = pass();
  out.changes.back().cycle = cycle_;
  return out;
}

double StepEngine::MinPeriod() const {
  const Step* s = current_step();
  return s != nullptr ? s->sample_period_s : 0.0;
}

std::optional<std::string> StepEngine::EndReason(const EndConditions& e, const Reading& r, double elapsed, double charge_mah,
                                                 double energy_wh) const {
  if (e.voltage_below_v && r.voltage_v <= *e.voltage_below_v)
    return fmt::format("voltage {:.3f} V <= {:.3f} V", r.voltage_v, *e.voltage_below_v);
  if (e.voltage_above_v && r.voltage_v >= *e.voltage_above_v)
    return fmt::format("voltage {:.3f} V >= {:.3f} V", r.voltage_v, *e.voltage_above_v);
  // A taper is judged only after two sample periods in the step: a supply
  // that is still ramping up must not end a charge at once.
  if (e.current_below_a && std::abs(r.current_a) <= *e.current_below_a && elapsed >= 2.0 * MinPeriod())
    return fmt::format("current {:.4f} A <= {:.4f} A", std::abs(r.current_a), *e.current_below_a);
  if (e.time_s && elapsed >= *e.time_s - kEps) return fmt::format("time {:.1f} s >= {:.1f} s", elapsed, *e.time_s);
  if (e.charge_mah && std::abs(charge_mah) >= *e.charge_mah)
    return fmt::format("charge {:.2f} mAh >= {:.2f} mAh", std::abs(charge_mah), *e.charge_mah);
  if (e.energy_wh && std::abs(energy_wh) >= *e.energy_wh)
    return fmt::format("energy {:.4f} Wh >= {:.4f} Wh", std::abs(energy_wh), *e.energy_wh);
  if (e.temperature_above_c && r.temperature_c >= *e.temperature_above_c)
    return fmt::format("temperature {:.1f} °C >= {:.1f} °C", r.temperature_c, *e.temperature_above_c);
  return std::nullopt;
}

EngineOutput StepEngine::OnReading(const Reading& r) {
  EngineOutput out;
  if (finished()) {
    out.finished = true;
    return out;
  }
  Integrate(r);
  now_s_ = r.t_s;
  const Step& step = plan_.steps[static_cast<size_t>(step_)];
  if (r.t_s >= next_regular_s_ - kEps) {
    out.log = true;
    next_regular_s_ = r.t_s + step.sample_period_s;
  } else if (r.t_s - applied_at_s_ <= plan_.edge_settle_s + kEps) {
    // The reading just after an edge is stored and restarts the period.
    out.log = true;
    next_regular_s_ = r.t_s + step.sample_period_s;
  }
  CompletePulseEdge(r, out);

  auto end_step = [&](int ended, int exited_loop, const std::string& reason) {
    if (pulse_edge_) {
      StepResult res = *pulse_edge_;
      res.valid = false;
      res.why_invalid = "the step ended before U2 was due";
      out.results.push_back(std::move(res));
      pulse_edge_.reset();
    }
    int looped_back = -1;
    int next = NextIndex(ended, exited_loop, looped_back);
    int was = step_;
    const double q = step_charge_mah_, e = step_energy_wh_, vs = step_vs_;
    EnterStep(next, r.t_s, looped_back, out);
    StepChange c{was, finished() ? -1 : step_, reason};
    c.ended_charge_mah = q;
    c.ended_energy_wh = e;
    c.ended_voltage_time_vs = vs;
    c.pass = finished() ? 0 : pass();
    c.cycle = cycle_;
    out.changes.push_back(std::move(c));
  };

  // Repeat-until loops, outermost first.
  for (size_t li = 0; li < plan_.loops.size(); ++li) {
    const Loop& l = plan_.loops[li];
    if (l.count != 0 || step_ < l.first_step || step_ > l.last_step) continue;
    const LoopState& st = loops_[li];
    if (auto why = EndReason(l.until, r, r.t_s - st.start_s, st.charge_mah, st.energy_wh)) {
      end_step(l.last_step, static_cast<int>(li), fmt::format("repeat (line {}) done: {}", l.source_line, *why));
      return out;
    }
  }

  if (step.kind == StepKind::kChamberSet) {
    // The set point went out when the step began; the reading after it ends the step.
    end_step(step_, -1, fmt::format("chamber set to {:.1f} degC", step.chamber_c));
    return out;
  }
  if (step.kind == StepKind::kChamberSoak && soak_) {
    if (!r.chamber_c) {
      out.abort_reason = "chamber soak: no chamber reading";
      Schedule(r.t_s, false);
      return out;
    }
    SoakJudge::State st = soak_->OnReading(r.t_s, *r.chamber_c);
    if (st == SoakJudge::State::kStable) {
      out.log = true;
      end_step(step_, -1, "chamber " + soak_->Describe());
      return out;
    }
    if (st == SoakJudge::State::kTimedOut) {
      out.abort_reason = "chamber soak failed: " + soak_->Describe();
      Schedule(r.t_s, false);
      return out;
    }
  }
  if (step.kind == StepKind::kResistanceTest) {
    double seg_end = seg_start_s_ + step.segments[seg_].duration_s;
    if (r.t_s >= seg_end - kEps) {
      if (seg_ == 0) {
        // U1 at the end of the first current (IEC 61960-3 clause 7.7).
        dcir_ = FirstReading("dcir step", seg_end, r);
        seg_ = 1;
        seg_start_s_ = seg_end;
        out.log = true;
        Emit(SegmentSetpoint(step.segments[1]), out);
        Schedule(r.t_s, true);
        return out;
      }
      out.log = true;
      StepResult res = dcir_.value_or(StepResult{});
      res.u2_v = r.voltage_v;
      res.i2_a = r.current_a;
      res.t2_s = r.t_s;
      double di = res.i2_a - res.i1_a;
      std::string reason;
      if (std::abs(di) > 1e-9) {
        res.value = (res.u1_v - res.u2_v) / di;
        res.detail = fmt::format("R_dc = {:.6g} Ohm = ({:.6f} V - {:.6f} V) / ({:.6f} A - {:.6f} A) at t = {:.3f} s and {:.3f} s",
                                 res.value, res.u1_v, res.u2_v, res.i2_a, res.i1_a, res.t1_s, res.t2_s);
        reason = fmt::format("resistance measured: {:.2f} mOhm", res.value * 1000.0);
      } else {
        res.valid = false;
        res.why_invalid = "the two currents read the same";
        reason = "resistance not measured: the two currents read the same";
      }
      out.results.push_back(res);
      end_step(step_, -1, reason);
      return out;
    }
  } else if (auto why = EndReason(step.end, r, r.t_s - step_start_s_, step_charge_mah_, step_energy_wh_)) {
    end_step(step_, -1, *why);
    return out;
  }

  CheckRegulation(r, out);
  if (out.abort_reason) {
    Schedule(r.t_s, false);  // the caller stops; the engine stays consistent
    return out;
  }

  bool changed = false;
  if (HasSegments(step.kind)) {
    // Edges due by now: this reading was the one just before the edge.
    size_t from = seg_;
    double edge_t = seg_start_s_;
    while (r.t_s >= seg_start_s_ + step.segments[seg_].duration_s - kEps) {
      from = seg_;
      seg_start_s_ += step.segments[seg_].duration_s;
      edge_t = seg_start_s_;
      seg_ = (seg_ + 1) % step.segments.size();
      changed = true;
    }
    if (changed) {
      Emit(SegmentSetpoint(step.segments[seg_]), out);
      // Two-current DC-IR at the edge: U1 is this reading (the end of the
      // level before the edge), U2 is read dcir_delay_s after it.
      const Segment& a = step.segments[from];
      const Segment& b = step.segments[seg_];
      if (a.mode == LoadMode::kCurrent && b.mode == LoadMode::kCurrent &&
          std::abs(b.level - a.level) >= plan_.dcir_min_step_a - kEps) {
        StepResult res = FirstReading("pulse edge", edge_t, r);
        if (r.t_s - edge_t > plan_.edge_settle_s + kEps) {
          res.valid = false;
          res.why_invalid = fmt::format("no reading at the edge (the nearest came {:.3f} s later)", r.t_s - edge_t);
          out.results.push_back(std::move(res));
        } else if (b.duration_s < plan_.dcir_delay_s - kEps) {
          res.valid = false;
          res.why_invalid =
              fmt::format("the level after the edge lasts {:g} s, shorter than the {:g} s delay", b.duration_s, plan_.dcir_delay_s);
          out.results.push_back(std::move(res));
        } else {
          pulse_edge_ = res;
          out.log = true;
        }
      }
    }
  }
  if (!out.results.empty()) out.log = true;
  Schedule(r.t_s, changed);
  return out;
}

void StepEngine::Integrate(const Reading& r) {
  if (finished()) return;
  if (last_ && r.t_s > last_->t_s) {
    before_last_ = last_;
    double dt_h = (r.t_s - last_->t_s) / 3600.0;
    double dq = 0.5 * (r.current_a + last_->current_a) * dt_h * 1000.0;
    double de = 0.5 * (r.current_a * r.voltage_v + last_->current_a * last_->voltage_v) * dt_h;
    step_charge_mah_ += dq;
    step_energy_wh_ += de;
    step_vs_ += 0.5 * (r.voltage_v + last_->voltage_v) * (r.t_s - last_->t_s);
    for (size_t li = 0; li < loops_.size(); ++li) {
      const Loop& l = plan_.loops[li];
      if (l.first_step <= step_ && step_ <= l.last_step) {
        loops_[li].charge_mah += dq;
        loops_[li].energy_wh += de;
      }
    }
  }
  last_ = r;
}

std::string StepEngine::Snapshot(double t_s) const {
  std::string s = fmt::format("v2 step={} elapsed={:.17g} charge={:.17g} energy={:.17g} cycle={} vs={:.17g}", step_,
                              t_s - step_start_s_, step_charge_mah_, step_energy_wh_, cycle_, step_vs_);
  if (dcir_) s += fmt::format(" u1={:.17g} i1={:.17g} t1={:.17g}", dcir_->u1_v, dcir_->i1_a, dcir_->t1_s - t_s);
  for (size_t i = 0; i < loops_.size(); ++i)
    s += fmt::format(" loop{}={}:{:.17g}:{:.17g}:{:.17g}", i, loops_[i].iter, t_s - loops_[i].start_s, loops_[i].charge_mah,
                     loops_[i].energy_wh);
  return s;
}

Result<EngineOutput> StepEngine::Restore(std::string_view snapshot, double t_s) {
  std::istringstream in{std::string(snapshot)};
  std::string version;
  in >> version;
  if (version != "v1" && version != "v2") return InvalidInput(fmt::format("unreadable engine snapshot '{}'", snapshot));
  std::map<std::string, std::string> kv;
  for (std::string tok; in >> tok;) {
    size_t eq = tok.find('=');
    if (eq == std::string::npos) return InvalidInput(fmt::format("unreadable engine snapshot '{}'", snapshot));
    kv[tok.substr(0, eq)] = tok.substr(eq + 1);
  }
  auto num = [&](const std::string& key, double& v) -> bool {
    auto it = kv.find(key);
    if (it == kv.end()) return false;
    char* end = nullptr;
    v = std::strtod(it->second.c_str(), &end);
    return end != it->second.c_str() && *end == '\0' && std::isfinite(v);
  };
  double step = 0, elapsed = 0, charge = 0, energy = 0;
  if (!num("step", step) || !num("elapsed", elapsed) || !num("charge", charge) || !num("energy", energy))
    return InvalidInput(fmt::format("unreadable engine snapshot '{}'", snapshot));
  if (step < 0 || step > static_cast<double>(plan_.steps.size()) || step != std::floor(step))
    return InvalidInput(fmt::format("snapshot step {} is outside the procedure ({} steps)", step, plan_.steps.size()));
  std::vector<LoopState> loops(plan_.loops.size());
  for (size_t i = 0; i < loops.size(); ++i) {
    auto it = kv.find(fmt::format("loop{}", i));
    if (it == kv.end()) continue;
    // "iter:ago:charge:energy", each checked (a damaged snapshot must not
    // turn into an out-of-range iteration count).
    double f[4] = {0, 0, 0, 0};
    std::string_view rest = it->second;
    bool good = true;
    for (int k = 0; k < 4 && good; ++k) {
      size_t colon = k < 3 ? rest.find(':') : rest.size();
      if (colon == std::string_view::npos) {
        good = false;
        break;
      }
      std::string_view part = rest.substr(0, colon);
      auto [ptr, ec] = std::from_chars(part.data(), part.data() + part.size(), f[k]);
      good = ec == std::errc() && ptr == part.data() + part.size() && std::isfinite(f[k]);
      rest = colon < rest.size() ? rest.substr(colon + 1) : std::string_view();
    }
    if (!good || f[0] < 0 || f[0] > 1e9 || f[0] != std::floor(f[0]))
      return InvalidInput(fmt::format("unreadable loop state in engine snapshot '{}'", snapshot));
    loops[i].iter = static_cast<int>(f[0]);
    loops[i].charge_mah = f[2];
    loops[i].energy_wh = f[3];
    loops[i].start_s = t_s - f[1];
  }
  EngineOutput out;
  applied_.reset();
  last_.reset();
  before_last_.reset();
  int index = static_cast<int>(step);
  // The cycle the step belonged to (snapshots before cycles were recorded: 0).
  double cycle = 0;
  if (num("cycle", cycle) && cycle >= 0 && cycle <= 1e9 && cycle == std::floor(cycle)) {
    cycle_ = static_cast<int>(cycle);
  } else {
    cycle_ = 0;
  }
  // Entering a charge step must not open another cycle here.
  last_was_charge_ = index < static_cast<int>(plan_.steps.size()) &&
                     plan_.steps[static_cast<size_t>(index)].kind == StepKind::kCharge;
  // Enter the step, then put the saved loop state back.
  EnterStep(index, t_s - elapsed, -1, out);
  loops_ = loops;
  step_charge_mah_ = charge;
  step_energy_wh_ = energy;
  double vs = 0;
  step_vs_ = num("vs", vs) ? vs : 0.0;
  double u1 = 0, i1 = 0, t1 = 0;
  if (num("u1", u1) && num("i1", i1) && num("t1", t1)) {
    StepResult res;
    res.step = index;
    res.name = "dc-resistance";
    res.u1_v = u1;
    res.i1_a = i1;
    res.t1_s = t_s + t1;
    dcir_ = res;
  }
  if (!finished()) {
    PlaceSegment(t_s);
    next_regular_s_ = t_s + plan_.steps[static_cast<size_t>(step_)].sample_period_s;
    now_s_ = t_s;
    applied_.reset();
    out.setpoint.reset();
    Emit(SetpointFor(plan_.steps[static_cast<size_t>(step_)]), out);
    Schedule(t_s, true);
  }
  return out;
}

}  // namespace kp
