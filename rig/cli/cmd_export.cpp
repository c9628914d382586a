// `export`: write a run's samples to a file.
#include <fstream>

#include <fmt/format.h>
#include "rig/cli/cli.h"
#include "rig/cli/db_open.h"

namespace kp::cli {

void RegisterExport(CliRegistry& r) {
  static std::string db_path = "kneepoint.db";
  static int64_t run_id = 0;
  static std::string csv_path;
  CLI::App* exp = r.Add("export", "Write a run's samples as CSV", [] {
    SteadyClock wall;
    auto store = OpenExistingDb(db_path, wall);
    if (!store.ok()) return Fail(store.status());
    auto run = (*store)->GetRun(run_id);
    if (!run.ok()) return Fail(run.status());
    std::ofstream out(csv_path, std::ios::trunc);
    if (!out) return Fail(IoError(fmt::format("cannot write '{}'", csv_path)));
    out << "t_s,voltage_V,current_A,temperature_C,step\n";
    Status st = (*store)->ForEachSample(run_id, [&](const Sample& s) {
      out << fmt::format("{:.3f},{:.6f},{:.6f},{:.3f},{}\n", s.t_s, s.voltage_v, s.current_a, s.temperature_c, s.step);
      return out ? Status::Ok() : IoError(fmt::format("writing '{}' failed (disk full?)", csv_path));
    });
    if (!st.ok()) return Fail(st);
    out.flush();
    if (!out) return Fail(IoError(fmt::format("writing '{}' failed (disk full?)", csv_path)));
    return kExitOk;
  });
  exp->add_option("RUN", run_id, "Run id")->required();
  exp->add_option("--db", db_path, "Database file")->capture_default_str();
  exp->add_option("--csv", csv_path, "Output CSV file")->required();
}

}  // namespace kp::cli
