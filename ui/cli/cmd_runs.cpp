// `runs`: list the runs in a database, optionally filtered (cell, serial,
// lot, part, tag, operator, bench, outcome, verdict, date range, procedure)
// and searched (a text anywhere in the record or the run's notes).
#include <algorithm>
#include <cctype>
#include <iostream>

#include <fmt/format.h>

#include <nlohmann/json.hpp>

#include "drivers/text_hygiene.h"

#include "rig/store_open.h"
#include "ui/cli/cli.h"
#include "ui/report/run_report.h"

namespace kp::cli {
namespace {

struct RunsOptions {
  std::string db_path = "kneepoint.db";
  bool json = false;
  RunFilter filter;
  std::string outcome;
};

// "2026-03-14" or "2026-03-14T09:30[:00][Z]": an ISO 8601 UTC date or time.
Status CheckIsoBound(const std::string& v, const char* option) {
  auto digit = [&](size_t k) { return k < v.size() && std::isdigit(static_cast<unsigned char>(v[k])); };
  bool ok = v.size() >= 10 && digit(0) && digit(1) && digit(2) && digit(3) && v[4] == '-' && digit(5) && digit(6) && v[7] == '-' &&
            digit(8) && digit(9);
  if (ok && v.size() > 10) {
    ok = v[10] == 'T' && v.size() >= 16 && digit(11) && digit(12) && v[13] == ':' && digit(14) && digit(15);
    for (size_t k = 16; ok && k < v.size(); ++k) ok = std::isdigit(static_cast<unsigned char>(v[k])) || v[k] == ':' || v[k] == 'Z' || v[k] == '.';
  }
  if (!ok) return InvalidInput(fmt::format("{} '{}': give a UTC date or time, 2026-03-14 or 2026-03-14T09:30", option, v));
  return Status::Ok();
}

int RunRuns(RunsOptions& opt) {
  RunFilter& f = opt.filter;
  if (!opt.outcome.empty()) {
    f.outcome = ParseOutcome(opt.outcome);
    if (!f.outcome)
      return Fail(InvalidInput(fmt::format("--outcome '{}': use running, completed, aborted or interrupted", opt.outcome)));
  }
  if (!f.verdict.empty() && f.verdict != "pass" && f.verdict != "fail" && f.verdict != "not judged")
    return Fail(InvalidInput(fmt::format("--verdict '{}': use pass, fail or \"not judged\"", f.verdict)));
  if (!f.since.empty())
    if (Status st = CheckIsoBound(f.since, "--since"); !st.ok()) return Fail(st);
  if (!f.until.empty())
    if (Status st = CheckIsoBound(f.until, "--until"); !st.ok()) return Fail(st);
  SteadyClock wall;
  auto store = OpenDbForReading(opt.db_path, wall);
  if (!store.ok()) return Fail(store.status());
  // The verdict is recorded when a run ends (schema v5); runs recorded before
  // have none stored, and theirs is computed here from the samples.
  RunFilter stored = f;
  stored.verdict.clear();
  auto found = (*store)->FindRuns(stored);
  if (!found.ok()) return Fail(found.status());
  std::vector<RunRow> rows;
  for (RunRow& row : *found) {
    if (row.verdict.empty() && row.outcome != Outcome::kRunning && !f.verdict.empty()) {
      if (auto rep = BuildRunReport(**store, row.id); rep.ok()) row.verdict = VerdictWord(*rep);
    }
    if (!f.verdict.empty() && row.verdict != f.verdict) continue;
    rows.push_back(std::move(row));
  }
  if (opt.json) {
    nlohmann::json arr = nlohmann::json::array();
    for (const RunRow& row : rows) arr.push_back(RunRowJson(row));
    std::cout << arr.dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
    return kExitOk;
  }
  // Columns as wide as their longest entry (names longer than 60 characters are cut).
  constexpr size_t kMaxWidth = 60;
  auto cut = [&](const std::string& raw) {
    std::string text = TerminalSafe(raw);  // names may hold anything: no control characters to the terminal
    return text.size() <= kMaxWidth ? text : text.substr(0, kMaxWidth - 3) + "...";
  };
  size_t cell_w = 4, proc_w = 9, serial_w = 6;
  for (const RunRow& row : rows) {
    cell_w = std::max(cell_w, cut(row.cell).size());
    proc_w = std::max(proc_w, cut(row.procedure_name).size());
    serial_w = std::max(serial_w, cut(row.cell_serial).size());
  }
  std::cout << fmt::format("{:>4}  {:<{}}  {:<{}}  {:<11} {:>8}  {:<20}  {:<{}}  {:<10}  {}\n", "run", "cell", cell_w, "procedure", proc_w,
                           "outcome", "samples", "started", "serial", serial_w, "verdict", "uuid");
  for (const RunRow& row : rows) {
    std::cout << fmt::format("{:>4}  {:<{}}  {:<{}}  {:<11} {:>8}  {:<20}  {:<{}}  {:<10}  {}\n", row.id, cut(row.cell), cell_w,
                             cut(row.procedure_name), proc_w, OutcomeName(row.outcome), row.sample_count, row.started_at,
                             row.cell_serial.empty() ? "-" : cut(row.cell_serial), serial_w, row.verdict.empty() ? "-" : row.verdict,
                             row.uuid.substr(0, 8));
  }
  if (rows.empty() && !f.empty()) std::cerr << "kneepoint: no run matches\n";
  return kExitOk;
}

}  // namespace

void RegisterRuns(CliRegistry& r) {
  static RunsOptions opt;
  opt = RunsOptions{};
  CLI::App* runs = r.Add("runs", "List the runs in a database (filters narrow the list; all given must hold)",
                         [] { return RunRuns(opt); });
  runs->add_option("--db", opt.db_path, "Database file, or a lab database postgresql://... (read only)")->capture_default_str();
  runs->add_flag("--json", opt.json, "Machine-readable output");
  RunFilter& f = opt.filter;
  runs->add_option("--cell", f.cell, "Cell name (case-insensitive; * and ? are wildcards)");
  runs->add_option("--serial", f.serial, "Cell serial number (wildcards as --cell)");
  runs->add_option("--lot", f.lot, "Cell lot (wildcards as --cell)");
  runs->add_option("--part", f.part, "Cell manufacturer part number (wildcards as --cell)");
  runs->add_option("--tag", f.tag, "A tag the run carries (wildcards as --cell)");
  runs->add_option("--operator", f.operator_name, "Who ran it (wildcards as --cell)");
  runs->add_option("--bench", f.bench, "Bench name (wildcards as --cell)");
  runs->add_option("--procedure", f.procedure, "Procedure name (wildcards as --cell)");
  runs->add_option("--outcome", opt.outcome, "running, completed, aborted or interrupted");
  runs->add_option("--verdict", f.verdict, "Capacity verdict: pass, fail or \"not judged\"");
  runs->add_option("--since", f.since, "Started on or after this UTC date or time (2026-03-14 or 2026-03-14T09:30)");
  runs->add_option("--until", f.until, "Started on or before this UTC date or time (a date includes its whole day)");
  runs->add_option("--search", f.text, "Text anywhere in the record: cell, serial, lot, part, tags, operator, bench, "
                                       "procedure, reason, UUID or the run's notes (case-insensitive)");
}

}  // namespace kp::cli
