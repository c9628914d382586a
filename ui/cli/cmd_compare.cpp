// `compare`: several runs side by side — overlays, pulsed versus continuous
// ratios and a Peukert fit over the constant-current runs.
#include <fmt/format.h>

#include <iostream>
#include <nlohmann/json.hpp>

#include "drivers/text_hygiene.h"
#include "rig/store_open.h"
#include "ui/cli/cli.h"
#include "ui/cli/output_guard.h"
#include "ui/report/run_report.h"

namespace kp::cli {

Status WriteTextFile(const std::string& path, const std::string& text);
void AddReportOptions(CLI::App* cmd, ReportOptions& o, double& brownout_v);

void RegisterCompare(CliRegistry& r) {
  static std::string db_path = "kneepoint.db";
  static std::vector<int64_t> run_ids;
  static bool json = false;
  static std::string html_path, at_text, csv_path;
  static ReportOptions options;
  static double brownout_v = 0.0;
  db_path = "kneepoint.db", run_ids.clear(), json = false, html_path.clear(), at_text.clear(), csv_path.clear();
  options = ReportOptions{}, brownout_v = 0.0;
  CLI::App* cmd = r.Add("compare", "Compare runs: table, overlays, pulsed vs continuous, Peukert fit", [] {
    if (Status st = CheckOutputPaths(db_path, {html_path, csv_path}); !st.ok()) return Fail(st);
    std::optional<double> at_a;
    if (!at_text.empty()) {
      ParsedQuantity q = ParseQuantityText(at_text, Dimension::kCurrent, "--at");
      if (!q.value) return Fail(InvalidInput(fmt::format("--at: {}", q.error)));
      at_a = *q.value;
    }
    SteadyClock wall;
    std::vector<std::string> refs;
    for (int64_t id : run_ids) refs.push_back(std::to_string(id));
    auto store = OpenDbForReading(db_path, wall, refs);
    if (!store.ok()) return Fail(store.status());
    if (brownout_v > 0) options.brownout_v = brownout_v;
    auto rep = BuildCompareReport(**store, run_ids, at_a, options);
    if (!rep.ok()) return Fail(rep.status());
    if (!html_path.empty()) {
      if (Status st = WriteTextFile(html_path, CompareReportHtml(*rep)); !st.ok()) return Fail(st);
    }
    if (!csv_path.empty()) {
      if (Status st = WriteTextFile(csv_path, CompareReportCsv(*rep)); !st.ok()) return Fail(st);
    }
    if (json) {
      std::cout << CompareReportJson(*rep).dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
    } else {
      std::cout << TerminalSafe(CompareReportText(*rep));
      if (!html_path.empty()) std::cout << fmt::format("HTML comparison written to {}\n", html_path);
    }
    return kExitOk;
  });
  cmd->add_option("RUN", run_ids, "Run ids (two or more)")->required()->expected(2, -1);
  cmd->add_option("--db", db_path, "Database file, or a lab database postgresql://... (read only)")->capture_default_str();
  cmd->add_flag("--json", json, "Machine-readable output");
  cmd->add_option("--html", html_path, "Also write a self-contained HTML comparison to this file");
  cmd->add_option("--csv", csv_path, "Also write the side-by-side table as CSV to this file");
  cmd->add_option("--at", at_text, "Predict run time and capacity at this constant current from the Peukert fit (e.g. 750mA)");
  AddReportOptions(cmd, options, brownout_v);
}

}  // namespace kp::cli
