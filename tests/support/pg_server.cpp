#include "tests/support/pg_server.h"

#include <pwd.h>
#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>

#include <fmt/format.h>

#include "rig/lab/pg.h"

namespace kp::testing {
namespace fs = std::filesystem;

namespace {

// The newest /usr/lib/postgresql/<version>/bin holding initdb and pg_ctl.
std::string FindBin() {
  // KNEEPOINT_TEST_PG_BIN names another folder holding initdb and pg_ctl.
  if (const char* env = std::getenv("KNEEPOINT_TEST_PG_BIN"); env != nullptr && *env != '\0') {
    const fs::path p(env);
    return fs::exists(p / "initdb") && fs::exists(p / "pg_ctl") ? p.string() : std::string();
  }
  std::string best;
  int best_v = -1;
  std::error_code ec;
  for (const auto& e : fs::directory_iterator("/usr/lib/postgresql", ec)) {
    const std::string v = e.path().filename().string();
    const int n = std::atoi(v.c_str());
    if (fs::exists(e.path() / "bin" / "initdb") && fs::exists(e.path() / "bin" / "pg_ctl") && n > best_v) {
      best_v = n;
      best = (e.path() / "bin").string();
    }
  }
  return best;
}

std::string Tail(const std::string& path) {
  std::ifstream in(path);
  std::stringstream ss;
  ss << in.rdbuf();
  std::string s = ss.str();
  return s.size() > 2000 ? s.substr(s.size() - 2000) : s;
}

constexpr int kPort = 5432;  // names the socket file only: the server has no TCP listener

}  // namespace

Result<std::unique_ptr<PgServer>> PgServer::Start() {
  std::unique_ptr<PgServer> s(new PgServer());
  s->bin_ = FindBin();
  if (s->bin_.empty())
    return NotFound(
        "PostgreSQL server binaries (initdb, pg_ctl) not found under /usr/lib/postgresql/<version>/bin (or $KNEEPOINT_TEST_PG_BIN): "
        "the lab tests need a real server; "
        "install Debian's `postgresql` package (`make deps` does)");
  char tmpl[] = "/tmp/kneepoint-pg-XXXXXX";
  if (mkdtemp(tmpl) == nullptr) return IoError("cannot make a temporary folder for PostgreSQL");
  s->dir_ = tmpl;
  if (geteuid() == 0) {
    struct passwd* pw = getpwnam("postgres");
    if (pw == nullptr)
      return NotFound("running as root and there is no `postgres` system user to run PostgreSQL as (install Debian's `postgresql`)");
    if (chown(s->dir_.c_str(), pw->pw_uid, pw->pw_gid) != 0) return IoError("cannot give the PostgreSQL folder to user postgres");
    s->as_postgres_ = true;
  }
  fs::permissions(s->dir_, fs::perms::owner_all, fs::perm_options::replace);
  KP_RETURN_IF_ERROR(s->RunTool(fmt::format("initdb -D {}/data -A trust -U postgres -E UTF8 --locale=C --no-sync", s->dir_), "initdb"));
  KP_RETURN_IF_ERROR(s->StartAgain());
  return s;
}

PgServer::~PgServer() {
  if (running_) (void)Stop();
  if (!dir_.empty()) {
    std::error_code ec;
    fs::remove_all(dir_, ec);
  }
}

Status PgServer::RunTool(const std::string& tool_and_args, const std::string& what) {
  const std::string log = dir_ + "/tool.log";
  const std::string cmd = fmt::format("{}{}/{} > {} 2>&1", as_postgres_ ? "runuser -u postgres -- " : "", bin_, tool_and_args, log);
  const int rc = std::system(cmd.c_str());
  if (rc != 0) return InternalError(fmt::format("PostgreSQL {} failed (exit {}): {}\n{}", what, rc, cmd, Tail(log)));
  return Status::Ok();
}

Status PgServer::StartAgain() {
  // Unix socket in the private folder only (listen_addresses empty: no TCP);
  // fsync off: a test server needs no durability against power loss.
  KP_RETURN_IF_ERROR(RunTool(fmt::format("pg_ctl -D {0}/data -l {0}/server.log -w -t 60 -s -o \"-k {0} -p {1} -c listen_addresses='' "
                                         "-c fsync=off -c synchronous_commit=off -c full_page_writes=off\" start",
                                         dir_, kPort),
                             "start")
                         .WithContext("server log: " + Tail(dir_ + "/server.log")));
  running_ = true;
  return Status::Ok();
}

Status PgServer::Stop() {
  KP_RETURN_IF_ERROR(RunTool(fmt::format("pg_ctl -D {}/data -w -t 60 -s -m fast stop", dir_), "stop"));
  running_ = false;
  return Status::Ok();
}

std::string PgServer::Url(const std::string& db) const {
  return fmt::format("postgresql:///{}?host={}&port={}&user=postgres", db, dir_, kPort);
}

Result<std::string> PgServer::NewDatabase() {
  KP_ASSIGN_OR_RETURN(auto conn, pg::PgConn::Connect(Url()));
  const std::string name = fmt::format("lab{}", ++databases_);
  KP_RETURN_IF_ERROR(conn->Exec("CREATE DATABASE " + name));
  return Url(name);
}

}  // namespace kp::testing
