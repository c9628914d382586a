// `runs`: list the runs in a database.
#include <algorithm>
#include <iostream>

#include <fmt/format.h>

#include <nlohmann/json.hpp>

#include "drivers/text_hygiene.h"

#include "rig/run_report.h"
#include "rig/cli/cli.h"
#include "rig/cli/db_open.h"

namespace kp::cli {

void RegisterRuns(CliRegistry& r) {
  static std::string db_path = "kneepoint.db";
  static bool json = false;
  CLI::App* runs = r.Add("runs", "List the runs in a database", [] {
    SteadyClock wall;
    auto store = OpenExistingDb(db_path, wall);
    if (!store.ok()) return Fail(store.status());
    auto rows = (*store)->ListRuns();
    if (!rows.ok()) return Fail(rows.status());
    if (json) {
      nlohmann::json arr = nlohmann::json::array();
      for (const RunRow& row : *rows) arr.push_back(RunRowJson(row));
      std::cout << arr.dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
      return kExitOk;
    }
    // Columns as wide as their longest entry (names longer than 60 characters are cut).
    constexpr size_t kMaxWidth = 60;
    auto cut = [&](const std::string& raw) {
      std::string text = TerminalSafe(raw);  // names may hold anything: no control characters to the terminal
      return text.size() <= kMaxWidth ? text : text.substr(0, kMaxWidth - 3) + "...";
    };
    size_t cell_w = 4, proc_w = 9;
    for (const RunRow& row : *rows) {
      cell_w = std::max(cell_w, cut(row.cell).size());
      proc_w = std::max(proc_w, cut(row.procedure_name).size());
    }
    std::cout << fmt::format("{:>4}  {:<{}}  {:<{}}  {:<11} {:>8}  {}\n", "run", "cell", cell_w, "procedure", proc_w, "outcome",
                             "samples", "started");
    for (const RunRow& row : *rows) {
      std::cout << fmt::format("{:>4}  {:<{}}  {:<{}}  {:<11} {:>8}  {}\n", row.id, cut(row.cell), cell_w, cut(row.procedure_name),
                               proc_w, OutcomeName(row.outcome), row.sample_count, row.started_at);
    }
    return kExitOk;
  });
  runs->add_option("--db", db_path, "Database file")->capture_default_str();
  runs->add_flag("--json", json, "Machine-readable output");

}

}  // namespace kp::cli
