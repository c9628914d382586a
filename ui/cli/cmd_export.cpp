// `export`: write a run's samples to a file, streamed (constant memory: one
// sample at a time from the database to the file), as CSV (RFC 4180, or
// semicolon-separated with decimal commas), JSON or an .xlsx workbook.
#include <fmt/format.h>

#include <fstream>
#include <nlohmann/json.hpp>

#include "rig/store_open.h"
#include "ui/cli/cli.h"
#include "ui/cli/output_guard.h"
#include "ui/report/run_report.h"
#include "ui/report/sample_export.h"

namespace kp::cli {
namespace {

struct ExportOptions {
  std::string db_path = "kneepoint.db";
  std::string run_ref;
  std::string csv_path;
  std::string json_path;
  std::string xlsx_path;
  bool decimal_comma = false;
};

// Version of the `export --json` layout. 2: schema_version, the run in the
// shape every JSON output uses (RunRowJson, schema v5 record fields) and the
// equipment record. Keys of version 1 keep their names and meanings.
constexpr int kExportSchemaVersion = 2;

// The cycle of the step instance that owns a sample (t in (start, end]),
// walking the instances in time order as the samples stream by.
class CycleOf {
 public:
  explicit CycleOf(std::vector<StepRow> steps) : steps_(std::move(steps)) {}
  int operator()(double t_s) {
    while (k_ + 1 < steps_.size() && t_s > steps_[k_ + 1].started_s + 1e-12) ++k_;
    return steps_.empty() ? 0 : steps_[k_].cycle;
  }

 private:
  std::vector<StepRow> steps_;
  size_t k_ = 0;
};

// JSON: {"run": {...}, "events": [...], "samples": [[t_s, V, A, degC, step, step_number, cycle], ...]}
// written piece by piece; numbers in shortest round-trip form.
Status WriteJson(Store& store, const RunRow& run, std::ofstream& out, const std::string& path) {
  auto check = [&]() { return out ? Status::Ok() : IoError(fmt::format("writing '{}' failed (disk full?)", path)); };
  KP_ASSIGN_OR_RETURN(auto equipment, store.LoadEquipment(run.id));
  constexpr auto kReplace = nlohmann::json::error_handler_t::replace;  // invalid UTF-8 from instruments never breaks the file
  out << "{\"schema_version\":" << kExportSchemaVersion << ",\"run\":" << RunRowJson(run).dump(-1, ' ', false, kReplace)
      << ",\n\"equipment\":" << EquipmentJson(equipment).dump(-1, ' ', false, kReplace)
      << ",\n\"sample_columns\":[\"t_s\",\"voltage_V\",\"current_A\",\"temperature_C\",\"step\",\"step_number\",\"cycle\"],\n";
  KP_ASSIGN_OR_RETURN(auto steps, store.LoadSteps(run.id));
  CycleOf cycle(std::move(steps));
  KP_ASSIGN_OR_RETURN(auto events, store.LoadEvents(run.id));
  nlohmann::json ev = nlohmann::json::array();
  for (const EventRow& e : events)
    ev.push_back({{"t_s", e.t_s}, {"kind", e.kind}, {"message", e.message}, {"wall_at", e.wall_at}});
  out << "\"events\":" << ev.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace) << ",\n\"samples\":[";
  bool first = true;
  KP_RETURN_IF_ERROR(store.ForEachSample(run.id, [&](const Sample& s) {
    out << (first ? "\n" : ",\n")
        << fmt::format("[{},{},{},{},{},{},{}]", s.t_s, s.voltage_v, s.current_a, s.temperature_c, s.step, s.step + 1, cycle(s.t_s));
    first = false;
    return check();
  }));
  out << "\n]}\n";
  return check();
}

int RunExport(const ExportOptions& opt) {
  const int formats = !opt.csv_path.empty() + !opt.json_path.empty() + !opt.xlsx_path.empty();
  if (formats != 1) return Fail(InvalidInput("give exactly one of --csv FILE, --json FILE or --xlsx FILE"));
  if (opt.decimal_comma && opt.csv_path.empty()) return Fail(InvalidInput("--decimal-comma is an option of --csv"));
  if (Status st = CheckOutputPaths(opt.db_path, {opt.csv_path, opt.json_path, opt.xlsx_path}); !st.ok()) return Fail(st);
  SteadyClock wall;
  auto store = OpenDbForReading(opt.db_path, wall, {opt.run_ref});
  if (!store.ok()) return Fail(store.status());
  auto id = (*store)->ResolveRun(opt.run_ref);
  if (!id.ok()) return Fail(id.status());
  auto run = (*store)->GetRun(*id);
  if (!run.ok()) return Fail(run.status());
  if (!opt.xlsx_path.empty()) {
    auto rep = BuildRunReport(**store, *id);
    if (!rep.ok()) return Fail(rep.status());
    if (Status st = WriteRunXlsx(**store, *rep, opt.xlsx_path); !st.ok()) return Fail(st);
    return kExitOk;
  }
  const std::string& path = opt.csv_path.empty() ? opt.json_path : opt.csv_path;
  std::ofstream out(path, std::ios::trunc | std::ios::binary);
  if (!out) return Fail(IoError(fmt::format("cannot write '{}'", path)));
  Status st = opt.csv_path.empty() ? WriteJson(**store, *run, out, path)
                                   : WriteSamplesCsv(**store, *run, out, opt.decimal_comma ? kCsvDecimalComma : CsvStyle{});
  if (!st.ok()) return Fail(st.WithContext(path));
  out.flush();
  if (!out) return Fail(IoError(fmt::format("writing '{}' failed (disk full?)", path)));
  return kExitOk;
}

}  // namespace

void RegisterExport(CliRegistry& r) {
  static ExportOptions opt;
  opt = ExportOptions{};  // fresh defaults for each command line parsed
  CLI::App* exp = r.Add("export", "Write a run's samples as CSV, JSON or .xlsx (streamed)", [] { return RunExport(opt); });
  exp->add_option("RUN", opt.run_ref, "Run number or UUID")->required();
  exp->add_option("--db", opt.db_path, "Database file, or a lab database postgresql://... (read only)")->capture_default_str();
  exp->add_option("--csv", opt.csv_path,
                  "Output CSV file, RFC 4180 (t_s, voltage_V, current_A, temperature_C, step, step_number, cycle, time_utc, "
                  "step_kind, charge_Ah, energy_Wh)");
  exp->add_flag("--decimal-comma", opt.decimal_comma,
                "CSV for spreadsheets in decimal-comma locales: fields separated by ';', numbers with ',' as decimal mark");
  exp->add_option("--json", opt.json_path, "Output JSON file (run record, equipment, events, sample rows)");
  exp->add_option("--xlsx", opt.xlsx_path, "Output .xlsx workbook (sheets: summary, samples)");
}

}  // namespace kp::cli
