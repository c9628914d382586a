// `report`: the figures of one run, computed from its logged samples.
#include <iostream>

#include <nlohmann/json.hpp>

#include "rig/run_report.h"
#include "rig/cli/cli.h"
#include "rig/cli/db_open.h"

namespace kp::cli {

void RegisterReport(CliRegistry& r) {
  static std::string db_path = "kneepoint.db";
  static bool json = false;
  static int64_t run_id = 0;
  CLI::App* report = r.Add("report", "Figures of one run, computed from its logged samples", [] {
    SteadyClock wall;
    auto store = OpenExistingDb(db_path, wall);
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
  report->add_option("--db", db_path, "Database file")->capture_default_str();
  report->add_flag("--json", json, "Machine-readable output");

}

}  // namespace kp::cli
