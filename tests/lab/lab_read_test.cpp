// The read commands on the lab database: `runs`, `report`, `compare` and
// `export` with --db postgresql://... give what they give on the bench's own
// SQLite file (the same figures, the same exports), and never write there.
#include <gtest/gtest.h>

#include <fstream>
#include <sstream>

#include <nlohmann/json.hpp>

#include "ui/cli/cli.h"
#include "rig/lab/lab_mirror.h"
#include "rig/lab/lab_sync.h"
#include "rig/lab/pg.h"
#include "tests/lab/lab_test_support.h"
#include "tests/support/fixtures.h"

namespace kp {
namespace {

using lab::testing::Bench;
using lab::testing::SharedServer;

using CliOut = testing::CliResult;
CliOut Cli(std::vector<std::string> args) { return testing::RunKneepointCaptured(std::move(args)); }

std::string Slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

class LabRead : public ::testing::Test {
 protected:
  void SetUp() override {
    bench_.Run("bench R", 2);
    auto url = SharedServer().NewDatabase();
    ASSERT_TRUE(url.ok()) << url.status().ToString();
    url_ = *url;
    CliOut s = Cli({"sync", "--db", bench_.path(), "--to", url_});
    ASSERT_EQ(s.code, 0) << s.err;
    EXPECT_NE(s.out.find("2 runs on the bench; 2 with something new"), std::string::npos) << s.out;
  }
  Bench bench_;
  std::string url_;
};

TEST_F(LabRead, ReportGivesTheSameFiguresAsTheBenchFile) {
  for (const char* run : {"1", "2"}) {
    CliOut a = Cli({"report", run, "--json", "--db", bench_.path()});
    CliOut b = Cli({"report", run, "--json", "--db", url_});
    ASSERT_EQ(a.code, 0) << a.err;
    ASSERT_EQ(b.code, 0) << b.err;
    auto ja = nlohmann::json::parse(a.out), jb = nlohmann::json::parse(b.out);
    EXPECT_GT(ja.at("charge_mAh").get<double>(), 100.0);
    EXPECT_EQ(ja, jb) << "bench:\n" << a.out.substr(0, 2000) << "\nlab:\n" << b.out.substr(0, 2000);
    // The text report too, line for line.
    CliOut ta = Cli({"report", run, "--db", bench_.path()});
    CliOut tb = Cli({"report", run, "--db", url_});
    EXPECT_EQ(ta.out, tb.out);
  }
}

TEST_F(LabRead, RunsCompareAndExportAgree) {
  CliOut a = Cli({"runs", "--json", "--db", bench_.path()});
  CliOut b = Cli({"runs", "--json", "--db", url_});
  ASSERT_EQ(a.code, 0) << a.err;
  ASSERT_EQ(b.code, 0) << b.err;
  EXPECT_EQ(nlohmann::json::parse(a.out), nlohmann::json::parse(b.out));
  CliOut fa = Cli({"runs", "--json", "--serial", "SN-2", "--db", bench_.path()});
  CliOut fb = Cli({"runs", "--json", "--serial", "SN-2", "--db", url_});
  ASSERT_EQ(nlohmann::json::parse(fb.out).size(), 1u);
  EXPECT_EQ(nlohmann::json::parse(fa.out), nlohmann::json::parse(fb.out));

  CliOut ca = Cli({"compare", "1", "2", "--json", "--db", bench_.path()});
  CliOut cb = Cli({"compare", "1", "2", "--json", "--db", url_});
  ASSERT_EQ(ca.code, 0) << ca.err;
  ASSERT_EQ(cb.code, 0) << cb.err;
  EXPECT_EQ(nlohmann::json::parse(ca.out), nlohmann::json::parse(cb.out));

  // Export by UUID: the same CSV, byte for byte.
  const std::string uuid = nlohmann::json::parse(a.out).at(1).at("uuid").get<std::string>();
  const std::string csv_a = bench_.dir().File("a.csv"), csv_b = bench_.dir().File("b.csv");
  ASSERT_EQ(Cli({"export", uuid, "--csv", csv_a, "--db", bench_.path()}).code, 0);
  CliOut eb = Cli({"export", uuid, "--csv", csv_b, "--db", url_});
  ASSERT_EQ(eb.code, 0) << eb.err;
  const std::string ta = Slurp(csv_a);
  EXPECT_GT(ta.size(), 10000u);
  EXPECT_EQ(ta, Slurp(csv_b));
}

TEST_F(LabRead, TheLabSessionIsReadOnly) {
  SteadyClock wall;
  auto m = lab::LabMirror::Open(url_, wall);
  ASSERT_TRUE(m.ok()) << m.status().ToString();
  Status st = (*m)->conn().Exec("DELETE FROM kneepoint.samples");
  EXPECT_FALSE(st.ok());
  EXPECT_NE(st.message().find("read-only"), std::string::npos) << st.ToString();
  // Commands that write refuse the lab database and say where to write instead.
  CliOut note = Cli({"note", "1", "a note", "--db", url_});
  EXPECT_EQ(note.code, cli::kExitBadInput);
  EXPECT_NE(note.err.find("only reads"), std::string::npos) << note.err;
  // An unknown run is a clear error.
  CliOut r = Cli({"report", "9", "--db", url_});
  EXPECT_NE(r.code, 0);
  EXPECT_NE(r.err.find("9"), std::string::npos) << r.err;
}

}  // namespace
}  // namespace kp
