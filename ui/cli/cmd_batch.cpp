// `batch NAME --db DB [--json] [--html FILE]`: the batch report (ui/report/batch_report.h):
// every cell of a batch run with `run --slots ... --batch NAME`, compared.
#include <fmt/format.h>

#include <iostream>
#include <nlohmann/json.hpp>

#include "drivers/text_hygiene.h"
#include "rig/store_open.h"
#include "ui/cli/cli.h"
#include "ui/cli/output_guard.h"
#include "ui/report/batch_report.h"

namespace kp::cli {

Status WriteTextFile(const std::string& path, const std::string& text);  // cmd_report.cpp

void RegisterBatch(CliRegistry& r) {
  static std::string db_path = "kneepoint.db", batch, html_path;
  static bool json = false;
  db_path = "kneepoint.db", batch.clear(), html_path.clear(), json = false;
  CLI::App* c = r.Add("batch", "Batch report: the cells of one batch compared (mean, spread, outliers, verdicts)", [] {
    if (Status st = CheckOutputPaths(db_path, {html_path}); !st.ok()) return Fail(st);
    SteadyClock wall;
    auto store = OpenDbForReading(db_path, wall);
    if (!store.ok()) return Fail(store.status());
    auto rep = BuildBatchReport(**store, batch);
    if (!rep.ok()) return Fail(rep.status());
    if (!html_path.empty()) {
      if (Status st = WriteTextFile(html_path, BatchReportHtml(*rep)); !st.ok()) return Fail(st);
    }
    if (json) {
      std::cout << BatchReportJson(*rep).dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
    } else {
      std::cout << TerminalSafe(BatchReportText(*rep));
      if (!html_path.empty()) std::cout << fmt::format("HTML report written to {}\n", html_path);
    }
    return kExitOk;
  });
  c->add_option("NAME", batch, "The batch's name (as given to `run --batch`)")->required();
  c->add_option("--db", db_path, "Database file")->capture_default_str();
  c->add_flag("--json", json, "Machine-readable output");
  c->add_option("--html", html_path, "Also write a self-contained HTML batch report to this file");
}

}  // namespace kp::cli
