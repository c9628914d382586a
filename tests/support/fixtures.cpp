#include "tests/support/fixtures.h"

#include <fcntl.h>
#include <spawn.h>
#include <unistd.h>

#include <cstdio>
#include <filesystem>
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

pid_t SpawnKneepoint(const std::vector<std::string>& args, const std::vector<std::string>& env, SpawnIo io) {
  std::error_code ec;
  const std::string self = std::filesystem::read_symlink("/proc/self/exe", ec).string();
  if (ec) return -1;
  // Everything the child needs is built here: between fork and exec it
  // allocates nothing (posix_spawn).
  std::vector<std::string> argv_s = {"kneepoint"};
  argv_s.insert(argv_s.end(), args.begin(), args.end());
  std::vector<char*> argv;
  for (std::string& a : argv_s) argv.push_back(a.data());
  argv.push_back(nullptr);
  std::vector<std::string> env_s;
  auto name_of = [](const std::string& entry) { return entry.substr(0, entry.find('=')); };
  for (char** e = environ; *e != nullptr; ++e) {
    const std::string entry(*e);
    bool replaced = false;
    for (const std::string& x : env) replaced = replaced || name_of(x) == name_of(entry);
    if (!replaced) env_s.push_back(entry);
  }
  env_s.insert(env_s.end(), env.begin(), env.end());
  env_s.emplace_back("KP_TEST_EXEC_CLI=1");
  std::vector<char*> envp;
  for (std::string& e : env_s) envp.push_back(e.data());
  envp.push_back(nullptr);

  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  auto route = [&](int fd, int target) {
    if (fd == SpawnIo::kDevNull) posix_spawn_file_actions_addopen(&actions, target, "/dev/null", O_WRONLY, 0);
    else if (fd >= 0) posix_spawn_file_actions_adddup2(&actions, fd, target);
  };
  route(io.stdout_fd, 1);
  route(io.stderr_fd, 2);
  std::fflush(nullptr);  // this process's pending output is not the child's
  pid_t pid = -1;
  const int rc = posix_spawn(&pid, self.c_str(), &actions, nullptr, argv.data(), envp.data());
  posix_spawn_file_actions_destroy(&actions);
  return rc == 0 ? pid : -1;
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
