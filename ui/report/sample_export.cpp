#include "ui/report/sample_export.h"

#include <xlsxwriter.h>

#include <cmath>
#include <cstdio>
#include <ctime>
#include <optional>

#include <fmt/format.h>

#include "rig/sample_summary.h"

namespace kp {
namespace {

// The step instance that owns a sample (t in (start, end]), walking the
// instances in time order as the samples stream by.
class StepOf {
 public:
  explicit StepOf(std::vector<StepRow> steps) : steps_(std::move(steps)) {}
  const StepRow* operator()(double t_s) {
    while (k_ + 1 < steps_.size() && t_s > steps_[k_ + 1].started_s + 1e-12) ++k_;
    return steps_.empty() ? nullptr : &steps_[k_];
  }

 private:
  std::vector<StepRow> steps_;
  size_t k_ = 0;
};

std::optional<double> EpochOf(const std::string& iso) {
  std::tm tm{};
  if (strptime(iso.c_str(), "%Y-%m-%dT%H:%M:%S", &tm) == nullptr) return std::nullopt;
  return static_cast<double>(timegm(&tm));
}

std::string IsoOfEpoch(double t) {
  double whole = std::floor(t);
  int ms = static_cast<int>(std::lround((t - whole) * 1000.0));
  if (ms == 1000) whole += 1, ms = 0;
  std::time_t tt = static_cast<std::time_t>(whole);
  std::tm tm{};
  gmtime_r(&tt, &tm);
  char buf[40];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%S", &tm);
  return fmt::format("{}.{:03}Z", buf, ms);
}

// One exported row, whatever the format.
struct Row {
  const Sample* s = nullptr;
  std::string time_utc;
  std::string kind;
  int cycle = 0;
  double charge_ah = 0.0, energy_wh = 0.0;
};

// Streams a run's samples as Rows.
Status ForEachRow(Store& store, const RunRow& run, const std::function<Status(const Row&)>& fn) {
  KP_ASSIGN_OR_RETURN(auto steps, store.LoadSteps(run.id));
  StepOf step_of(std::move(steps));
  const std::optional<double> t0 = EpochOf(run.started_at);
  SampleSummary acc;
  return store.ForEachSample(run.id, [&](const Sample& s) {
    acc.Add(s);
    Row r;
    r.s = &s;
    if (t0) r.time_utc = IsoOfEpoch(*t0 + s.t_s);
    if (const StepRow* st = step_of(s.t_s)) {
      r.kind = st->kind;
      r.cycle = st->cycle;
    }
    r.charge_ah = acc.net_mah / 1000.0;
    r.energy_wh = acc.net_wh;
    return fn(r);
  });
}

}  // namespace

std::string CsvField(std::string_view text, char separator) {
  bool quote = !text.empty() && (text.front() == ' ' || text.back() == ' ');
  for (char c : text) quote = quote || c == separator || c == '"' || c == '\r' || c == '\n';
  if (!quote) return std::string(text);
  std::string out = "\"";
  for (char c : text) {
    if (c == '"') out += '"';
    out += c;
  }
  return out + "\"";
}

std::string CsvNumber(double v, const CsvStyle& style) {
  std::string s = fmt::format("{}", v);
  if (style.decimal != '.')
    for (char& c : s)
      if (c == '.') c = style.decimal;
  return s;
}

const std::vector<std::string>& SampleExportColumns() {
  static const std::vector<std::string> kColumns = {"t_s",        "voltage_V", "current_A", "temperature_C", "step",
                                                    "step_number", "cycle",     "time_utc",  "step_kind",     "charge_Ah",
                                                    "energy_Wh"};
  return kColumns;
}

std::string WallTimeAt(const std::string& started_at, double t_s) {
  std::optional<double> t0 = EpochOf(started_at);
  return t0 ? IsoOfEpoch(*t0 + t_s) : std::string();
}

Status WriteSamplesCsv(Store& store, const RunRow& run, std::ostream& out, const CsvStyle& style) {
  const char sep = style.separator;
  std::string header;
  for (const std::string& c : SampleExportColumns()) header += (header.empty() ? "" : std::string(1, sep)) + CsvField(c, sep);
  out << header << "\r\n";
  auto num = [&](double v) { return CsvNumber(v, style); };
  std::string line;
  return ForEachRow(store, run, [&](const Row& r) {
    const Sample& s = *r.s;
    line.clear();
    for (const std::string& f : {num(s.t_s), num(s.voltage_v), num(s.current_a), num(s.temperature_c), std::to_string(s.step),
                                 std::to_string(s.step + 1), std::to_string(r.cycle), r.time_utc, CsvField(r.kind, sep),
                                 num(r.charge_ah), num(r.energy_wh)}) {
      if (!line.empty()) line += sep;
      line += f;
    }
    out << line << "\r\n";
    return out ? Status::Ok() : IoError("writing the CSV failed (disk full?)");
  });
}

namespace {

// Closes the workbook on every path (a workbook left open leaks its temp files).
struct Workbook {
  lxw_workbook* wb = nullptr;
  ~Workbook() {
    if (wb != nullptr) workbook_close(wb);
  }
};

Status XlsxStatus(lxw_error e, const std::string& what) {
  if (e == LXW_NO_ERROR) return Status::Ok();
  return IoError(fmt::format("{}: {}", what, lxw_strerror(e)));
}

}  // namespace

Status WriteRunXlsx(Store& store, const RunReport& rep, const std::string& path) {
  lxw_workbook_options opt{};
  opt.constant_memory = LXW_TRUE;  // rows go to a temp file as they are written: memory stays flat
  opt.use_zip64 = LXW_TRUE;        // runs of millions of samples
  Workbook book;
  book.wb = workbook_new_opt(path.c_str(), &opt);
  if (book.wb == nullptr) return IoError(fmt::format("cannot create '{}'", path));
  lxw_format* bold = workbook_add_format(book.wb);
  format_set_bold(bold);
  lxw_format* when = workbook_add_format(book.wb);
  format_set_num_format(when, "yyyy-mm-dd hh:mm:ss.000");

  // --- summary: key, value (and unit) rows, in order ---
  lxw_worksheet* sum = workbook_add_worksheet(book.wb, "summary");
  worksheet_set_column(sum, 0, 0, 28, nullptr);
  worksheet_set_column(sum, 1, 1, 60, nullptr);
  lxw_row_t row = 0;
  Status st = Status::Ok();
  auto text = [&](const std::string& k, const std::string& v) {
    if (!st.ok()) return;
    st = XlsxStatus(worksheet_write_string(sum, row, 0, k.c_str(), nullptr), path);
    if (st.ok() && !v.empty()) st = XlsxStatus(worksheet_write_string(sum, row, 1, v.c_str(), nullptr), path);
    ++row;
  };
  auto number = [&](const std::string& k, std::optional<double> v, const std::string& unit) {
    if (!st.ok()) return;
    st = XlsxStatus(worksheet_write_string(sum, row, 0, k.c_str(), nullptr), path);
    if (st.ok() && v && std::isfinite(*v)) st = XlsxStatus(worksheet_write_number(sum, row, 1, *v, nullptr), path);
    if (st.ok() && !unit.empty()) st = XlsxStatus(worksheet_write_string(sum, row, 2, unit.c_str(), nullptr), path);
    ++row;
  };
  const RunRow& r = rep.run;
  const RunAnalysis& a = rep.analysis;
  if (st.ok()) st = XlsxStatus(worksheet_write_string(sum, row++, 0, "run record", bold), path);
  number("run", static_cast<double>(r.id), "");
  for (const RecordField& f : RunRecordFields(rep)) text(f.label, f.value);
  ++row;
  if (st.ok()) st = XlsxStatus(worksheet_write_string(sum, row++, 0, "figures", bold), path);
  number("rated capacity", r.rated_mah, "mAh");
  number("delivered charge", a.discharge_charge_mah, "mAh");
  number("delivered energy", a.discharge_energy_wh, "Wh");
  number("percent of rated", a.verdict.percent_of_rated, "%");
  number("mean voltage (discharge)", a.main_discharge_step >= 0 ? a.mean_voltage_v : rep.figures.mean_voltage_v, "V");
  number("minimum voltage", rep.figures.min_voltage_v, "V");
  number("record duration", rep.figures.duration_s, "s");
  number("time to cutoff", a.time_to_cutoff_s, "s");
  number("maximum temperature", a.max_temperature_c, "°C");
  number("samples", static_cast<double>(rep.figures.sample_count), "");
  text("verdict", a.verdict.text);
  for (const InstrumentRecord& i : rep.equipment.instruments) {
    ++row;
    if (st.ok()) st = XlsxStatus(worksheet_write_string(sum, row++, 0, ("instrument " + i.name).c_str(), bold), path);
    text("roles", i.roles);
    text("identity (*IDN?)", i.identity);
    text("manufacturer", i.manufacturer);
    text("model", i.model);
    text("serial", i.serial);
    text("firmware", i.firmware);
    text("address", i.address);
    text("profile", i.profile);
    number("voltage gain", i.voltage_gain, "");
    number("voltage offset", i.voltage_offset_v, "V");
    number("current gain", i.current_gain, "");
    number("current offset", i.current_offset_a, "A");
    number("temperature gain", i.temperature_gain, "");
    number("temperature offset", i.temperature_offset_c, "°C");
    text("calibrated on", i.calibrated_on);
  }
  for (const EventRow& n : rep.notes) text("note " + n.wall_at, n.message);
  KP_RETURN_IF_ERROR(st);

  // --- samples: the CSV columns; time_utc as a spreadsheet date-time ---
  const std::vector<std::string>& cols = SampleExportColumns();
  constexpr lxw_row_t kRowsPerSheet = 1048576 - 1;  // the format's limit, less the header
  lxw_worksheet* ws = nullptr;
  lxw_row_t r_in_sheet = 0;
  int sheets = 0;
  auto new_sheet = [&]() -> Status {
    ++sheets;
    std::string name = sheets == 1 ? "samples" : fmt::format("samples {}", sheets);
    ws = workbook_add_worksheet(book.wb, name.c_str());
    if (ws == nullptr) return IoError(fmt::format("{}: cannot add sheet '{}'", path, name));
    worksheet_set_column(ws, 7, 7, 24, nullptr);
    worksheet_set_column(ws, 8, 8, 26, nullptr);
    worksheet_freeze_panes(ws, 1, 0);
    for (size_t c = 0; c < cols.size(); ++c)
      KP_RETURN_IF_ERROR(XlsxStatus(worksheet_write_string(ws, 0, static_cast<lxw_col_t>(c), cols[c].c_str(), bold), path));
    r_in_sheet = 1;
    return Status::Ok();
  };
  KP_RETURN_IF_ERROR(new_sheet());
  const std::optional<double> t0 = EpochOf(r.started_at);
  KP_RETURN_IF_ERROR(ForEachRow(store, r, [&](const Row& x) -> Status {
    if (r_in_sheet > kRowsPerSheet) KP_RETURN_IF_ERROR(new_sheet());
    const Sample& s = *x.s;
    const lxw_row_t n = r_in_sheet++;
    auto put = [&](lxw_col_t c, double v) { return XlsxStatus(worksheet_write_number(ws, n, c, v, nullptr), path); };
    KP_RETURN_IF_ERROR(put(0, s.t_s));
    KP_RETURN_IF_ERROR(put(1, s.voltage_v));
    KP_RETURN_IF_ERROR(put(2, s.current_a));
    KP_RETURN_IF_ERROR(put(3, s.temperature_c));
    KP_RETURN_IF_ERROR(put(4, s.step));
    KP_RETURN_IF_ERROR(put(5, s.step + 1));
    KP_RETURN_IF_ERROR(put(6, x.cycle));
    // Spreadsheet serial date: days since 1899-12-30 (the 1900 date system;
    // Unix day 0 is serial 25569, from memory).
    if (t0) KP_RETURN_IF_ERROR(XlsxStatus(worksheet_write_number(ws, n, 7, 25569.0 + (*t0 + s.t_s) / 86400.0, when), path));
    KP_RETURN_IF_ERROR(XlsxStatus(worksheet_write_string(ws, n, 8, x.kind.c_str(), nullptr), path));
    KP_RETURN_IF_ERROR(put(9, x.charge_ah));
    return put(10, x.energy_wh);
  }));
  lxw_workbook* wb = book.wb;
  book.wb = nullptr;
  return XlsxStatus(workbook_close(wb), fmt::format("writing '{}'", path));
}

}  // namespace kp
