#include "ui/report/run_report.h"

#include "rig/judgeable.h"

#include "procedures/procedure_parser.h"
#include "rig/commanded_segments.h"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <ctime>
#include <nlohmann/json.hpp>

#include "analysis/duration_format.h"
#include "analysis/html_report.h"
#include "analysis/svg_plot.h"
#include "rig/version.h"

namespace kp {
namespace {

using nlohmann::json;

// The end voltage a step stopped at, from the engine's reason text
// "voltage 2.749 V <= 2.750 V".
std::optional<double> CutoffFromReason(const std::string& reason) {
  size_t v = reason.find("voltage ");
  if (v == std::string::npos) return std::nullopt;
  size_t p = reason.find("<= ", v);
  if (p == std::string::npos) return std::nullopt;
  const char* b = reason.c_str() + p + 3;
  char* e = nullptr;
  double volts = std::strtod(b, &e);
  if (e == b) return std::nullopt;
  return volts;
}

json Optional(const std::optional<double>& v) { return v ? json(*v) : json(nullptr); }

}  // namespace

Result<RunReport> BuildRunReport(Store& store, int64_t run_id, const ReportOptions& options) {
  RunReport rep;
  rep.options = options;
  KP_ASSIGN_OR_RETURN(rep.run, store.GetRun(run_id));
  KP_ASSIGN_OR_RETURN(rep.steps, store.LoadSteps(run_id));
  KP_ASSIGN_OR_RETURN(std::vector<EventRow> events, store.LoadEvents(run_id));
  KP_ASSIGN_OR_RETURN(rep.totals, store.LoadRunTotals(run_id));
  KP_ASSIGN_OR_RETURN(std::vector<DcirRow> dcir_rows, store.LoadDcirPoints(run_id));
  KP_ASSIGN_OR_RETURN(rep.equipment, store.LoadEquipment(run_id));
  for (const EventRow& e : events)
    if (e.kind == "note") rep.notes.push_back(e);

  RunContext ctx;
  ctx.rated_mah = rep.run.rated_mah;
  ctx.chemistry = rep.run.chemistry;
  ctx.dcir = options.dcir;
  ctx.brownout_v = options.brownout_v;
  if (rep.totals.thermometer_tolerance_c) ctx.temperature_tolerance_c = *rep.totals.thermometer_tolerance_c;
  // The procedure stored with the run: commanded levels of rows recorded
  // before step records, the pulse / duty-cycle timelines, the end voltage.
  ParseOutput parsed = ParseProcedure(rep.run.procedure_text, rep.run.procedure_name);
  const Plan* plan = parsed.ok() ? &parsed.plan : nullptr;
  bool migrated = false;
  for (const StepRow& s : rep.steps) {
    StepRecord r = StepRecordOf(s);
    migrated = migrated || s.migrated;
    if (plan != nullptr && s.index >= 0 && s.index < static_cast<int>(plan->steps.size())) {
      const Step& st = plan->steps[static_cast<size_t>(s.index)];
      if (s.migrated) {
        r.mode = StepModeName(st);
        r.level = StepLevel(st);
      }
      r.segments = SegmentsOfInstance(st, s, events);
    }
    if (!ctx.cutoff_v && ReachedVoltageCutoff(s.end_reason)) ctx.cutoff_v = CutoffFromReason(s.end_reason);
    ctx.steps.push_back(std::move(r));
  }
  if (!ctx.cutoff_v && plan != nullptr && plan->cell.cutoff_v > 0) ctx.cutoff_v = plan->cell.cutoff_v;
  if (plan != nullptr) rep.max_temp_c = plan->limits.max_temp_c;
  for (const EventRow& e : events)
    if (e.kind == "abort" && rep.run.outcome == Outcome::kAborted) rep.abort_t_s = e.t_s, rep.abort_reason = e.message;
  if (plan != nullptr) NoteExpectedSpacing(*plan, ctx.steps);
  // DC-IR points the engine measured (runs recorded with step records).
  ctx.dcir_recorded = !rep.steps.empty() && !migrated;
  for (const DcirRow& p : dcir_rows) {
    if (!p.valid) {
      ctx.dcir_invalid.push_back(fmt::format("{}: {}", p.source, p.why_invalid));
      continue;
    }
    DcirPoint d;
    d.t_edge_s = p.t_edge_s;
    d.u1_v = p.u1_v, d.i1_a = p.i1_a;
    d.u2_v = p.u2_v, d.i2_a = p.i2_a;
    d.t_u2_s = p.t2_s.value_or(p.t_edge_s);
    d.resistance_ohm = p.resistance_ohm;
    rep.dcir_sources.push_back(p.source);
    ctx.engine_dcir.push_back(d);
  }
  // Gaps the runner logged (e.g. on resume): the sample interval holding the event.
  for (const EventRow& e : events)
    if (e.kind == "gap") ctx.gap_event_times.push_back(e.t_s);
  ctx.outage_mah = OutageCharges(events);  // charge counted for outages on resume
  // One pass over the samples, straight from the database: memory stays
  // bounded whatever the run's length.
  KP_ASSIGN_OR_RETURN(auto range, store.SampleTimeRange(run_id));
  RunStream stream(ctx, range ? range->first : 0.0, range ? range->second : 0.0);
  KP_RETURN_IF_ERROR(store.ForEachSample(run_id, [&](const Sample& s) {
    stream.Add(s);
    return Status::Ok();
  }));
  rep.analysis = stream.Finish();
  rep.plots = stream.TakePlots();
  rep.figures = rep.analysis.totals;
  rep.context = std::move(ctx);
  if (!rep.context.dcir_recorded) rep.dcir_sources.assign(rep.analysis.dcir.size(), "samples at a commanded edge");
  rep.verdict = JudgeCapacity(rep.analysis.discharge_charge_mah, rep.run.rated_mah);
  // Verdicts only on finished discharges seen (nearly) throughout; an outage
  // counted on resume is named beside the verdict (rig/judgeable.h).
  if (std::string why = WhyNotJudged(rep.run, rep.analysis); !why.empty()) {
    WithholdVerdicts(rep.analysis, why);
    rep.verdict.pass = false;
    rep.verdict.text = "not judged: " + why;
  }
  bool estimated = false;
  if (std::string outage = OutageNote(events, estimated); !outage.empty()) {
    const std::string note = estimated ? " [depends on an estimated outage: " + outage + "]" : " [outage counted: " + outage + "]";
    rep.analysis.verdict.text += note;
    rep.verdict.text += note;
  }
  return rep;
}

nlohmann::json RunRowJson(const RunRow& r) {
  return json{{"id", r.id},
              {"cell", r.cell},
              {"chemistry", r.chemistry},
              {"procedure", r.procedure_name},
              {"rig", r.rig},
              {"outcome", OutcomeName(r.outcome)},
              {"reason", r.reason},
              {"started_at", r.started_at},
              {"ended_at", r.ended_at},
              {"rated_mAh", r.rated_mah},
              {"samples", r.sample_count},
              {"schema_version", kRunRecordSchemaVersion},
              {"uuid", r.uuid},
              {"bench", r.bench},
              {"host", r.host},
              {"operator", r.operator_name},
              {"cell_serial", r.cell_serial},
              {"cell_lot", r.cell_lot},
              {"cell_part", r.cell_part},
              {"tags", r.tags},
              {"verdict", r.verdict.empty() ? json(nullptr) : json(r.verdict)}};
}

nlohmann::json EquipmentJson(const EquipmentRow& e) {
  json inst = json::array();
  for (const InstrumentRecord& i : e.instruments)
    inst.push_back({{"name", i.name},
                    {"roles", i.roles},
                    {"address", i.address},
                    {"profile", i.profile},
                    {"identity", i.identity},
                    {"manufacturer", i.manufacturer},
                    {"model", i.model},
                    {"serial", i.serial},
                    {"firmware", i.firmware},
                    {"voltage_gain", i.voltage_gain},
                    {"voltage_offset_V", i.voltage_offset_v},
                    {"current_gain", i.current_gain},
                    {"current_offset_A", i.current_offset_a},
                    {"temperature_gain", i.temperature_gain},
                    {"temperature_offset_C", i.temperature_offset_c},
                    {"calibrated_on", i.calibrated_on.empty() ? json(nullptr) : json(i.calibrated_on)}});
  return json{{"instruments", inst},
              {"rig_text", e.rig_text},
              {"software_version", e.software_version},
              {"software_commit", e.software_commit}};
}

std::string VerdictWord(const RunReport& rep) {
  const CapacityJudgement& v = rep.analysis.verdict;
  if (!v.judged) return "not judged";
  return v.capacity_pass ? "pass" : "fail";
}

Status RecordVerdict(Store& store, const RunReport& rep) {
  if (rep.run.outcome == Outcome::kRunning) return Status::Ok();
  const CapacityJudgement& v = rep.analysis.verdict;
  return store.SetVerdict(rep.run.id, VerdictWord(rep), v.text, v.judged ? std::optional<double>(v.percent_of_rated) : std::nullopt);
}

std::vector<MethodNote> MethodNotes(const RunReport& rep) {
  const RunAnalysis& a = rep.analysis;
  std::vector<MethodNote> m;
  m.push_back({"charge and energy", IntegrationMethodText(a.method) + "; charge = integral of I dt, energy = integral of V·I dt",
               "common practice, no source"});
  if (!a.verdict.method.empty()) {
    std::string deviations = a.verdict.judged ? std::string() : "not judged: " + a.verdict.not_judged_why;
    for (const ConditionCheck& c : a.verdict.conditions)
      if (!c.met) deviations += (deviations.empty() ? "" : "; ") + c.name + " not met (" + c.observed + ")";
    m.push_back({"capacity verdict", a.verdict.method + (deviations.empty() ? "" : "; deviations: " + deviations),
                 "analysis/METHODS.md, \"Verdict\""});
  }
  if (!a.dcir.empty() || !a.dcir_left_out.empty())
    m.push_back({"DC internal resistance",
                 "two-current method, R = (U1 - U2) / (I2 - I1), at commanded current edges only; U2 read the set delay "
                 "after the edge",
                 "IEC 61960-3:2017 clause 7.7 (sub-clause numbering from memory)"});
  if (!a.gaps.empty())
    m.push_back({"gaps", "bridged by the trapezoid between the samples on either side and flagged", "common practice, no source"});
  return m;
}

nlohmann::json RunReportJson(const RunReport& rep) {
  const RunFigures& f = rep.figures;
  const RunAnalysis& a = rep.analysis;
  json j{{"run", rep.run.id},
         {"cell", rep.run.cell},
         {"chemistry", rep.run.chemistry},
         {"procedure", rep.run.procedure_name},
         {"outcome", OutcomeName(rep.run.outcome)},
         {"reason", rep.run.reason},
         {"charge_mAh", a.discharge_charge_mah},
         {"energy_Wh", a.discharge_energy_wh},
         {"record_charge_mAh", f.charge_mah},
         {"record_energy_Wh", f.energy_wh},
         {"integration_method", IntegrationMethodName(a.method)},
         {"integration", IntegrationMethodText(a.method)},
         {"mean_voltage_V", a.main_discharge_step >= 0 ? a.mean_voltage_v : f.mean_voltage_v},
         {"mid_voltage_V", a.mid_voltage_v},
         {"min_voltage_V", f.min_voltage_v},
         {"duration_s", f.duration_s},
         {"discharge_duration_s", a.discharge_duration_s},
         {"time_to_cutoff_s", Optional(a.time_to_cutoff_s)},
         {"average_current_A", a.average_current_a},
         {"peak_current_A", a.peak_current_a},
         {"pulsed", a.pulsed},
         {"start_temperature_C", a.start_temperature_c},
         {"max_temperature_C", a.max_temperature_c},
         {"temperature_rise_C", a.temperature_rise_c},
         {"samples", f.sample_count},
         {"rated_mAh", rep.run.rated_mah},
         {"percent_of_rated", a.verdict.percent_of_rated},
         {"judged", a.verdict.judged},
         {"pass", a.verdict.judged && a.verdict.capacity_pass},
         {"conditions_met", a.verdict.conditions_met},
         {"verdict", a.verdict.text},
         {"method", a.verdict.method}};
  json conds = json::array();
  for (const ConditionCheck& c : a.verdict.conditions)
    conds.push_back({{"name", c.name}, {"required", c.required}, {"observed", c.observed}, {"met", c.met}});
  j["conditions"] = conds;
  j["schema_version"] = kReportSchemaVersion;
  json methods = json::array();
  for (const MethodNote& n : MethodNotes(rep)) methods.push_back({{"figure", n.figure}, {"method", n.method}, {"source", n.source}});
  j["methods"] = methods;
  j["run_record"] = RunRowJson(rep.run);
  j["equipment"] = EquipmentJson(rep.equipment);
  json notes = json::array();
  for (const EventRow& n : rep.notes) notes.push_back({{"t_s", n.t_s}, {"wall_at", n.wall_at}, {"text", n.message}});
  j["notes"] = notes;
  j["net_charge_mAh"] = rep.totals.net_mah;
  j["net_energy_Wh"] = rep.totals.net_wh;
  j["charged_mAh"] = Optional(rep.totals.charged_mah);
  j["discharge_description"] = a.discharge_description;
  j["constant_current"] = a.constant_current;
  j["main_discharge"] = a.main_discharge ? json(*a.main_discharge) : json(nullptr);
  json steps = json::array();
  for (const InstanceFigures& g : a.instances) {
    const StepFigures& s = g.f;
    steps.push_back({{"step", s.step},
                     {"number", g.number},
                     {"kind", g.kind},
                     {"mode", g.mode},
                     {"level", Optional(g.level)},
                     {"pass", g.pass},
                     {"cycle", g.cycle},
                     {"started_s", g.started_s},
                     {"ended_s", g.ended_s},
                     {"end_reason", g.end_reason},
                     {"held_s", g.held_s},
                     {"integration_method", IntegrationMethodName(g.method)},
                     {"start_s", s.t_start_s},
                     {"end_s", s.t_end_s},
                     {"charge_mAh", s.charge_mah},
                     {"energy_Wh", s.energy_wh},
                     {"mean_current_A", s.mean_current_a},
                     {"mean_voltage_V", s.mean_voltage_v},
                     {"min_voltage_V", s.min_voltage_v},
                     {"samples", s.samples}});
  }
  j["steps"] = steps;
  json discharges = json::array();
  for (size_t k = 0; k < a.discharges.size(); ++k) {
    const DischargeFigures& d = a.discharges[k];
    json conds = json::array();
    for (const ConditionCheck& c : d.judgement.conditions)
      conds.push_back({{"name", c.name}, {"required", c.required}, {"observed", c.observed}, {"met", c.met}});
    discharges.push_back({{"index", k},
                          {"first_step_number", a.instances[d.first].number},
                          {"last_step_number", a.instances[d.last].number},
                          {"judged_step_number", a.instances[d.judged].number},
                          {"cycle", d.cycle},
                          {"start_s", d.start_s},
                          {"end_s", d.end_s},
                          {"charge_mAh", d.charge_mah},
                          {"energy_Wh", d.energy_wh},
                          {"mean_voltage_V", d.mean_voltage_v},
                          {"mid_voltage_V", d.mid_voltage_v},
                          {"min_voltage_V", d.min_voltage_v},
                          {"average_current_A", d.average_current_a},
                          {"peak_current_A", d.peak_current_a},
                          {"time_to_cutoff_s", Optional(d.time_to_cutoff_s)},
                          {"reached_cutoff", d.reached_cutoff},
                          {"pulsed", d.pulsed},
                          {"description", d.description},
                          {"integration_method", IntegrationMethodName(d.method)},
                          {"percent_of_rated", d.judgement.percent_of_rated},
                          {"judged", d.judgement.judged},
                          {"pass", d.judgement.judged && d.judgement.capacity_pass},
                          {"conditions_met", d.judgement.conditions_met},
                          {"verdict", d.judgement.text},
                          {"conditions", conds}});
  }
  j["discharges"] = discharges;
  j["attempts"] = a.attempts;
  json cycles = json::array();
  for (const CycleFigures& c : a.cycles)
    cycles.push_back({{"cycle", c.cycle},
                      {"charge_in_mAh", c.charge_in_mah},
                      {"charge_in_Wh", c.charge_in_wh},
                      {"discharge", c.discharge ? json(*c.discharge) : json(nullptr)},
                      {"discharge_mAh", c.discharge_mah},
                      {"discharge_Wh", c.discharge_wh},
                      {"coulombic_efficiency", Optional(c.coulombic_efficiency)},
                      {"energy_efficiency", Optional(c.energy_efficiency)},
                      {"retention", Optional(c.retention)}});
  j["cycles"] = cycles;
  json left = json::array();
  for (const auto& [why, n] : a.dcir_left_out) left.push_back({{"reason", why}, {"count", n}});
  j["dcir_left_out"] = left;
  json gaps = json::array();
  for (const Gap& g : a.gaps) gaps.push_back({{"start_s", g.t_start_s}, {"end_s", g.t_end_s}, {"step", g.step}});
  j["gaps"] = gaps;
  json dcir = json::array();
  for (size_t k = 0; k < a.dcir.size(); ++k) {
    const DcirPoint& p = a.dcir[k];
    dcir.push_back({{"t_s", p.t_edge_s},
                    {"U1_V", p.u1_v},
                    {"I1_A", p.i1_a},
                    {"U2_V", p.u2_v},
                    {"U2_t_s", p.t_u2_s},
                    {"I2_A", p.i2_a},
                    {"resistance_ohm", p.resistance_ohm},
                    {"resistance_mOhm", p.resistance_ohm * 1000.0},
                    {"source", k < rep.dcir_sources.size() ? rep.dcir_sources[k] : std::string()},
                    {"delivered_mAh", p.delivered_mah},
                    {"depth_of_discharge", p.depth_of_discharge},
                    {"depth_of_discharge_pct", p.depth_of_discharge * 100.0}});
  }
  j["dcir"] = dcir;
  json pulses = json::array();
  for (const PulseFigures& p : a.pulses)
    pulses.push_back({{"index", p.index},
                      {"start_s", p.t_start_s},
                      {"end_s", p.t_end_s},
                      {"current_A", p.current_a},
                      {"min_voltage_V", p.min_voltage_v},
                      {"rest_voltage_before_V", p.rest_voltage_before_v},
                      {"recovered_voltage_V", p.recovered_voltage_v},
                      {"recovery_V", p.recovery_v},
                      {"delivered_mAh", p.delivered_mah_at_start}});
  j["pulses"] = pulses;
  if (a.brownout)
    j["brownout"] = {{"pulse", a.brownout->pulse_index},
                     {"t_s", a.brownout->t_s},
                     {"min_voltage_V", a.brownout->min_voltage_v},
                     {"delivered_mAh", a.brownout->delivered_mah}};
  else
    j["brownout"] = nullptr;
  return j;
}

namespace {

std::string OrDash(const std::string& s) { return s.empty() ? "-" : s; }

std::string CalibrationText(const InstrumentRecord& i) {
  std::string c;
  auto one = [&](const char* what, double gain, double offset, const char* unit) {
    if (gain == 1.0 && offset == 0.0) return;
    c += fmt::format("{}{} x{} {:+g} {}", c.empty() ? "" : ", ", what, gain, offset, unit);
  };
  one("voltage", i.voltage_gain, i.voltage_offset_v, "V");
  one("current", i.current_gain, i.current_offset_a, "A");
  one("temperature", i.temperature_gain, i.temperature_offset_c, "°C");
  if (c.empty()) c = "none applied";
  if (!i.calibrated_on.empty()) c += ", calibrated " + i.calibrated_on;
  return c;
}

}  // namespace

// The traceable record: identity, who, where, with what.
std::vector<RecordField> RunRecordFields(const RunReport& rep) {
  const RunRow& r = rep.run;
  const EquipmentRow& e = rep.equipment;
  std::string tags;
  for (const std::string& t : r.tags) tags += (tags.empty() ? "" : ", ") + t;
  std::vector<RecordField> f = {
      {"uuid", r.uuid},
      {"cell", r.cell},
      {"chemistry", r.chemistry},
      {"cell serial", r.cell_serial},
      {"cell lot", r.cell_lot},
      {"cell part number", r.cell_part},
      {"tags", tags},
      {"operator", r.operator_name},
      {"bench", r.bench},
      {"host", r.host},
      {"procedure", r.procedure_name},
      {"rig", r.rig},
      {"started (UTC)", r.started_at},
      {"ended (UTC)", r.ended_at},
      {"outcome", std::string(OutcomeName(r.outcome)) + (r.reason.empty() ? "" : ": " + r.reason)},
  };
  if (rep.totals.thermometer_tolerance_c)
    f.push_back({"thermometer tolerance", fmt::format("±{} °C", *rep.totals.thermometer_tolerance_c)});
  f.push_back({"software", e.software_version.empty()
                               ? ""
                               : fmt::format("kneepoint {} (commit {})", e.software_version, OrDash(e.software_commit))});
  return f;
}

std::string RunRecordText(const RunReport& rep) {
  const RunRow& r = rep.run;
  std::string out;
  if (!r.uuid.empty()) out += fmt::format("  run id           {}\n", r.uuid);
  out += fmt::format("  cell             {}  serial {}  lot {}  part {}\n", r.cell, OrDash(r.cell_serial), OrDash(r.cell_lot),
                     OrDash(r.cell_part));
  out += fmt::format("  operator         {}  bench {}  host {}\n", OrDash(r.operator_name), OrDash(r.bench), OrDash(r.host));
  out += fmt::format("  started          {}{}\n", r.started_at, r.ended_at.empty() ? "" : ", ended " + r.ended_at);
  if (!r.tags.empty()) {
    std::string t;
    for (const std::string& x : r.tags) t += (t.empty() ? "" : ", ") + x;
    out += fmt::format("  tags             {}\n", t);
  }
  const EquipmentRow& e = rep.equipment;
  if (!e.software_version.empty())
    out += fmt::format("  software         kneepoint {} (commit {})\n", e.software_version, OrDash(e.software_commit));
  for (const InstrumentRecord& i : e.instruments) {
    out += fmt::format("  instrument       {} ({}): {} {} serial {} firmware {}, at {}, profile {}; calibration {}\n", i.name,
                       i.roles, OrDash(i.manufacturer), OrDash(i.model), OrDash(i.serial), OrDash(i.firmware), i.address,
                       i.profile, CalibrationText(i));
  }
  for (const EventRow& n : rep.notes) out += fmt::format("  note             {} (t = {:.0f} s): {}\n", n.wall_at, n.t_s, n.message);
  return out;
}

std::string RunReportText(const RunReport& rep) {
  const RunFigures& f = rep.figures;
  const RunAnalysis& a = rep.analysis;
  std::string out;
  out += fmt::format("run {}  cell {}  procedure {}\n", rep.run.id, rep.run.cell, rep.run.procedure_name);
  out += fmt::format("  outcome          {} ({})\n", OutcomeName(rep.run.outcome), rep.run.reason);
  out += RunRecordText(rep);
  out += fmt::format("  delivered        {:.1f} mAh   {:.3f} Wh   ({})\n", a.discharge_charge_mah, a.discharge_energy_wh,
                     IntegrationMethodName(a.method));
  if (a.main_discharge) {
    const DischargeFigures& d = a.discharges[*a.main_discharge];
    const int n0 = a.instances[d.first].number, n1 = a.instances[d.last].number;
    out += fmt::format("  discharge        {}{}, {:.0f} s to {:.0f} s{}\n",
                       d.first == d.last ? fmt::format("step {}", n0) : fmt::format("steps {} to {}", n0, n1),
                       d.description.empty() ? "" : ": " + d.description, d.start_s, d.end_s,
                       d.reached_cutoff ? ", to the cutoff" : "");
  }
  if (rep.totals.charged_mah && *rep.totals.charged_mah > 0)
    out += fmt::format("  charged in       {:.1f} mAh (net of the record {:.1f} mAh)\n", *rep.totals.charged_mah, rep.totals.net_mah);
  out += fmt::format("  voltage          mean {:.3f} V, mid-point {:.3f} V, min {:.3f} V\n",
                     a.main_discharge_step >= 0 ? a.mean_voltage_v : f.mean_voltage_v, a.mid_voltage_v, f.min_voltage_v);
  out += fmt::format("  duration         {} ({} samples)", FormatHms(f.duration_s), f.sample_count);
  if (a.time_to_cutoff_s) out += fmt::format(", {} to cutoff", FormatHms(*a.time_to_cutoff_s));
  out += "\n";
  out += fmt::format("  temperature      max {:.1f} °C, rise {:.1f} °C\n", a.max_temperature_c, a.temperature_rise_c);
  if (!a.gaps.empty()) {
    out += fmt::format("  gaps             {} (", a.gaps.size());
    for (size_t i = 0; i < a.gaps.size() && i < 3; ++i)
      out += fmt::format("{}{:.0f} s at t = {:.0f} s", i ? "; " : "", a.gaps[i].duration_s(), a.gaps[i].t_start_s);
    out += a.gaps.size() > 3 ? "; ...)\n" : ")\n";
  }
  if (!a.dcir.empty()) {
    double lo = a.dcir.front().resistance_ohm, hi = lo;
    for (const DcirPoint& p : a.dcir) lo = std::min(lo, p.resistance_ohm), hi = std::max(hi, p.resistance_ohm);
    out += fmt::format("  DC-IR            {} points, {:.1f} to {:.1f} mOhm\n", a.dcir.size(), lo * 1000, hi * 1000);
  }
  for (const auto& [why, n] : a.dcir_left_out) out += fmt::format("  DC-IR left out   {} ({})\n", n, why);
  if (a.attempts.size() > 1) {
    for (size_t n = 0; n < a.attempts.size(); ++n) {
      const DischargeFigures& d = a.discharges[a.attempts[n]];
      out += fmt::format("  attempt {:<8} cycle {}: {:.1f} mAh, {}\n", n + 1, d.cycle, d.charge_mah, d.judgement.brief);
    }
  }
  if (!a.cycles.empty()) {
    out += "  cycle   charged mAh   discharged mAh   coulombic   energy eff.   retention\n";
    auto pct = [](const std::optional<double>& v) { return v ? fmt::format("{:.1f} %", *v * 100.0) : std::string("-"); };
    for (const CycleFigures& c : a.cycles)
      out += fmt::format("  {:>5}   {:>11.1f}   {:>14.1f}   {:>9}   {:>11}   {:>9}\n", c.cycle, c.charge_in_mah, c.discharge_mah,
                         pct(c.coulombic_efficiency), pct(c.energy_efficiency), pct(c.retention));
  }
  if (a.pulsed) out += fmt::format("  pulses           {}\n", a.pulses.size());
  if (a.brownout)
    out += fmt::format("  brown-out        pulse {} at {:.1f} mAh (min {:.3f} V)\n", a.brownout->pulse_index + 1,
                       a.brownout->delivered_mah, a.brownout->min_voltage_v);
  out += fmt::format("  verdict          {}\n", a.verdict.text);
  return out;
}

std::string RunReportStepsCsv(const RunReport& rep) {
  // Full precision (shortest round-trip form): a microamp run keeps its figures.
  std::string out =
      "step,kind,start_s,end_s,charge_mAh,energy_Wh,mean_current_A,mean_voltage_V,min_voltage_V,samples,"
      "number,pass,cycle,integration_method,end_reason\n";
  for (const InstanceFigures& g : rep.analysis.instances) {
    const StepFigures& s = g.f;
    std::string reason = g.end_reason;
    std::string quoted;
    for (char c : reason) quoted += c == '"' ? std::string("\"\"") : std::string(1, c);
    out += fmt::format("{},\"{}\",{},{},{},{},{},{},{},{},{},{},{},{},\"{}\"\n", s.step, g.kind, s.t_start_s, s.t_end_s, s.charge_mah,
                       s.energy_wh, s.mean_current_a, s.mean_voltage_v, s.min_voltage_v, s.samples, g.number, g.pass, g.cycle,
                       IntegrationMethodName(g.method), quoted);
  }
  return out;
}

std::string RunReportCyclesCsv(const RunReport& rep) {
  std::string out =
      "cycle,charge_in_mAh,charge_in_Wh,discharge_mAh,discharge_Wh,coulombic_efficiency,energy_efficiency,retention\n";
  auto opt = [](const std::optional<double>& v) { return v ? fmt::format("{}", *v) : std::string(); };
  for (const CycleFigures& c : rep.analysis.cycles)
    out += fmt::format("{},{},{},{},{},{},{},{}\n", c.cycle, c.charge_in_mah, c.charge_in_wh, c.discharge_mah, c.discharge_wh,
                       opt(c.coulombic_efficiency), opt(c.energy_efficiency), opt(c.retention));
  return out;
}

namespace {

// The verdict's emphasis: pass, fail, or neutral when the run was not judged.
std::string VerdictTone(const RunReport& rep) {
  const CapacityJudgement& v = rep.analysis.verdict;
  if (!v.judged) return "neutral";
  if (v.brief.rfind("PASS", 0) == 0) return "pass";
  if (v.brief.rfind("FAIL", 0) == 0) return "fail";
  return "neutral";
}

std::string ReportGenerator() { return VersionLine(); }

// Who made the page and when (UTC, to the second).
HtmlPageMeta ReportPageMeta(std::string subtitle) {
  HtmlPageMeta m;
  m.subtitle = std::move(subtitle);
  m.generator = ReportGenerator();
  std::time_t now = std::time(nullptr);
  std::tm utc{};
  gmtime_r(&now, &utc);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", &utc);
  m.generated_at = buf;
  return m;
}

HtmlTable SummaryTable(const RunReport& rep) {
  json j = RunReportJson(rep);
  HtmlTable t;
  t.header = {"figure", "value"};
  auto row = [&](const std::string& name, const std::string& key, int decimals, const std::string& unit) {
    const json& v = j.at(json::json_pointer(key));
    if (v.is_null()) {
      t.rows.push_back({TextCell(name), TextCell("not reached")});
      return;
    }
    t.rows.push_back({TextCell(name), FigureCell(key, v.get<double>(), decimals, unit)});
  };
  row("delivered charge", "/charge_mAh", 1, "mAh");
  row("delivered energy", "/energy_Wh", 3, "Wh");
  row("percent of rated", "/percent_of_rated", 1, "%");
  row("mean voltage (discharge)", "/mean_voltage_V", 3, "V");
  row("mid-point voltage", "/mid_voltage_V", 3, "V");
  row("minimum voltage", "/min_voltage_V", 3, "V");
  row("average discharge current", "/average_current_A", 4, "A");
  row("peak current", "/peak_current_A", 4, "A");
  auto duration = [&](const std::string& name, const std::string& key) {
    const json& v = j.at(json::json_pointer(key));
    if (v.is_null())
      t.rows.push_back({TextCell(name), TextCell("not reached")});
    else
      t.rows.push_back({TextCell(name), DurationCell(key, v.get<double>())});
  };
  duration("record duration (h:mm:ss)", "/duration_s");
  duration("time to cutoff (h:mm:ss)", "/time_to_cutoff_s");
  row("maximum temperature", "/max_temperature_C", 1, "°C");
  row("temperature rise", "/temperature_rise_C", 1, "K");
  return t;
}


// Who, which cell, where, with which instruments and software: everything a
// filed record needs, from the run's stored record.
HtmlSection EquipmentSection(const RunReport& rep) {
  const RunRow& r = rep.run;
  const EquipmentRow& e = rep.equipment;
  HtmlSection s;
  s.title = "Equipment and conditions";
  HtmlTable id;
  id.header = {"record", "value"};
  id.rows.push_back({TextCell("run"), TextCell(std::to_string(r.id))});
  for (const RecordField& f : RunRecordFields(rep)) id.rows.push_back({TextCell(f.label), TextCell(OrDash(f.value))});
  s.tables.push_back(id);
  if (e.instruments.empty()) {
    s.paragraphs.push_back("No instrument record (a run stored before schema version 5).");
  } else {
    HtmlTable it;
    it.caption = "Instruments (*IDN? reply as received; calibration applied as reading x gain + offset)";
    it.header = {"instrument", "roles", "manufacturer", "model", "serial", "firmware", "address", "profile", "calibration"};
    for (const InstrumentRecord& i : e.instruments)
      it.rows.push_back({TextCell(i.name), TextCell(i.roles), TextCell(OrDash(i.manufacturer)), TextCell(OrDash(i.model)),
                         TextCell(OrDash(i.serial)), TextCell(OrDash(i.firmware)), TextCell(i.address), TextCell(i.profile),
                         TextCell(CalibrationText(i))});
    s.tables.push_back(it);
  }
  for (const EventRow& n : rep.notes) s.paragraphs.push_back(fmt::format("Note ({}, t = {:.0f} s): {}", n.wall_at, n.t_s, n.message));
  if (!e.rig_text.empty()) s.preformatted.push_back({"Rig file as used", e.rig_text});
  s.preformatted.push_back({"Procedure as run", r.procedure_text});
  return s;
}

}  // namespace

std::string RunReportHtml(const RunReport& rep) {
  const RunAnalysis& a = rep.analysis;
  json j = RunReportJson(rep);
  std::vector<HtmlSection> sections;

  HtmlSection sum;
  sum.title = "Summary";
  sum.callouts.push_back({a.verdict.text, VerdictTone(rep)});
  if (rep.run.outcome == Outcome::kAborted)
    sum.callouts.push_back({"Run aborted" + (rep.abort_t_s ? " at " + FormatHms(*rep.abort_t_s) : std::string()) + ": " +
                                rep.run.reason,
                            "warn"});
  sum.paragraphs.push_back(fmt::format("Cell {} ({}, rated {:.0f} mAh), procedure {}, rig {}. Outcome: {} ({}). Started {}, ended {}.",
                                       rep.run.cell, rep.run.chemistry, rep.run.rated_mah, rep.run.procedure_name, rep.run.rig,
                                       OutcomeName(rep.run.outcome), rep.run.reason, rep.run.started_at, rep.run.ended_at));
  sum.paragraphs.push_back("Integration: " + IntegrationMethodText(a.method) + ".");
  if (a.gaps.empty()) {
    sum.paragraphs.push_back("No gaps in the record.");
  } else {
    std::string g = fmt::format("{} gap(s) in the record, bridged by the trapezoid and flagged:", a.gaps.size());
    for (const Gap& x : a.gaps) g += fmt::format(" {} to {} (step {});", FormatHms(x.t_start_s), FormatHms(x.t_end_s), x.step);
    sum.paragraphs.push_back(g);
  }
  sum.tables.push_back(SummaryTable(rep));
  sections.push_back(sum);
  sections.push_back(EquipmentSection(rep));

  HtmlSection ver;
  ver.title = "Verdict";
  ver.callouts.push_back({a.verdict.text, VerdictTone(rep)});
  HtmlTable ct;
  ct.caption = "Conditions of " + a.verdict.method;
  ct.header = {"condition", "required", "observed", "met"};
  for (const ConditionCheck& c : a.verdict.conditions)
    ct.rows.push_back({TextCell(c.name), TextCell(c.required), TextCell(c.observed), TextCell(c.met ? "yes" : "NO")});
  ver.tables.push_back(ct);
  if (a.attempts.size() > 1) {
    HtmlTable at;
    at.caption = "Capacity attempts (IEC 61960-3 allows up to five cycles, stopping at the first that passes; from memory)";
    at.header = {"attempt", "cycle", "charge (mAh)", "percent of rated", "verdict"};
    for (size_t n = 0; n < a.attempts.size(); ++n) {
      const DischargeFigures& d = a.discharges[a.attempts[n]];
      std::string p = fmt::format("/discharges/{}/", a.attempts[n]);
      at.rows.push_back({TextCell(std::to_string(n + 1)), TextCell(std::to_string(d.cycle)),
                         FigureCell(p + "charge_mAh", d.charge_mah, 1), FigureCell(p + "percent_of_rated", d.judgement.percent_of_rated, 1, "%"),
                         TextCell(d.judgement.brief)});
    }
    ver.tables.push_back(at);
  }
  sections.push_back(ver);

  if (!a.cycles.empty()) {
    HtmlSection cy;
    cy.title = "Cycles";
    cy.paragraphs.push_back(
        "A cycle starts at each charge step that follows a non-charge step (cycle 0 is what ran before the first charge). "
        "Coulombic efficiency = discharged / charged charge, energy efficiency = discharged / charged energy, retention = "
        "discharged charge / that of the first cycle.");
    HtmlTable ctab;
    ctab.header = {"cycle", "charged (mAh)", "discharged (mAh)", "discharged (Wh)", "coulombic efficiency", "energy efficiency",
                   "retention"};
    PlotSeries cap{"discharged", {}, {}, false, true};
    for (size_t k = 0; k < a.cycles.size(); ++k) {
      const CycleFigures& c = a.cycles[k];
      std::string p = fmt::format("/cycles/{}/", k);
      auto pct = [&](const char* key, const std::optional<double>& v) {
        return v ? FigureCell(p + key, *v, 3) : TextCell("-");
      };
      ctab.rows.push_back({TextCell(std::to_string(c.cycle)), FigureCell(p + "charge_in_mAh", c.charge_in_mah, 1),
                           FigureCell(p + "discharge_mAh", c.discharge_mah, 1), FigureCell(p + "discharge_Wh", c.discharge_wh, 3),
                           pct("coulombic_efficiency", c.coulombic_efficiency), pct("energy_efficiency", c.energy_efficiency),
                           pct("retention", c.retention)});
      if (c.discharge) cap.x.push_back(c.cycle), cap.y.push_back(c.discharge_mah);
    }
    cy.tables.push_back(ctab);
    if (cap.x.size() >= 2)  // one point is a table row, not a trend
      cy.plots.push_back({"plot-capacity-cycle", "Discharged capacity versus cycle", "cycle", "discharged (mAh)", "", {cap}});
    sections.push_back(cy);
  }

  HtmlSection me;
  me.title = "Method";
  HtmlTable mt;
  mt.header = {"figure", "method and deviations", "source"};
  for (const MethodNote& n : MethodNotes(rep)) mt.rows.push_back({TextCell(n.figure), TextCell(n.method), TextCell(n.source)});
  me.tables.push_back(mt);
  sections.push_back(me);

  HtmlSection st;
  st.title = "Steps";
  HtmlTable stt;
  stt.header = {"step", "kind", "pass", "cycle", "start (h:mm:ss)", "end (h:mm:ss)", "charge (mAh)", "energy (Wh)", "mean current (A)",
                "mean voltage (V)", "method", "ended by"};
  for (size_t i = 0; i < a.instances.size() && i < 500; ++i) {
    const InstanceFigures& g = a.instances[i];
    const StepFigures& s = g.f;
    std::string p = fmt::format("/steps/{}/", i);
    stt.rows.push_back({TextCell(std::to_string(g.number)), TextCell(g.kind), TextCell(g.pass ? std::to_string(g.pass) : "-"),
                        TextCell(std::to_string(g.cycle)), DurationCell(p + "started_s", g.started_s),
                        DurationCell(p + "ended_s", g.ended_s), FigureCell(p + "charge_mAh", s.charge_mah, 1),
                        FigureCell(p + "energy_Wh", s.energy_wh, 3), FigureCell(p + "mean_current_A", s.mean_current_a, 4),
                        FigureCell(p + "mean_voltage_V", s.mean_voltage_v, 3), TextCell(IntegrationMethodName(g.method)),
                        TextCell(g.end_reason + (g.held_s > 0 ? " (held " + FormatHms(g.held_s) + ")" : ""))});
  }
  if (a.instances.size() > 500)
    st.paragraphs.push_back(fmt::format("The first 500 of {} step instances; all are in the JSON.", a.instances.size()));
  st.tables.push_back(stt);
  sections.push_back(st);

  HtmlSection plots;
  plots.title = "Plots";
  // The series were decimated while the samples streamed by: per column the
  // lowest and the highest point, so spikes survive.
  const RunPlots& pl = rep.plots;
  std::vector<double> q, vq;
  if (a.main_discharge && *a.main_discharge < pl.discharge_vq.size()) {
    q = pl.discharge_vq[*a.main_discharge].x;
    vq = pl.discharge_vq[*a.main_discharge].y;
  }
  std::vector<PlotLevel> voltage_levels;
  if (rep.context.cutoff_v) voltage_levels.push_back({*rep.context.cutoff_v, fmt::format("cutoff {:.3f} V", *rep.context.cutoff_v)});
  std::vector<PlotMark> abort_marks;
  if (rep.abort_t_s) abort_marks.push_back({*rep.abort_t_s, "aborted " + FormatHms(*rep.abort_t_s)});
  PlotSpec vt;
  vt.id = "plot-voltage-time";
  vt.title = "Cell voltage versus time";
  vt.x_label = "time";
  vt.y_label = "voltage (V)";
  vt.x_axis = PlotAxis::kDuration;
  vt.levels = voltage_levels;
  vt.marks = abort_marks;
  if (a.pulsed && !a.pulses.empty()) {
    // A pulse train drawn sample by sample is a solid block: draw what a
    // reader wants from it, the voltage under load (each pulse's lowest) and
    // the voltage recovered before the next pulse, as two thin lines.
    PlotSeries loaded{"under load (lowest in each pulse)", {}, {}, false, false, true};
    PlotSeries recovered{"recovered (before the next pulse)", {}, {}, false, false, true};
    for (size_t k = 0; k < a.pulses.size(); ++k) {
      const PulseFigures& p = a.pulses[k];
      loaded.x.push_back(p.t_start_s), loaded.y.push_back(p.min_voltage_v);
      double t_rec = k + 1 < a.pulses.size() ? a.pulses[k + 1].t_start_s : p.t_end_s;
      recovered.x.push_back(t_rec), recovered.y.push_back(p.recovered_voltage_v);
    }
    vt.series = {loaded, recovered};
  } else {
    vt.series = {{"voltage", pl.voltage.x, pl.voltage.y, false, false}};
  }
  plots.plots.push_back(vt);
  PlotSpec it;
  it.id = "plot-current-time";
  it.title = "Current versus time (positive discharges the cell)";
  it.x_label = "time";
  it.y_label = "current (A)";
  it.x_axis = PlotAxis::kDuration;
  it.height = 200;
  it.marks = abort_marks;
  it.series = {{"current", pl.current.x, pl.current.y, false, false, true}};
  plots.plots.push_back(it);
  PlotSpec vc{"plot-voltage-charge", "Voltage versus charge delivered in the discharge", "delivered charge (mAh)", "voltage (V)", "",
              {{"voltage", q, vq, false, false, a.pulsed}}};
  vc.levels = voltage_levels;
  plots.plots.push_back(vc);
  PlotSpec tt;
  tt.id = "plot-temperature";
  tt.title = "Cell temperature versus time";
  tt.x_label = "time";
  tt.y_label = "temperature (°C)";
  tt.x_axis = PlotAxis::kDuration;
  tt.height = 240;
  tt.marks = abort_marks;
  if (rep.max_temp_c && std::isfinite(*rep.max_temp_c))
    tt.levels.push_back({*rep.max_temp_c, fmt::format("limit {:.0f} °C", *rep.max_temp_c)});
  tt.series = {{"temperature", pl.temperature.x, pl.temperature.y, false, false}};
  plots.plots.push_back(tt);
  if (!a.dcir.empty()) {
    PlotSeries r{"DC-IR", {}, {}, false, true};
    for (const DcirPoint& p : a.dcir) r.x.push_back(p.depth_of_discharge * 100.0), r.y.push_back(p.resistance_ohm * 1000.0);
    plots.plots.push_back({"plot-resistance-dod",
                           "DC internal resistance versus depth of discharge",
                           "depth of discharge (%)",
                           "resistance (mOhm)",
                           "",
                           {r}});
  }
  if (a.pulsed) {
    PlotSeries mn{"minimum under load", {}, {}, false, true}, rc{"recovered", {}, {}, false, true};
    for (const PulseFigures& p : a.pulses) {
      mn.x.push_back(p.delivered_mah_at_start), mn.y.push_back(p.min_voltage_v);
      rc.x.push_back(p.delivered_mah_at_start), rc.y.push_back(p.recovered_voltage_v);
    }
    PlotSpec pp{"plot-pulses", "Pulse minimum and recovered voltage", "delivered charge (mAh)", "voltage (V)", "", {mn, rc}};
    pp.levels = voltage_levels;
    plots.plots.push_back(pp);
  }
  sections.push_back(plots);

  if (!a.dcir.empty()) {
    HtmlSection dc;
    dc.title = "DC internal resistance";
    dc.paragraphs.push_back(
        "Two-current method (IEC 61960-3 clause 7.7): R = (U1 - U2) / (I2 - I1). Points come only from commanded edges: in a "
        "dcir step U1 is read at the end of the first current and U2 at the end of the second; at an edge inside a pulse "
        "train or duty cycle the engine reads U1 at the edge and U2 the set delay after it. Step boundaries (rest, charge, "
        "another step) are never used.");
    for (const auto& [why, n] : a.dcir_left_out)
      dc.paragraphs.push_back(fmt::format("Left out: {} point{} ({}).", n, n == 1 ? "" : "s", why));
    HtmlTable t;
    t.header = {"edge (s)", "U1 (V)", "I1 (A)", "U2 (V)", "U2 read at (s)", "I2 (A)", "R (mOhm)", "DoD (%)"};
    for (size_t k = 0; k < a.dcir.size() && k < 200; ++k) {
      const DcirPoint& p = a.dcir[k];
      std::string ptr = fmt::format("/dcir/{}/", k);
      t.rows.push_back({FigureCell(ptr + "t_s", p.t_edge_s, 1), FigureCell(ptr + "U1_V", p.u1_v, 4),
                        FigureCell(ptr + "I1_A", p.i1_a, 4), FigureCell(ptr + "U2_V", p.u2_v, 4),
                        FigureCell(ptr + "U2_t_s", p.t_u2_s, 2),
                        FigureCell(ptr + "I2_A", p.i2_a, 4), FigureCell(ptr + "resistance_mOhm", p.resistance_ohm * 1000.0, 2),
                        FigureCell(ptr + "depth_of_discharge_pct", p.depth_of_discharge * 100.0, 1)});
    }
    dc.tables.push_back(t);
    sections.push_back(dc);
  }
  if (a.brownout) {
    HtmlSection b;
    b.title = "Brown-out";
    b.paragraphs.push_back(
        fmt::format("Pulse {} is the first whose minimum voltage ({:.3f} V) breaches the brown-out level; "
                    "{:.1f} mAh had been delivered by then.",
                    a.brownout->pulse_index + 1, a.brownout->min_voltage_v, a.brownout->delivered_mah));
    sections.push_back(b);
  }
  return RenderHtmlPage(fmt::format("Kneepoint run {}: {}", rep.run.id, rep.run.cell), sections,
                        ReportPageMeta(fmt::format("{} · {} · {}", rep.run.procedure_name, OutcomeName(rep.run.outcome),
                                                   a.verdict.brief)));
}

// --- across runs ---

RunSummary SummariseRun(const RunReport& rep) {
  const RunAnalysis& a = rep.analysis;
  RunSummary s;
  s.label = fmt::format("run {}", rep.run.id);
  s.charge_mah = a.discharge_charge_mah;
  s.energy_wh = a.discharge_energy_wh;
  s.mean_voltage_v = a.mean_voltage_v;
  s.average_current_a = a.average_current_a;
  s.peak_current_a = a.peak_current_a;
  s.duration_s = a.time_to_cutoff_s.value_or(a.discharge_duration_s);
  s.pulsed = a.pulsed;
  s.constant_current = a.constant_current;
  if (!a.dcir.empty()) {
    std::vector<double> r;
    for (const DcirPoint& p : a.dcir) r.push_back(p.resistance_ohm);
    std::nth_element(r.begin(), r.begin() + static_cast<std::ptrdiff_t>(r.size() / 2), r.end());
    s.resistance_ohm = r[r.size() / 2];
  }
  s.verdict = a.verdict.text;
  s.verdict_brief = a.verdict.brief;
  return s;
}

Result<CompareReport> BuildCompareReport(Store& store, const std::vector<int64_t>& ids, std::optional<double> predict_at_a,
                                         const ReportOptions& options) {
  CompareReport c;
  c.predict_at_a = predict_at_a;
  for (int64_t id : ids) {
    KP_ASSIGN_OR_RETURN(RunReport r, BuildRunReport(store, id, options));
    c.summaries.push_back(SummariseRun(r));
    c.runs.push_back(std::move(r));
  }
  c.ratios = PulsedVersusContinuous(c.summaries);
  std::vector<RatePoint> pts = RatePointsFromRuns(c.summaries);
  c.peukert = FitPeukert(pts);
  return c;
}

nlohmann::json CompareReportJson(const CompareReport& c) {
  json runs = json::array();
  for (size_t k = 0; k < c.summaries.size(); ++k) {
    const RunSummary& s = c.summaries[k];
    runs.push_back({{"label", s.label},
                    {"charge_mAh", s.charge_mah},
                    {"energy_Wh", s.energy_wh},
                    {"mean_voltage_V", s.mean_voltage_v},
                    {"average_current_A", s.average_current_a},
                    {"peak_current_A", s.peak_current_a},
                    {"duration_s", s.duration_s},
                    {"pulsed", s.pulsed},
                    {"resistance_ohm", Optional(s.resistance_ohm)},
                    {"verdict", s.verdict},
                    {"verdict_brief", s.verdict_brief}});
    if (k < c.runs.size()) {
      runs.back()["run"] = c.runs[k].run.id;
      runs.back()["run_record"] = RunRowJson(c.runs[k].run);
    }
  }
  json ratios = json::array();
  for (const RatioFigures& r : c.ratios)
    ratios.push_back({{"pulsed", r.pulsed_label},
                      {"continuous", r.continuous_label},
                      {"basis", r.basis},
                      {"capacity_ratio", r.capacity_ratio},
                      {"energy_ratio", r.energy_ratio}});
  json j{{"runs", runs}, {"pulsed_vs_continuous", ratios}, {"schema_version", kReportSchemaVersion}};
  if (c.peukert.fit) {
    const PeukertFit& f = *c.peukert.fit;
    j["peukert"] = {{"exponent_k", f.exponent_k},
                    {"capacity_constant_Ak_h", f.capacity_constant},
                    {"r_squared", f.r_squared},
                    {"r_squared_meaningful", f.points > 2},
                    {"points", f.points}};
    if (c.predict_at_a)
      j["peukert"]["prediction"] = {{"current_A", *c.predict_at_a},
                                    {"hours", f.HoursAt(*c.predict_at_a)},
                                    {"capacity_mAh", f.CapacityMahAt(*c.predict_at_a)}};
  } else {
    j["peukert"] = {{"error", c.peukert.error}};
  }
  return j;
}

std::string CompareReportText(const CompareReport& c) {
  std::string o = fmt::format("{:<8} {:>10} {:>9} {:>8} {:>9} {:>9} {:>9} {:>7}  {}\n", "run", "mAh", "Wh", "mean V", "avg A",
                              "peak A", "R mOhm", "pulsed", "verdict");
  for (const RunSummary& s : c.summaries)
    o += fmt::format("{:<8} {:>10.1f} {:>9.3f} {:>8.3f} {:>9.4f} {:>9.4f} {:>9} {:>7}  {}\n", s.label, s.charge_mah, s.energy_wh,
                     s.mean_voltage_v, s.average_current_a, s.peak_current_a,
                     s.resistance_ohm ? fmt::format("{:.1f}", *s.resistance_ohm * 1000) : "-", s.pulsed ? "yes" : "no",
                     s.verdict_brief);
  for (const RatioFigures& r : c.ratios)
    o += fmt::format("pulsed {} vs continuous {} at {}: capacity ratio {:.3f}, energy ratio {:.3f}\n", r.pulsed_label,
                     r.continuous_label, r.basis, r.capacity_ratio, r.energy_ratio);
  if (c.peukert.fit) {
    const PeukertFit& f = *c.peukert.fit;
    o += fmt::format("Peukert fit over {} runs: k = {:.4f}, C_p = {:.4f} A^k h, {}\n", f.points,
                     f.exponent_k, f.capacity_constant,
                     f.points > 2 ? fmt::format("R^2 = {:.4f}", f.r_squared)
                                  : std::string("R^2 not meaningful (two points always lie on the line)"));
    if (c.predict_at_a)
      o += fmt::format("  predicted at {:.4g} A: {:.2f} h, {:.0f} mAh\n", *c.predict_at_a, f.HoursAt(*c.predict_at_a),
                       f.CapacityMahAt(*c.predict_at_a));
  } else {
    o += "Peukert fit: " + c.peukert.error + "\n";
  }
  return o;
}

std::string CompareReportCsv(const CompareReport& c) {
  std::string o = "run,charge_mAh,energy_Wh,mean_voltage_V,average_current_A,peak_current_A,duration_s,pulsed,resistance_ohm\n";
  for (const RunSummary& s : c.summaries)
    o += fmt::format("\"{}\",{:.6f},{:.6f},{:.6f},{:.6f},{:.6f},{:.3f},{},{}\n", s.label, s.charge_mah, s.energy_wh,
                     s.mean_voltage_v, s.average_current_a, s.peak_current_a, s.duration_s, s.pulsed ? 1 : 0,
                     s.resistance_ohm ? fmt::format("{:.6f}", *s.resistance_ohm) : "");
  return o;
}

namespace {

// What tells the compared runs apart: the kind of discharge and its current,
// and the cell when the runs are on different cells.
std::vector<std::string> CurveLabels(const CompareReport& c) {
  bool cells_differ = false;
  for (const RunReport& r : c.runs) cells_differ = cells_differ || r.run.cell != c.runs.front().run.cell;
  std::vector<std::string> out;
  for (size_t i = 0; i < c.summaries.size() && i < c.runs.size(); ++i) {
    const RunSummary& s = c.summaries[i];
    std::string what;
    if (s.pulsed)
      what = fmt::format("pulsed {:.3g} A peak, {:.3g} A mean", s.peak_current_a, s.average_current_a);
    else if (s.constant_current)
      what = fmt::format("continuous {:.3g} A", s.average_current_a);
    else
      what = fmt::format("varying load, {:.3g} A mean", s.average_current_a);
    std::string label = fmt::format("{}: {}", s.label, what);
    if (cells_differ) label += ", cell " + c.runs[i].run.cell;
    out.push_back(std::move(label));
  }
  return out;
}

}  // namespace

std::string CompareReportHtml(const CompareReport& c) {
  std::vector<HtmlSection> sections;
  std::vector<std::string> labels = CurveLabels(c);
  HtmlSection t;
  t.title = "Runs side by side";
  HtmlTable tab;
  tab.header = {"run",         "charge (mAh)", "energy (Wh)", "mean voltage (V)", "average current (A)", "peak current (A)",
                "DC-IR (Ohm)", "verdict"};
  for (size_t i = 0; i < c.summaries.size(); ++i) {
    const RunSummary& s = c.summaries[i];
    std::string p = fmt::format("/runs/{}/", i);
    tab.rows.push_back(
        {TextCell(i < labels.size() ? labels[i] : s.label), FigureCell(p + "charge_mAh", s.charge_mah, 1),
         FigureCell(p + "energy_Wh", s.energy_wh, 3),
         FigureCell(p + "mean_voltage_V", s.mean_voltage_v, 3), FigureCell(p + "average_current_A", s.average_current_a, 4),
         FigureCell(p + "peak_current_A", s.peak_current_a, 4),
         s.resistance_ohm ? FigureCell(p + "resistance_ohm", *s.resistance_ohm, 4) : TextCell("-"), TextCell(s.verdict_brief)});
  }
  t.tables.push_back(tab);
  sections.push_back(t);

  HtmlSection ov;
  ov.title = "Overlays";
  ov.paragraphs.push_back(
      "Each curve is one run's main discharge, aligned at its start. Pulsed and duty-cycle discharges are drawn as their "
      "voltage under load (the lowest reading in each pulse), which is what decides the cutoff.");
  PlotSpec vq{"plot-overlay-voltage-charge", "Voltage versus delivered charge", "delivered charge (mAh)", "voltage (V)", "", {}};
  PlotSpec vt{"plot-overlay-voltage-time", "Voltage versus time from discharge start", "time", "voltage (V)", "", {}};
  vt.x_axis = PlotAxis::kDuration;
  std::optional<double> common_cutoff;
  bool one_cutoff = true;
  for (size_t i = 0; i < c.runs.size(); ++i) {
    const RunReport& r = c.runs[i];
    // Aligned at the start of each run's main discharge.
    const RunAnalysis& a = r.analysis;
    PlotSeries q{labels[i], {}, {}, false, false, true};
    PlotSeries tt{q.name, {}, {}, false, false, true};
    if (a.pulsed && !a.pulses.empty() && a.main_discharge && *a.main_discharge < a.discharges.size()) {
      const DischargeFigures& d = a.discharges[*a.main_discharge];
      std::optional<double> q0;
      for (const PulseFigures& p : a.pulses) {
        if (p.t_start_s < d.start_s || p.t_start_s > d.end_s) continue;
        if (!q0) q0 = p.delivered_mah_at_start;
        q.x.push_back(p.delivered_mah_at_start - *q0), q.y.push_back(p.min_voltage_v);
        tt.x.push_back(p.t_start_s - d.start_s), tt.y.push_back(p.min_voltage_v);
      }
    } else if (a.main_discharge && *a.main_discharge < r.plots.discharge_vq.size()) {
      q.x = r.plots.discharge_vq[*a.main_discharge].x;
      q.y = r.plots.discharge_vq[*a.main_discharge].y;
      tt.x = r.plots.discharge_vt[*a.main_discharge].x;
      tt.y = r.plots.discharge_vt[*a.main_discharge].y;
    }
    if (r.context.cutoff_v) {
      if (common_cutoff && std::abs(*common_cutoff - *r.context.cutoff_v) > 1e-9) one_cutoff = false;
      common_cutoff = r.context.cutoff_v;
    }
    vq.series.push_back(std::move(q));
    vt.series.push_back(std::move(tt));
  }
  if (common_cutoff && one_cutoff) {
    vq.levels.push_back({*common_cutoff, fmt::format("cutoff {:.3f} V", *common_cutoff)});
    vt.levels = vq.levels;
  }
  ov.plots = {vq, vt};
  sections.push_back(ov);

  HtmlSection pr;
  pr.title = "Pulsed versus continuous";
  if (c.ratios.empty())
    pr.paragraphs.push_back("No pulsed run matched a continuous run at equal average or peak current (within 5 %).");
  HtmlTable rt;
  rt.header = {"pulsed", "continuous", "basis", "capacity ratio", "energy ratio"};
  for (size_t i = 0; i < c.ratios.size(); ++i) {
    const RatioFigures& r = c.ratios[i];
    std::string p = fmt::format("/pulsed_vs_continuous/{}/", i);
    rt.rows.push_back({TextCell(r.pulsed_label), TextCell(r.continuous_label), TextCell(r.basis),
                       FigureCell(p + "capacity_ratio", r.capacity_ratio, 3), FigureCell(p + "energy_ratio", r.energy_ratio, 3)});
  }
  if (!c.ratios.empty()) pr.tables.push_back(rt);
  sections.push_back(pr);

  HtmlSection pk;
  pk.title = "Peukert fit";
  if (c.peukert.fit) {
    const PeukertFit& f = *c.peukert.fit;
    pk.paragraphs.push_back(
        "C_p = I^k · t (Peukert, 1897), fitted by least squares on ln t = ln C_p − k ln I over the constant-current runs.");
    HtmlTable ft;
    ft.header = {"figure", "value"};
    ft.rows = {{TextCell("exponent k"), FigureCell("/peukert/exponent_k", f.exponent_k, 4)},
               {TextCell("capacity constant C_p (A^k h)"), FigureCell("/peukert/capacity_constant_Ak_h", f.capacity_constant, 4)},
               {TextCell("R² (log-log)"), f.points > 2 ? FigureCell("/peukert/r_squared", f.r_squared, 4)
                                                        : TextCell("not meaningful with two runs")}};
    if (c.predict_at_a) {
      ft.rows.push_back({TextCell(fmt::format("predicted time at {:.4g} A", *c.predict_at_a)),
                         FigureCell("/peukert/prediction/hours", f.HoursAt(*c.predict_at_a), 2, "h")});
      ft.rows.push_back({TextCell(fmt::format("predicted capacity at {:.4g} A", *c.predict_at_a)),
                         FigureCell("/peukert/prediction/capacity_mAh", f.CapacityMahAt(*c.predict_at_a), 0, "mAh")});
    }
    pk.tables.push_back(ft);
  } else {
    pk.paragraphs.push_back("No fit: " + c.peukert.error + ".");
  }
  sections.push_back(pk);
  return RenderHtmlPage("Kneepoint comparison", sections,
                        ReportPageMeta(fmt::format("{} runs compared", c.summaries.size())));
}

}  // namespace kp
