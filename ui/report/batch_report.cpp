#include "ui/report/batch_report.h"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

#include "analysis/html_report.h"
#include "rig/version.h"
#include "ui/report/run_report.h"

namespace kp {
namespace {

std::string TagValue(const std::vector<std::string>& tags, const std::string& prefix) {
  for (const std::string& t : tags)
    if (t.rfind(prefix, 0) == 0) return t.substr(prefix.size());
  return "";
}

nlohmann::json StatsJson(const BatchStats& s) {
  nlohmann::json j;
  j["n"] = s.n;
  if (s.n == 0) return j;
  j["mean"] = s.mean;
  j["stddev"] = s.stddev ? nlohmann::json(*s.stddev) : nlohmann::json(nullptr);
  j["min"] = s.min;
  j["max"] = s.max;
  j["median"] = s.median;
  j["mad"] = s.mad;
  return j;
}

std::string Fixed(std::optional<double> v, int decimals) {
  if (!v) return "-";
  return fmt::format("{:.{}f}", std::fabs(*v) < 0.5 * std::pow(10.0, -decimals) ? 0.0 : *v, decimals);
}

HtmlCell Plain(std::string text) { return HtmlCell{std::move(text), "", std::nullopt}; }

}  // namespace

std::string OutlierRuleText() {
  return "outlier: |modified z| > 3.5, modified z = 0.6745 (x - median) / MAD (Iglewicz and Hoaglin 1993); "
         "only completed runs count; no outliers below 3 cells";
}

BatchReport MakeBatchReport(std::string batch, std::vector<BatchCell> cells) {
  BatchReport r;
  r.batch = std::move(batch);
  std::sort(cells.begin(), cells.end(), [](const BatchCell& a, const BatchCell& b) {
    return a.slot != b.slot ? a.slot < b.slot : a.run.id < b.run.id;
  });
  r.cells = std::move(cells);
  std::vector<double> caps, res;
  std::vector<size_t> cap_of, res_of;
  for (size_t i = 0; i < r.cells.size(); ++i) {
    const BatchCell& c = r.cells[i];
    if (!c.in_statistics) continue;
    if (c.capacity_mah) caps.push_back(*c.capacity_mah), cap_of.push_back(i);
    if (c.resistance_mohm) res.push_back(*c.resistance_mohm), res_of.push_back(i);
  }
  r.capacity = ComputeBatchStats(caps);
  r.resistance = ComputeBatchStats(res);
  for (size_t k = 0; k < cap_of.size(); ++k) {
    r.cells[cap_of[k]].capacity_outlier = r.capacity.outlier[k];
    r.cells[cap_of[k]].capacity_z = r.capacity.modified_z[k];
  }
  for (size_t k = 0; k < res_of.size(); ++k) {
    r.cells[res_of[k]].resistance_outlier = r.resistance.outlier[k];
    r.cells[res_of[k]].resistance_z = r.resistance.modified_z[k];
  }
  return r;
}

Result<BatchReport> BuildBatchReport(Store& store, const std::string& batch) {
  RunFilter f;
  f.tag = "batch=" + batch;
  KP_ASSIGN_OR_RETURN(std::vector<RunRow> runs, store.FindRuns(f));
  if (runs.empty()) return NotFound(fmt::format("no runs of batch '{}' (runs tagged batch={})", batch, batch));
  std::vector<BatchCell> cells;
  for (const RunRow& row : runs) {
    BatchCell c;
    c.run = row;
    c.slot = TagValue(row.tags, "slot=");
    Result<RunReport> rep = BuildRunReport(store, row.id);
    if (rep.ok()) {
      c.verdict = VerdictWord(*rep);
      // Capacity from the step records: the judged discharge's delivered charge.
      if (!rep->analysis.discharges.empty()) c.capacity_mah = rep->analysis.discharge_charge_mah;
      std::vector<double> r_mohm;
      for (const DcirPoint& p : rep->analysis.dcir) r_mohm.push_back(p.resistance_ohm * 1000.0);
      if (!r_mohm.empty()) c.resistance_mohm = Median(r_mohm);
    } else {
      c.verdict = "no report: " + rep.status().message();
    }
    c.in_statistics = row.outcome == Outcome::kCompleted && c.capacity_mah.has_value();
    cells.push_back(std::move(c));
  }
  return MakeBatchReport(batch, std::move(cells));
}

std::string BatchReportText(const BatchReport& r) {
  std::string out = fmt::format("Batch {}: {} cells\n", r.batch, r.cells.size());
  out += fmt::format("  {:<6} {:<14} {:>5} {:<11} {:>10} {:>10}  {}\n", "slot", "serial", "run", "outcome", "mAh", "mOhm", "verdict");
  for (const BatchCell& c : r.cells) {
    std::string flag;
    if (c.capacity_outlier) flag += " [capacity outlier]";
    if (c.resistance_outlier) flag += " [resistance outlier]";
    out += fmt::format("  {:<6} {:<14} {:>5} {:<11} {:>10} {:>10}  {}{}\n", c.slot, c.run.cell_serial.empty() ? c.run.cell : c.run.cell_serial,
                       c.run.id, OutcomeName(c.run.outcome), Fixed(c.capacity_mah, 1), Fixed(c.resistance_mohm, 1), c.verdict, flag);
  }
  auto line = [](const char* what, const BatchStats& s, int d) {
    if (s.n == 0) return fmt::format("  {}: no completed cell\n", what);
    return fmt::format("  {}: n {}, mean {}, sd {}, min {}, max {}, median {}\n", what, s.n, Fixed(s.mean, d), Fixed(s.stddev, d),
                       Fixed(s.min, d), Fixed(s.max, d), Fixed(s.median, d));
  };
  out += line("capacity mAh", r.capacity, 1);
  out += line("resistance mOhm", r.resistance, 2);
  out += "  " + OutlierRuleText() + "\n";
  return out;
}

nlohmann::json BatchReportJson(const BatchReport& r) {
  nlohmann::json j;
  j["schema_version"] = kBatchReportSchemaVersion;
  j["batch"] = r.batch;
  j["generated_at"] = SteadyClock().WallTimeIso();
  nlohmann::json cells = nlohmann::json::array();
  for (const BatchCell& c : r.cells) {
    nlohmann::json e;
    e["slot"] = c.slot;
    e["serial"] = c.run.cell_serial;
    e["run_record"] = RunRowJson(c.run);
    e["capacity_mAh"] = c.capacity_mah ? nlohmann::json(*c.capacity_mah) : nlohmann::json(nullptr);
    e["resistance_mOhm"] = c.resistance_mohm ? nlohmann::json(*c.resistance_mohm) : nlohmann::json(nullptr);
    e["verdict"] = c.verdict;
    e["in_statistics"] = c.in_statistics;
    e["capacity_outlier"] = c.capacity_outlier;
    e["resistance_outlier"] = c.resistance_outlier;
    cells.push_back(std::move(e));
  }
  j["cells"] = std::move(cells);
  j["capacity_mAh"] = StatsJson(r.capacity);
  j["resistance_mOhm"] = StatsJson(r.resistance);
  j["outlier_rule"] = OutlierRuleText();
  return j;
}

std::string BatchReportHtml(const BatchReport& r) {
  std::vector<HtmlSection> sections;
  HtmlSection cells;
  cells.title = "Cells";
  HtmlTable t;
  t.caption = "One row per cell of the batch";
  t.header = {"slot", "serial", "run", "outcome", "capacity (mAh)", "resistance (mΩ)", "verdict", "flags"};
  for (size_t i = 0; i < r.cells.size(); ++i) {
    const BatchCell& c = r.cells[i];
    std::string flags;
    if (c.capacity_outlier) flags += "capacity outlier ";
    if (c.resistance_outlier) flags += "resistance outlier";
    HtmlCell cap{Fixed(c.capacity_mah, 1), c.capacity_mah ? fmt::format("/cells/{}/capacity_mAh", i) : "", c.capacity_mah};
    HtmlCell res{Fixed(c.resistance_mohm, 1), c.resistance_mohm ? fmt::format("/cells/{}/resistance_mOhm", i) : "", c.resistance_mohm};
    t.rows.push_back({Plain(c.slot), Plain(c.run.cell_serial.empty() ? c.run.cell : c.run.cell_serial), Plain(std::to_string(c.run.id)),
                      Plain(OutcomeName(c.run.outcome)), cap, res, Plain(c.verdict), Plain(flags)});
  }
  cells.tables.push_back(std::move(t));
  sections.push_back(std::move(cells));
  HtmlSection stats;
  stats.title = "Batch statistics";
  HtmlTable s;
  s.caption = "Completed cells only";
  s.header = {"figure", "n", "mean", "standard deviation", "min", "max", "median"};
  auto row = [&](const char* name, const char* key, const BatchStats& b, int d) {
    auto cell = [&](std::optional<double> v, const char* field) {
      return HtmlCell{Fixed(v, d), v ? fmt::format("/{}/{}", key, field) : "", v};
    };
    std::optional<double> mean, min, max, med;
    if (b.n > 0) mean = b.mean, min = b.min, max = b.max, med = b.median;
    s.rows.push_back({Plain(name), Plain(std::to_string(b.n)), cell(mean, "mean"), cell(b.stddev, "stddev"), cell(min, "min"), cell(max, "max"),
                      cell(med, "median")});
  };
  row("capacity (mAh)", "capacity_mAh", r.capacity, 1);
  row("resistance (mΩ)", "resistance_mOhm", r.resistance, 2);
  stats.tables.push_back(std::move(s));
  stats.paragraphs.push_back(OutlierRuleText() + ".");
  sections.push_back(std::move(stats));
  HtmlPageMeta meta;
  meta.subtitle = fmt::format("{} cells", r.cells.size());
  meta.generator = fmt::format("Kneepoint {}", SoftwareVersion());
  meta.generated_at = SteadyClock().WallTimeIso();
  return RenderHtmlPage("Batch " + r.batch, sections, meta);
}

}  // namespace kp
