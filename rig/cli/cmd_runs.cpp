// `runs`, `report` and `export`: read-only views of a database.
#include <filesystem>
#include <fstream>
#include <iostream>

#include <fmt/format.h>

#include <nlohmann/json.hpp>

#include "rig/cli/cli.h"
#include "rig/run_report.h"
#include "rig/store.h"

namespace kp::cli {
namespace {

struct DbOption {
  std::string path = "kneepoint.db";
};

// Opens an existing database; reconciles runs whose runner died.
Result<std::unique_ptr<Store>> OpenExisting(const std::string& path, Clock& wall) {
  std::error_code ec;
  if (!std::filesystem::exists(path, ec)) {
    return NotFound(fmt::format("no database at '{}' (give one with --db)", path));
  }
  Store::Options o;
  o.create = false;
  auto store = Store::Open(path, wall, o);
  if (!store.ok()) return store.status();
  (void)(*store)->ReconcileOrphans();
  return store;
}

}  // namespace

void RegisterRunQueries(CliRegistry& r) {
  static DbOption db;
  static bool json = false;
  static int64_t run_id = 0;
  static std::string csv_path;

  CLI::App* runs = r.Add("runs", "List the runs in a database", [] {
    SteadyClock wall;
    auto store = OpenExisting(db.path, wall);
    if (!store.ok()) return Fail(store.status());
    auto rows = (*store)->ListRuns();
    if (!rows.ok()) return Fail(rows.status());
    if (json) {
      nlohmann::json arr = nlohmann::json::array();
      for (const RunRow& row : *rows) arr.push_back(RunRowJson(row));
      std::cout << arr.dump(2) << "\n";
      return kExitOk;
    }
    std::cout << fmt::format("{:>4}  {:<22} {:<24} {:<11} {:>8}  {}\n", "run", "cell", "procedure", "outcome", "samples", "started");
    for (const RunRow& row : *rows) {
      std::cout << fmt::format("{:>4}  {:<22} {:<24} {:<11} {:>8}  {}\n", row.id, row.cell, row.procedure_name, OutcomeName(row.outcome),
                               row.sample_count, row.started_at);
    }
    return kExitOk;
  });
  runs->add_option("--db", db.path, "Database file")->capture_default_str();
  runs->add_flag("--json", json, "Machine-readable output");

  CLI::App* report = r.Add("report", "Figures of one run, computed from its logged samples", [] {
    SteadyClock wall;
    auto store = OpenExisting(db.path, wall);
    if (!store.ok()) return Fail(store.status());
    auto rep = BuildRunReport(**store, run_id);
    if (!rep.ok()) return Fail(rep.status());
    if (json) {
      std::cout << RunReportJson(*rep).dump(2) << "\n";
    } else {
      std::cout << RunReportText(*rep);
    }
    return kExitOk;
  });
  report->add_option("RUN", run_id, "Run id (see `kneepoint runs`)")->required();
  report->add_option("--db", db.path, "Database file")->capture_default_str();
  report->add_flag("--json", json, "Machine-readable output");

  CLI::App* exp = r.Add("export", "Write a run's samples as CSV", [] {
    SteadyClock wall;
    auto store = OpenExisting(db.path, wall);
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
  exp->add_option("--db", db.path, "Database file")->capture_default_str();
  exp->add_option("--csv", csv_path, "Output CSV file")->required();
}

}  // namespace kp::cli
