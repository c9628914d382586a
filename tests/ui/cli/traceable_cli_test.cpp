// The traceable record end to end through the command line: `run` with the
// record options, `note`, `runs` filters, `report` (text, JSON, HTML
// "Equipment and conditions"), the database views read with the sqlite3
// tool, and the exports read back by independent readers: Python's csv
// module for the CSV (both styles) and Python's zipfile for the .xlsx.
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <set>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "rig/store.h"
#include "rig/uuid.h"
#include "rig/version.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/cli/cli.h"
#include "ui/report/run_report.h"
#include "ui/report/sample_export.h"

namespace kp {
namespace {

using testing::CliResult;
CliResult Cli(std::vector<std::string> args) { return testing::RunKneepointCaptured(std::move(args)); }

// Runs a shell command, returning its stdout (and the exit status).
std::string Shell(const std::string& cmd, int* status = nullptr) {
  std::string out;
  FILE* p = popen(cmd.c_str(), "r");
  if (p == nullptr) return out;
  char buf[4096];
  size_t n;
  while ((n = fread(buf, 1, sizeof buf, p)) > 0) out.append(buf, n);
  int st = pclose(p);
  if (status != nullptr) *status = st;
  return out;
}

std::string Slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

void WriteFile(const std::string& path, const std::string& text) {
  std::ofstream out(path, std::ios::binary);
  out << text;
}

// Charge, rest and a discharge to the cutoff on the simulator, in virtual time.
constexpr const char* kProcedure =
    "name \"record check\"\n"
    "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
    "charge 0.5C to 4.2V until current<=0.05C or time>=2h every=60s\n"
    "rest 10min every=60s\n"
    "discharge 1C until voltage<=2.75V every=20s\n";

class Traced : public ::testing::Test {
 protected:
  void SetUp() override {
    db_ = dir_.File("lab.db");
    WriteFile(dir_.File("p.kpp"), kProcedure);
    CliResult r = Cli({"run", dir_.File("p.kpp"), "--rig", "sim", "--db", db_, "--sim-soc", "60%", "--serial", "SN-9",
                       "--lot", "LOT-42", "--part", "KP-18650-25", "--tag", "incoming,q2", "--tag", "shelf-3", "--operator",
                       "Ann Lee", "--bench", "bench 4", "--note", "start note"});
    ASSERT_EQ(r.code, 0) << r.err;
  }
  Store& Open() {
    auto s = Store::Open(db_, wall_);
    EXPECT_TRUE(s.ok());
    store_ = std::move(*s);
    return *store_;
  }
  testing::TempDir dir_;
  std::string db_;
  SteadyClock wall_;
  std::unique_ptr<Store> store_;
};

TEST_F(Traced, RunStoresTheRecordTheEquipmentAndTheVerdict) {
  Store& s = Open();
  auto run = s.GetRun(1);
  ASSERT_TRUE(run.ok());
  EXPECT_TRUE(LooksLikeUuid(run->uuid));
  EXPECT_EQ(run->cell_serial, "SN-9");
  EXPECT_EQ(run->cell_lot, "LOT-42");
  EXPECT_EQ(run->cell_part, "KP-18650-25");
  EXPECT_EQ(run->operator_name, "Ann Lee");
  EXPECT_EQ(run->bench, "bench 4");
  EXPECT_EQ(run->tags, (std::vector<std::string>{"incoming", "q2", "shelf-3"}));
  auto rep = BuildRunReport(s, 1);
  ASSERT_TRUE(rep.ok());
  EXPECT_EQ(run->verdict, VerdictWord(*rep));  // recorded when the run ended
  auto eq = s.LoadEquipment(1);
  ASSERT_TRUE(eq.ok());
  ASSERT_EQ(eq->instruments.size(), 4u);
  EXPECT_EQ(eq->instruments[0].model, "KP-SIM-LOAD");
  EXPECT_EQ(eq->instruments[0].serial, "SN0001");
  EXPECT_EQ(eq->instruments[0].firmware, "1.0");
  EXPECT_EQ(eq->instruments[1].model, "KP-SIM-METER");
  EXPECT_EQ(eq->software_version, SoftwareVersion());
  EXPECT_EQ(eq->software_commit, BuildCommit());
}

TEST_F(Traced, NotesByNumberOrUuidAndTheReportShowsTheRecord) {
  std::string uuid;
  {
    Store& s = Open();
    uuid = s.GetRun(1)->uuid;
    store_.reset();
  }
  EXPECT_EQ(Cli({"note", "1", "probe re-taped", "--db", db_}).code, 0);
  EXPECT_EQ(Cli({"note", uuid.substr(0, 8), "lid closed", "--db", db_}).code, 0);
  EXPECT_EQ(Cli({"note", "7", "no such run", "--db", db_}).code, cli::kExitBadInput);
  EXPECT_EQ(Cli({"note", "1", "  ", "--db", db_}).code, cli::kExitBadInput);

  CliResult j = Cli({"report", "1", "--db", db_, "--json"});
  ASSERT_EQ(j.code, 0) << j.err;
  auto doc = nlohmann::json::parse(j.out);
  EXPECT_EQ(doc["schema_version"], kReportSchemaVersion);
  EXPECT_EQ(doc["run"], 1);  // the number, as before
  EXPECT_EQ(doc["run_record"]["uuid"], uuid);
  EXPECT_EQ(doc["run_record"]["cell_serial"], "SN-9");
  EXPECT_EQ(doc["run_record"]["schema_version"], kRunRecordSchemaVersion);
  ASSERT_EQ(doc["equipment"]["instruments"].size(), 4u);
  EXPECT_EQ(doc["equipment"]["instruments"][2]["model"], "KP-SIM-TEMP");
  EXPECT_EQ(doc["equipment"]["software_version"], SoftwareVersion());
  ASSERT_EQ(doc["notes"].size(), 3u);
  EXPECT_EQ(doc["notes"][0]["text"], "start note");
  EXPECT_EQ(doc["notes"][2]["text"], "lid closed");
  // The same run object in `runs --json` and `export --json`.
  CliResult runs = Cli({"runs", "--db", db_, "--json"});
  ASSERT_EQ(runs.code, 0);
  EXPECT_EQ(nlohmann::json::parse(runs.out)[0], doc["run_record"]);
  ASSERT_EQ(Cli({"export", uuid, "--db", db_, "--json", dir_.File("e.json")}).code, 0);
  auto exported = nlohmann::json::parse(Slurp(dir_.File("e.json")));
  EXPECT_EQ(exported["run"], doc["run_record"]);
  EXPECT_EQ(exported["equipment"], doc["equipment"]);
  EXPECT_EQ(exported["schema_version"], 2);

  CliResult text = Cli({"report", "1", "--db", db_, "--html", dir_.File("r.html")});
  ASSERT_EQ(text.code, 0);
  for (const char* want : {"SN-9", "LOT-42", "Ann Lee", "bench 4", "KP-SIM-LOAD", "probe re-taped", "incoming, q2, shelf-3"})
    EXPECT_NE(text.out.find(want), std::string::npos) << want << "\n" << text.out;
  EXPECT_NE(text.out.find(uuid), std::string::npos);
  std::string html = Slurp(dir_.File("r.html"));
  EXPECT_NE(html.find("<h2>Equipment and conditions</h2>"), std::string::npos);
  for (const char* want : {"KP-SIM-METER", "SN0003", "LOT-42", "KP-18650-25", "Procedure as run", "discharge 1C until"})
    EXPECT_NE(html.find(want), std::string::npos) << want;
}

TEST_F(Traced, RunsFiltersFromTheCommandLine) {
  // A second run of another cell, marked aborted afterwards.
  WriteFile(dir_.File("short.kpp"), "cell li-ion rated=2500mAh cutoff=2.75V\ndischarge 0.2C until time>=2min every=60s\n");
  CliResult r = Cli({"run", dir_.File("short.kpp"), "--rig", "sim", "--db", db_, "--cell", "other", "--serial", "SN-10",
                     "--operator", "Bob", "--tag", "rework"});
  ASSERT_EQ(r.code, 0) << r.err;
  {
    Store& s = Open();
    ASSERT_OK(s.db().Exec("UPDATE runs SET outcome='aborted' WHERE id=2"));
    store_.reset();
  }
  auto ids = [&](std::vector<std::string> args) {
    args.insert(args.begin(), {"runs", "--db", db_, "--json"});
    CliResult c = Cli(args);
    EXPECT_EQ(c.code, 0) << c.err;
    std::vector<int64_t> out;
    for (const auto& x : nlohmann::json::parse(c.out)) out.push_back(x["id"].get<int64_t>());
    return out;
  };
  using V = std::vector<int64_t>;
  EXPECT_EQ(ids({}), (V{1, 2}));
  EXPECT_EQ(ids({"--serial", "SN-10"}), (V{2}));
  EXPECT_EQ(ids({"--lot", "lot-42"}), (V{1}));
  EXPECT_EQ(ids({"--tag", "rework"}), (V{2}));
  EXPECT_EQ(ids({"--operator", "ann*"}), (V{1}));
  EXPECT_EQ(ids({"--outcome", "aborted"}), (V{2}));
  EXPECT_EQ(ids({"--outcome", "completed", "--procedure", "record check"}), (V{1}));
  EXPECT_EQ(ids({"--cell", "other"}), (V{2}));
  EXPECT_EQ(ids({"--search", "START NOTE"}), (V{1}));
  EXPECT_EQ(ids({"--since", "2000-01-01", "--until", "2999-12-31"}), (V{1, 2}));
  EXPECT_EQ(ids({"--until", "2000-01-01"}), (V{}));
  {
    Store& s = Open();
    auto rep = BuildRunReport(s, 1);
    ASSERT_TRUE(rep.ok());
    const std::string v1 = VerdictWord(*rep);
    store_.reset();
    EXPECT_EQ(ids({"--verdict", v1}), (V{1}));
  }
  EXPECT_EQ(Cli({"runs", "--db", db_, "--outcome", "done"}).code, cli::kExitBadInput);
  EXPECT_EQ(Cli({"runs", "--db", db_, "--verdict", "ok"}).code, cli::kExitBadInput);
  EXPECT_EQ(Cli({"runs", "--db", db_, "--since", "14/03/2026"}).code, cli::kExitBadInput);
  CliResult table = Cli({"runs", "--db", db_, "--serial", "SN-9"});
  EXPECT_NE(table.out.find("SN-9"), std::string::npos);
  EXPECT_EQ(table.out.find("SN-10"), std::string::npos);
}

// The views, read with the sqlite3 command-line tool as a user would.
TEST_F(Traced, ViewsAnswerTheSqlite3Tool) {
  const std::string q = "sqlite3 -json '" + db_ + "' ";
  int st = 0;
  std::string out = Shell(q + "'SELECT * FROM run_summary'", &st);
  ASSERT_EQ(st, 0) << out;
  auto rs = nlohmann::json::parse(out);
  ASSERT_EQ(rs.size(), 1u);
  Store& s = Open();
  auto run = s.GetRun(1);
  ASSERT_TRUE(run.ok());
  EXPECT_EQ(rs[0]["run"], 1);
  EXPECT_EQ(rs[0]["uuid"], run->uuid);
  EXPECT_EQ(rs[0]["cell_serial"], "SN-9");
  EXPECT_EQ(rs[0]["tags"], "incoming,q2,shelf-3");
  EXPECT_EQ(rs[0]["operator"], "Ann Lee");
  EXPECT_EQ(rs[0]["outcome"], "completed");
  EXPECT_EQ(rs[0]["verdict"], run->verdict);
  ASSERT_TRUE(run->delivered_mah.has_value());
  EXPECT_DOUBLE_EQ(rs[0]["delivered_mah"].get<double>(), *run->delivered_mah);
  EXPECT_DOUBLE_EQ(rs[0]["delivered_pct_of_rated"].get<double>(), 100.0 * *run->delivered_mah / 2500.0);
  EXPECT_EQ(rs[0]["samples"], run->sample_count);

  auto steps = s.LoadSteps(1);
  ASSERT_TRUE(steps.ok());
  ASSERT_EQ(steps->size(), 3u);
  auto ss = nlohmann::json::parse(Shell(q + "'SELECT * FROM step_summary WHERE run=1 ORDER BY seq'"));
  ASSERT_EQ(ss.size(), 3u);
  double in_mah = 0, out_mah = 0;
  for (size_t k = 0; k < 3; ++k) {
    const StepRow& r = (*steps)[k];
    EXPECT_EQ(ss[k]["step_number"], r.index + 1);
    EXPECT_EQ(ss[k]["kind"], r.kind);
    ASSERT_TRUE(r.charge_mah && r.ended_s);
    EXPECT_DOUBLE_EQ(ss[k]["charge_mah"].get<double>(), *r.charge_mah);
    EXPECT_DOUBLE_EQ(ss[k]["duration_s"].get<double>(), *r.ended_s - r.started_s);
    // mAh over seconds: the mean current in A (1 mAh = 3.6 A s).
    EXPECT_NEAR(ss[k]["mean_current_a"].get<double>(), *r.charge_mah * 3.6 / (*r.ended_s - r.started_s), 1e-12);
    if (r.kind == "charge") in_mah += -*r.charge_mah;
    else if (*r.charge_mah > 0) out_mah += *r.charge_mah;
  }
  EXPECT_EQ(ss[0]["level_unit"], "A");
  EXPECT_EQ(ss[2]["level"], 2.5);  // 1C of 2500 mAh
  auto cs = nlohmann::json::parse(Shell(q + "'SELECT * FROM cycle_summary WHERE run=1'"));
  ASSERT_EQ(cs.size(), 1u);
  EXPECT_EQ(cs[0]["cycle"], 1);
  EXPECT_GT(in_mah, 100.0);  // the cell started at 60 %
  EXPECT_NEAR(cs[0]["charge_in_mah"].get<double>(), in_mah, 1e-9);
  EXPECT_NEAR(cs[0]["discharged_mah"].get<double>(), out_mah, 1e-9);
  EXPECT_NEAR(cs[0]["coulombic_efficiency"].get<double>(), out_mah / in_mah, 1e-12);
  // The report's cycle table agrees (it integrates the samples, the view sums
  // what the engine integrated over every reading: within 1 %).
  auto rep = BuildRunReport(s, 1);
  ASSERT_TRUE(rep.ok());
  ASSERT_EQ(rep->analysis.cycles.size(), 1u);
  EXPECT_NEAR(rep->analysis.cycles[0].charge_in_mah, in_mah, 0.01 * in_mah);
  EXPECT_NEAR(rep->analysis.cycles[0].discharge_mah, out_mah, 0.01 * out_mah);
  // heartbeat_utc is ISO 8601 UTC.
  std::string hb = Shell(q + "'SELECT heartbeat_utc FROM runs WHERE id=1'");
  EXPECT_EQ(hb.find("\"heartbeat_utc\":\"20"), 2u) << hb;
  EXPECT_NE(hb.find("Z\""), std::string::npos) << hb;
}

// Python's csv module reads the file back (strict RFC 4180 parsing).
constexpr const char* kCsvReader = R"py(
import csv, json, sys
with open(sys.argv[1], newline='') as f:
    rows = list(csv.reader(f, delimiter=sys.argv[2], strict=True))
print(json.dumps(rows))
)py";

nlohmann::json ReadCsv(const testing::TempDir& dir, const std::string& path, char sep) {
  WriteFile(dir.File("read_csv.py"), kCsvReader);
  int st = 0;
  std::string out = Shell("python3 '" + dir.File("read_csv.py") + "' '" + path + "' '" + std::string(1, sep) + "'", &st);
  EXPECT_EQ(st, 0) << out;
  return nlohmann::json::parse(out);
}

double Num(const nlohmann::json& cell, char decimal) {
  std::string s = cell.get<std::string>();
  if (decimal != '.') EXPECT_EQ(s.find('.'), std::string::npos) << "a decimal point in " << s;
  if (decimal != '.')
    for (char& c : s)
      if (c == decimal) c = '.';
  size_t used = 0;
  double v = std::stod(s, &used);
  EXPECT_EQ(used, s.size()) << s;
  return v;
}

void CheckCsvRoundTrip(Store& s, const nlohmann::json& rows, char decimal) {
  auto samples = s.LoadSamples(1);
  ASSERT_TRUE(samples.ok());
  ASSERT_EQ(rows.size(), samples->size() + 1);
  std::vector<std::string> header;
  for (const auto& h : rows[0]) header.push_back(h.get<std::string>());
  EXPECT_EQ(header, SampleExportColumns());
  auto steps = s.LoadSteps(1);
  auto run = s.GetRun(1);
  ASSERT_TRUE(steps.ok() && run.ok());
  double ah = 0, wh = 0;
  std::set<std::string> kinds;
  for (size_t k = 0; k < samples->size(); ++k) {
    const auto& r = rows[k + 1];
    const Sample& x = (*samples)[k];
    ASSERT_EQ(r.size(), header.size());
    EXPECT_EQ(Num(r[0], decimal), x.t_s);  // shortest round-trip form: exact
    EXPECT_EQ(Num(r[1], decimal), x.voltage_v);
    EXPECT_EQ(Num(r[2], decimal), x.current_a);
    EXPECT_EQ(Num(r[3], decimal), x.temperature_c);
    EXPECT_EQ(std::stoi(r[4].get<std::string>()), x.step);
    EXPECT_EQ(std::stoi(r[5].get<std::string>()), x.step + 1);
    EXPECT_EQ(r[7].get<std::string>(), WallTimeAt(run->started_at, x.t_s));
    kinds.insert(r[8].get<std::string>());
    if (k > 0) {
      // Trapezoid, computed here on its own: Ah = sum (I0 + I1) / 2 * dt / 3600.
      const Sample& p = (*samples)[k - 1];
      const double dt = x.t_s - p.t_s;
      ah += (p.current_a + x.current_a) / 2 * dt / 3600.0;
      wh += (p.current_a * p.voltage_v + x.current_a * x.voltage_v) / 2 * dt / 3600.0;
    }
    EXPECT_NEAR(Num(r[9], decimal), ah, 1e-9 + 1e-9 * std::abs(ah)) << k;
    EXPECT_NEAR(Num(r[10], decimal), wh, 1e-9 + 1e-9 * std::abs(wh)) << k;
  }
  EXPECT_EQ(kinds, (std::set<std::string>{"charge", "rest", "constant-current discharge"}));
  // The first row's wall time is the run's start.
  EXPECT_EQ(rows[1][7].get<std::string>(), run->started_at.substr(0, 19) + ".000Z");
}

TEST_F(Traced, CsvReadsBackThroughPythonsCsvModuleInBothStyles) {
  ASSERT_EQ(Cli({"export", "1", "--db", db_, "--csv", dir_.File("s.csv")}).code, 0);
  Store& s = Open();
  CheckCsvRoundTrip(s, ReadCsv(dir_, dir_.File("s.csv"), ','), '.');
  std::string raw = Slurp(dir_.File("s.csv"));
  EXPECT_NE(raw.find("\r\n"), std::string::npos);  // RFC 4180 line ends
  ASSERT_EQ(Cli({"export", "1", "--db", db_, "--csv", dir_.File("eu.csv"), "--decimal-comma"}).code, 0);
  auto eu = ReadCsv(dir_, dir_.File("eu.csv"), ';');
  CheckCsvRoundTrip(s, eu, ',');
  EXPECT_EQ(Cli({"export", "1", "--db", db_, "--json", dir_.File("x.json"), "--decimal-comma"}).code, cli::kExitBadInput);
}

TEST(CsvField, QuotesPerRfc4180AndPythonReadsItBack) {
  testing::TempDir dir;
  const std::vector<std::string> fields = {"plain", "a,b", "say \"hi\"", "two\nlines", " lead", "semi;colon", "", "crlf\r\nend"};
  for (char sep : {',', ';'}) {
    std::string line;
    for (const std::string& f : fields) line += (line.empty() ? "" : std::string(1, sep)) + CsvField(f, sep);
    WriteFile(dir.File("q.csv"), line + "\r\n");
    auto rows = ReadCsv(dir, dir.File("q.csv"), sep);
    ASSERT_EQ(rows.size(), 1u) << line;
    ASSERT_EQ(rows[0].size(), fields.size()) << line;
    for (size_t k = 0; k < fields.size(); ++k) EXPECT_EQ(rows[0][k].get<std::string>(), fields[k]) << sep << k;
  }
  EXPECT_EQ(CsvField("plain"), "plain");
  EXPECT_EQ(CsvField("a,b"), "\"a,b\"");
  EXPECT_EQ(CsvField("a,b", ';'), "a,b");
  EXPECT_EQ(CsvField("say \"hi\""), "\"say \"\"hi\"\"\"");
  EXPECT_EQ(CsvNumber(2.5, kCsvDecimalComma), "2,5");
  EXPECT_EQ(CsvNumber(1.5e-06, CsvStyle{}), "1.5e-06");
}

// The .xlsx opened as the zip it is, its XML read by Python.
constexpr const char* kXlsxReader = R"py(
import json, re, sys, zipfile
z = zipfile.ZipFile(sys.argv[1])
assert z.testzip() is None
names = z.namelist()
wb = z.read('xl/workbook.xml').decode()
sheets = re.findall(r'<sheet [^>]*name="([^"]+)"', wb)
s1 = z.read('xl/worksheets/sheet1.xml').decode()
s2 = z.read('xl/worksheets/sheet2.xml').decode()
shared = z.read('xl/sharedStrings.xml').decode() if 'xl/sharedStrings.xml' in names else ''
row2 = re.search(r'<row r="2"[^>]*>(.*?)</row>', s2, re.S).group(1)
kinds = sorted(set(re.findall(r'<c r="I(?!1")[0-9]+"[^>]*><is><t>([^<]*)</t>', s2)))
print(json.dumps({'sheets': sheets, 'rows': len(re.findall(r'<row ', s2)),
                  'row2': re.findall(r'<v>([^<]*)</v>', row2), 'text': s1 + shared + s2[:4000], 'kinds': kinds}))
)py";

