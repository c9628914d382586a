#include "rig/sim_rig.h"

#include <fmt/format.h>

#include <algorithm>
#include <charconv>
#include <cmath>

#include "drivers/inproc_transport.h"
#include "drivers/sim/cell_file.h"

namespace kp {

SimRig::SimRig(Clock& clock, sim::CellParams cell, sim::SimOptions options) : bench_(cell, clock, options) {
  // The chamber starts (and drifts back to) the cell's own surroundings, so a
  // run that never drives it sees the same cell as before.
  sim::SimChamberOptions chamber_options;
  chamber_options.room_c = cell.ambient_c;
  chamber_dev_ = std::make_unique<sim::SimChamber>(clock, chamber_options, &bench_);
  chamber_session_ = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(*chamber_dev_, clock, "inproc:sim-chamber"), clock);
  chamber_ = std::make_unique<ChamberDriver>(*chamber_session_, ChamberCommands{},
                                             ChamberLimits{chamber_options.min_c, chamber_options.max_c});
  load_session_ = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(bench_.load(), clock, "inproc:sim-load"), clock);
  meter_session_ = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(bench_.meter(), clock, "inproc:sim-meter"), clock);
  thermo_session_ = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(bench_.thermometer(), clock, "inproc:sim-temp"), clock);
  load_ = std::make_unique<LoadDriver>(*load_session_);
  meter_ = std::make_unique<MeterDriver>(*meter_session_);
  thermometer_ = std::make_unique<ThermometerDriver>(*thermo_session_);
  supply_session_ = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(bench_.supply(), clock, "inproc:sim-supply"), clock);
  supply_ = std::make_unique<SupplyDriver>(*supply_session_);
  // The equipment record: each simulated instrument's *IDN? reply, asked of
  // the device itself (no query goes through the sessions the run counts).
  struct Dev {
    const char* name;
    const char* roles;
    LineDevice& device;
  };
  for (const Dev& d : {Dev{"sim-load", "load", bench_.load()}, Dev{"sim-meter", "meter", bench_.meter()},
                       Dev{"sim-temp", "thermometer", bench_.thermometer()}, Dev{"sim-supply", "supply", bench_.supply()}}) {
    InstrumentRecord r;
    r.name = d.name;
    r.roles = d.roles;
    r.address = std::string("inproc:") + d.name;
    r.profile = "built-in simulator";
    r.identity = d.device.HandleLine("*IDN?").value_or("");
    SplitIdentity(r);
    instruments_.push_back(std::move(r));
  }
}

RigRoles SimRig::roles() { RigRoles r;
  r.load = load_.get();
  r.meter = meter_.get();
  r.thermometer = thermometer_.get();
  r.supply = supply_.get();
  r.chamber = chamber_.get();
  r.description = "sim";
  r.load_in_process = true;
  r.bench = "sim";
  r.instruments = instruments_;
  return r; }

void SimRig::SetTrace(const ScpiTraceHook& hook) {
  for (ScpiSession* s : {load_session_.get(), meter_session_.get(), thermo_session_.get(), supply_session_.get(),
                         chamber_session_.get()})
    if (s != nullptr) s->SetTrace(hook);
}

}  // namespace kp

