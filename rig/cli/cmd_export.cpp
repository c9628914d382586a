// `export`: write a run's samples to a file, streamed (constant memory: one
// sample at a time from the database to the file), as CSV or JSON.
#include <fmt/format.h>

#include <fstream>
#include <nlohmann/json.hpp>

#include "rig/cli/cli.h"
#include "rig/cli/output_guard.h"
#include "rig/cli/db_open.h"
#include "rig/run_report.h"

namespace kp::cli {
namespace {

struct ExportOptions {
  std::string db_path = "kneepoint.db";
  int64_t run_id = 0;
  std::string csv_path;
  std::string json_path;
};

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
  out << "{\"run\":" << RunRowJson(run).dump(-1, ' ', false, nlohmann::json::error_handler_t::replace)
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

// Every number in shortest round-trip form: a 1.5 uA run exports 1.5e-06, not 0.000002.
Status WriteCsv(Store& store, int64_t run_id, std::ofstream& out, const std::string& path) {
  out << "t_s,voltage_V,current_A,temperature_C,step,step_number,cycle\n";
  KP_ASSIGN_OR_RETURN(auto steps, store.LoadSteps(run_id));
  CycleOf cycle(std::move(steps));
  return store.ForEachSample(run_id, [&](const Sample& s) {
    out << fmt::format("{},{},{},{},{},{},{}\n", s.t_s, s.voltage_v, s.current_a, s.temperature_c, s.step, s.step + 1, cycle(s.t_s));
    return out ? Status::Ok() : IoError(fmt::format("writing '{}' failed (disk full?)", path));
  });
}

int RunExport(const ExportOptions& opt) {
  if (opt.csv_path.empty() == opt.json_path.empty()) return Fail(InvalidInput("give exactly one of --csv FILE or --json FILE"));
  if (Status st = CheckOutputPaths(opt.db_path, {opt.csv_path, opt.json_path}); !st.ok()) return Fail(st);
  SteadyClock wall;
  auto store = OpenExistingDb(opt.db_path, wall);
  if (!store.ok()) return Fail(store.status());
  auto run = (*store)->GetRun(opt.run_id);
  if (!run.ok()) return Fail(run.status());
  const std::string& path = opt.csv_path.empty() ? opt.json_path : opt.csv_path;
  std::ofstream out(path, std::ios::trunc);
  if (!out) return Fail(IoError(fmt::format("cannot write '{}'", path)));
  Status st = opt.csv_path.empty() ? WriteJson(**store, *run, out, path) : WriteCsv(**store, opt.run_id, out, path);
  if (!st.ok()) return Fail(st);
  out.flush();
  if (!out) return Fail(IoError(fmt::format("writing '{}' failed (disk full?)", path)));
  return kExitOk;
}

}  // namespace

void RegisterExport(CliRegistry& r) {
  static ExportOptions opt;
  opt = ExportOptions{};  // fresh defaults for each command line parsed
  CLI::App* exp = r.Add("export", "Write a run's samples as CSV or JSON (streamed)", [] { return RunExport(opt); });
  exp->add_option("RUN", opt.run_id, "Run id")->required();
  exp->add_option("--db", opt.db_path, "Database file")->capture_default_str();
  exp->add_option("--csv", opt.csv_path, "Output CSV file (t_s, voltage_V, current_A, temperature_C, step, step_number, cycle)");
  exp->add_option("--json", opt.json_path, "Output JSON file (run record, events, sample rows)");
}

}  // namespace kp::cli
