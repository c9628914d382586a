#include "tests/support/fixtures.h"

#include <utility>

#include "procedures/procedure_parser.h"
#include "ui/cli/cli.h"

namespace kp::testing {

int RunKneepoint(std::vector<std::string> args) {
  args.insert(args.begin(), "kneepoint");
  std::vector<char*> argv;
  for (std::string& a : args) argv.push_back(a.data());
  return cli::RunCli(static_cast<int>(argv.size()), argv.data());
}

CliResult RunKneepointCaptured(std::vector<std::string> args) {
  ::testing::internal::CaptureStdout();
  ::testing::internal::CaptureStderr();
  CliResult r;
  r.code = RunKneepoint(std::move(args));
  r.out = ::testing::internal::GetCapturedStdout();
  r.err = ::testing::internal::GetCapturedStderr();
  return r;
}

Plan CompileForCell2500(const std::string& body) {
  auto p = ParseProcedure(std::string(kCell2500Line) + body, "t");
  EXPECT_TRUE(p.ok()) << FormatDiagnostics("t", p.errors);
  return p.plan;
}

CellSpec Cell2500() {
  CellSpec c;
  c.rated_mah = 2500;
  c.nominal_v = 3.6;
  c.max_v = 4.2;
  c.cutoff_v = 2.75;
  c.max_temp_c = 60;
  return c;
}

StoreFixture::StoreFixture(const std::string& file) {
  auto s = Store::Open(dir.File(file), wall);
  EXPECT_TRUE(s.ok()) << s.status().ToString();
  if (s.ok()) store = std::move(*s);
}

std::vector<Sample> StoreFixture::Samples(int64_t run_id) {
  auto s = store->LoadSamples(run_id);
  EXPECT_TRUE(s.ok()) << s.status().ToString();
  return s.ok() ? *s : std::vector<Sample>{};
}

}  // namespace kp::testing