namespace kp {

Result<sim::CellParams> BuildSimCell(const SimCellChoice& choice) {
  if (!(choice.start_soc >= 0.0 && choice.start_soc <= 1.0))
    return InvalidInput(fmt::format("simulated cell: state of charge {} is outside 0..100 %", choice.start_soc));
  KP_ASSIGN_OR_RETURN(sim::CellPreset cell, sim::LoadCell(choice.preset));
  sim::CellParams params = choice.rated_mah > 0 ? sim::ScaleCell(cell.params, choice.rated_mah / 1000.0) : cell.params;
  if (choice.seed != 0) params = sim::VaryCell(params, cell.spread, choice.seed);
  params.initial_soc = choice.start_soc;
  if (choice.ambient_c) {
    if (!(*choice.ambient_c >= -60.0 && *choice.ambient_c <= 100.0))
      return InvalidInput(fmt::format("simulated cell: ambient {} °C is outside -60..100 °C", *choice.ambient_c));
    params.ambient_c = *choice.ambient_c;
  }
  if (!(choice.fade >= 0.0 && choice.fade <= 0.9))
    return InvalidInput(fmt::format("simulated cell: capacity fade {} is outside 0..90 %", choice.fade));
  if (choice.fade > 0.0) {
    const double growth = 1.0 + kResistanceGrowthPerFade * choice.fade;
    params.capacity_ah *= 1.0 - choice.fade;
    params.r0_ohm *= growth;
    params.r1_ohm *= growth;
    params.r2_ohm *= growth;
  }
  return params;
}

std::string SimCellText(const SimCellChoice& c) {
  std::string out = fmt::format("preset={} rated_mah={:.17g} seed={} soc={:.17g}", c.preset, c.rated_mah, c.seed, c.start_soc);
  if (c.ambient_c) out += fmt::format(" ambient_c={:.17g}", *c.ambient_c);
  if (c.fade > 0.0) out += fmt::format(" fade={:.17g}", c.fade);
  return out;
}

Result<SimCellChoice> ParseSimCellText(std::string_view text) {
  auto bad = [&](std::string_view why) {
    return InvalidInput(fmt::format("simulated-cell record '{}': {}", text, why));
  };
  const size_t p = text.find("preset="), r = text.rfind(" rated_mah=");
  if (p != 0 || r == std::string_view::npos || r < 7) return bad("expected preset=... rated_mah=... seed=... soc=...");
  SimCellChoice c;
  c.preset = std::string(text.substr(7, r - 7));
  std::string_view rest = text.substr(r + 1);
  auto number = [&](std::string_view key, auto& out) -> bool {
    const size_t at = rest.find(key);
    if (at == std::string_view::npos) return false;
    const char* b = rest.data() + at + key.size();
    const char* e = rest.data() + rest.size();
    const char* stop = std::find(b, e, ' ');
    auto res = std::from_chars(b, stop, out);
    return res.ec == std::errc() && res.ptr == stop;
  };
  if (!number("rated_mah=", c.rated_mah) || !number("seed=", c.seed) || !number("soc=", c.start_soc))
    return bad("expected preset=... rated_mah=... seed=... soc=...");
  if (rest.find("ambient_c=") != std::string_view::npos) {
    double a = 0.0;
    if (!number("ambient_c=", a)) return bad("ambient_c must be a number");
    c.ambient_c = a;
  }
  if (rest.find("fade=") != std::string_view::npos && !number("fade=", c.fade)) return bad("fade must be a number");
  if (c.preset.empty() || !std::isfinite(c.rated_mah) || !(c.start_soc >= 0 && c.start_soc <= 1)) return bad("value out of range");
  return c;
}

sim::CellState ReplayLoggedCell(const sim::CellParams& cell, SampleSpan samples, const std::vector<EventRow>& events) {
  sim::CellModel m(cell);
  std::vector<double> gaps;  // run times of "gap" events
  for (const EventRow& e : events)
    if (e.kind == "gap") gaps.push_back(e.t_s);
  std::sort(gaps.begin(), gaps.end());
  for (size_t i = 1; i < samples.size(); ++i) {
    const Sample& a = samples[i - 1];
    const Sample& b = samples[i];
    const double dt = b.t_s - a.t_s;
    if (!(dt > 0)) continue;
    // A gap event inside (a, b]: no current flowed between the two readings.
    auto g = std::upper_bound(gaps.begin(), gaps.end(), a.t_s);
    const bool gap = g != gaps.end() && *g <= b.t_s;
    const double current_a = gap ? 0.0 : b.current_a;
    // Steps of at most a second under load, as the simulated bench integrates;
    // a minute at rest (the model is exact for constant current but for the
    // slow coupling through temperature), so long rests replay quickly.
    const double max_step_s = current_a == 0.0 ? 60.0 : 1.0;
    const int n = static_cast<int>(std::clamp(std::ceil(dt / max_step_s), 1.0, 1e6));
    for (int k = 0; k < n; ++k) m.Advance(dt / n, current_a);
  }
  return m.state();
}

}  // namespace kp
