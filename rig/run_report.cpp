#include "rig/run_report.h"

#include <fmt/format.h>

#include <nlohmann/json.hpp>

#include "rig/cli/cli.h"

namespace kp {

Result<RunReport> BuildRunReport(Store& store, int64_t run_id) {
  RunReport rep;
  KP_ASSIGN_OR_RETURN(rep.run, store.GetRun(run_id));
  KP_ASSIGN_OR_RETURN(std::vector<Sample> samples, store.LoadSamples(run_id));
  rep.figures = ComputeRunFigures(samples);
  rep.verdict = JudgeCapacity(rep.figures.charge_mah, rep.run.rated_mah);
  return rep;
}

nlohmann::json RunRowJson(const RunRow& r) {
  return nlohmann::json{{"id", r.id},
                        {"cell", r.cell},
                        {"chemistry", r.chemistry},
                        {"procedure", r.procedure_name},
                        {"rig", r.rig},
                        {"outcome", OutcomeName(r.outcome)},
                        {"reason", r.reason},
                        {"started_at", r.started_at},
                        {"ended_at", r.ended_at},
                        {"rated_mAh", r.rated_mah},
                        {"samples", r.sample_count}};
}

nlohmann::json RunReportJson(const RunReport& rep) {
  const RunFigures& f = rep.figures;
  return nlohmann::json{{"run", rep.run.id},
                        {"cell", rep.run.cell},
                        {"procedure", rep.run.procedure_name},
                        {"outcome", OutcomeName(rep.run.outcome)},
                        {"reason", rep.run.reason},
                        {"charge_mAh", f.charge_mah},
                        {"energy_Wh", f.energy_wh},
                        {"mean_voltage_V", f.mean_voltage_v},
                        {"min_voltage_V", f.min_voltage_v},
                        {"max_temperature_C", f.max_temperature_c},
                        {"duration_s", f.duration_s},
                        {"samples", f.sample_count},
                        {"rated_mAh", rep.run.rated_mah},
                        {"percent_of_rated", rep.verdict.percent_of_rated},
                        {"pass", rep.verdict.pass},
                        {"verdict", rep.verdict.text}};
}

std::string RunReportText(const RunReport& rep) {
  const RunFigures& f = rep.figures;
  std::string out;
  out += fmt::format("run {}  cell {}  procedure {}\n", rep.run.id, rep.run.cell, rep.run.procedure_name);
  out += fmt::format("  outcome          {} ({})\n", OutcomeName(rep.run.outcome), rep.run.reason);
  out += fmt::format("  delivered        {:.1f} mAh   {:.3f} Wh\n", f.charge_mah, f.energy_wh);
  out += fmt::format("  mean voltage     {:.3f} V (min {:.3f} V)\n", f.mean_voltage_v, f.min_voltage_v);
  out += fmt::format("  duration         {} ({} samples)\n", cli::FormatDuration(f.duration_s), f.sample_count);
  out += fmt::format("  max temperature  {:.1f} degC\n", f.max_temperature_c);
  out += fmt::format("  verdict          {}\n", rep.verdict.text);
  return out;
}

}  // namespace kp
