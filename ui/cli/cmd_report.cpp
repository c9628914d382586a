// `report`: the figures of one run, computed from its logged samples.
#include <fmt/format.h>

#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>

#include "drivers/text_hygiene.h"
#include "rig/store_open.h"
#include "ui/cli/cli.h"
#include "ui/cli/output_guard.h"
#include "ui/report/run_report.h"

namespace kp::cli {

// Writes `text` to `path` (replacing it); an error names the file.
Status WriteTextFile(const std::string& path, const std::string& text) {
  std::ofstream out(path, std::ios::trunc | std::ios::binary);
  if (!out) return IoError(fmt::format("cannot write '{}'", path));
  out << text;
  out.flush();
  if (!out) return IoError(fmt::format("writing '{}' failed (disk full?)", path));
  return Status::Ok();
}

// Options shared by `report` and `compare`.
void AddReportOptions(CLI::App* cmd, ReportOptions& o, double& brownout_v) {
  AddQuantityOption(cmd, "--dcir-delay", o.dcir.delay_s, Dimension::kTime,
                    "Time after a current edge at which U2 is read (DC-IR)", 1e-6, 3600.0);
  AddQuantityOption(cmd, "--dcir-min-step", o.dcir.min_step_a, Dimension::kCurrent, "Smallest current change treated as an edge",
                    1e-12, 1e4);
  AddQuantityOption(cmd, "--brownout", brownout_v, Dimension::kVoltage,
                    "Brown-out voltage: report the first pulse whose minimum breaches it", 1e-9, 1e4)
      ->default_str("");
}

void RegisterReport(CliRegistry& r) {
  static std::string db_path = "kneepoint.db";
  static bool json = false;
  static int64_t run_id = 0;
  static std::string html_path, csv_path, cycles_csv_path;
  static ReportOptions options;
  static double brownout_v = 0.0;
  db_path = "kneepoint.db", json = false, run_id = 0, html_path.clear(), csv_path.clear(), cycles_csv_path.clear();
  options = ReportOptions{}, brownout_v = 0.0;
  CLI::App* report = r.Add("report", "Figures of one run, computed from its logged samples", [] {
    if (Status st = CheckOutputPaths(db_path, {html_path, csv_path, cycles_csv_path}); !st.ok()) return Fail(st);
    SteadyClock wall;
    auto store = OpenDbForReading(db_path, wall, {std::to_string(run_id)});
    if (!store.ok()) return Fail(store.status());
    if (brownout_v > 0) options.brownout_v = brownout_v;
    auto rep = BuildRunReport(**store, run_id, options);
    if (!rep.ok()) return Fail(rep.status());
    if (!html_path.empty()) {
      if (Status st = WriteTextFile(html_path, RunReportHtml(*rep)); !st.ok()) return Fail(st);
    }
    if (!csv_path.empty()) {
      if (Status st = WriteTextFile(csv_path, RunReportStepsCsv(*rep)); !st.ok()) return Fail(st);
    }
    if (!cycles_csv_path.empty()) {
      if (Status st = WriteTextFile(cycles_csv_path, RunReportCyclesCsv(*rep)); !st.ok()) return Fail(st);
    }
    if (json) {
      std::cout << RunReportJson(*rep).dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
    } else {
      std::cout << TerminalSafe(RunReportText(*rep));
      if (!html_path.empty()) std::cout << fmt::format("HTML report written to {}\n", html_path);
      if (!csv_path.empty()) std::cout << fmt::format("per-step CSV written to {}\n", csv_path);
      if (!cycles_csv_path.empty()) std::cout << fmt::format("per-cycle CSV written to {}\n", cycles_csv_path);
    }
    return kExitOk;
  });
  report->add_option("RUN", run_id, "Run id (see `kneepoint runs`)")->required();
  report->add_option("--db", db_path, "Database file, or a lab database postgresql://... (read only)")->capture_default_str();
  report->add_flag("--json", json, "Machine-readable output");
  report->add_option("--html", html_path, "Also write a self-contained HTML report (inline SVG plots) to this file");
  report->add_option("--csv", csv_path, "Also write the per-step figures as CSV to this file");
  report->add_option("--cycles-csv", cycles_csv_path, "Also write the per-cycle figures as CSV to this file");
  AddReportOptions(report, options, brownout_v);
}

}  // namespace kp::cli
