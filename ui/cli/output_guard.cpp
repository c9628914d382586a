#include "ui/cli/output_guard.h"

#include <fmt/format.h>
#include <sys/stat.h>

#include <cstring>
#include <filesystem>
#include <fstream>

#include "rig/run_lock.h"

namespace kp::cli {
namespace {

namespace fs = std::filesystem;

// The path with its folder resolved (the file itself need not exist).
std::string Resolved(const std::string& p) {
  std::error_code ec;
  fs::path r = fs::weakly_canonical(fs::absolute(p, ec), ec);
  return ec ? p : r.string();
}

bool SameFile(const std::string& a, const std::string& b) {
  struct stat sa {}, sb {};
  if (stat(a.c_str(), &sa) != 0 || stat(b.c_str(), &sb) != 0) return false;
  return sa.st_dev == sb.st_dev && sa.st_ino == sb.st_ino;
}

bool IsSqliteFile(const std::string& p) {
  std::ifstream in(p, std::ios::binary);
  char head[16] = {};
  if (!in.read(head, sizeof head)) return false;
  return std::memcmp(head, "SQLite format 3", 16) == 0;
}

}  // namespace

Status CheckOutputPaths(const std::string& db_path, const std::vector<std::string>& outputs) {
  const std::string db = Resolved(db_path);
  const std::string lock_dir = Resolved(RunLock::DefaultDir());
  std::vector<std::string> seen;
  for (const std::string& out : outputs) {
    if (out.empty()) continue;
    const std::string o = Resolved(out);
    auto refuse = [&](const std::string& what) {
      return InvalidInput(fmt::format("refusing to write '{}': it is {}; choose another output file", out, what));
    };
    for (const char* suffix : {"", "-wal", "-shm", "-journal"}) {
      const std::string held = db + suffix;
      if (o == held || SameFile(out, held))
        return refuse(*suffix ? fmt::format("the {} file of the database '{}'", suffix + 1, db_path) : fmt::format("the database '{}'", db_path));
    }
    if (IsSqliteFile(out)) return refuse("an SQLite database");
    if (fs::path(o).parent_path() == fs::path(lock_dir)) return refuse("in the rig lock folder");
    for (const std::string& other : seen)
      if (o == other || SameFile(out, other)) return refuse("also given as another output of this command");
    seen.push_back(o);
  }
  return Status::Ok();
}

}  // namespace kp::cli