TEST_F(Traced, XlsxHasASummaryAndTheSamples) {
  ASSERT_EQ(Cli({"export", "1", "--db", db_, "--xlsx", dir_.File("r.xlsx")}).code, 0);
  WriteFile(dir_.File("read_xlsx.py"), kXlsxReader);
  int st = 0;
  std::string out = Shell("python3 '" + dir_.File("read_xlsx.py") + "' '" + dir_.File("r.xlsx") + "'", &st);
  ASSERT_EQ(st, 0) << out;
  auto j = nlohmann::json::parse(out);
  EXPECT_EQ(j["sheets"], (nlohmann::json{"summary", "samples"}));
  Store& s = Open();
  auto samples = s.LoadSamples(1);
  auto run = s.GetRun(1);
  ASSERT_TRUE(samples.ok() && run.ok());
  EXPECT_EQ(j["rows"].get<size_t>(), samples->size() + 1);
  // Row 2 = the first sample: t_s, V, A, degC, step, step_number, cycle,
  // time (spreadsheet serial date), charge_Ah, energy_Wh (step_kind is text).
  const auto& v = j["row2"];
  ASSERT_EQ(v.size(), 10u);
  EXPECT_DOUBLE_EQ(std::stod(v[0].get<std::string>()), (*samples)[0].t_s);
  EXPECT_DOUBLE_EQ(std::stod(v[1].get<std::string>()), (*samples)[0].voltage_v);
  EXPECT_DOUBLE_EQ(std::stod(v[2].get<std::string>()), (*samples)[0].current_a);
  // 2026-01-01T00:00:00Z is serial day 46023 (1900 date system; from memory).
  EXPECT_GT(std::stod(v[7].get<std::string>()), 46023.0);
  const std::string text = j["text"].get<std::string>();
  for (const std::string& want : {run->uuid, std::string("SN-9"), std::string("KP-SIM-LOAD"), std::string("charge_Ah"),
                                  std::string("start note")})
    EXPECT_NE(text.find(want), std::string::npos) << want;
  // The step kinds of column I (step_kind) across the sheet.
  EXPECT_EQ(j["kinds"], (nlohmann::json{"charge", "constant-current discharge", "rest"}));
}

TEST(Version, FlagPrintsTheVersionAndCommit) {
  CliResult r = Cli({"--version"});
  EXPECT_EQ(r.code, 0);
  EXPECT_NE(r.out.find(std::string("kneepoint ") + SoftwareVersion()), std::string::npos) << r.out;
  const std::string commit = BuildCommit();
  if (commit != "unknown") EXPECT_NE(r.out.find(commit.substr(0, 12)), std::string::npos) << r.out;
  EXPECT_EQ(std::string(SoftwareVersion()).find('.'), 1u);  // from project(VERSION): "0.1.0"
}

}  // namespace
}  // namespace kp
