#include "rig/store_open.h"

#include <cstdio>
#include <filesystem>

#include <fmt/format.h>

#include "rig/lab/lab_mirror.h"
#include "rig/lab/pg.h"

namespace kp {
namespace {

Result<std::unique_ptr<Store>> Open(const std::string& path, Clock& wall, bool reading) {
  if (pg::IsPostgresUrl(path))
    return InvalidInput(fmt::format("{} is a lab database, which kneepoint only reads: notes, control requests and resumes go to "
                                    "the bench's own database file",
                                    pg::RedactUrl(path)));
  std::error_code ec;
  if (!std::filesystem::exists(path, ec)) return NotFound(fmt::format("no database at '{}' (give one with --db)", path));
  Store::Options o;
  o.create = false;
  o.read_only_if_newer = reading;
  auto store = Store::Open(path, wall, o);
  if (!store.ok()) return store.status();
  if (int v = (*store)->newer_schema(); v != 0) {
    std::fprintf(stderr,
                 "kneepoint: %s has schema version %d, newer than this kneepoint's (%d): opened read-only; what the newer "
                 "version added is not shown\n",
                 path.c_str(), v, kSchemaVersion);
    return store;
  }
  (void)(*store)->ReconcileOrphans();
  return store;
}

}  // namespace

Result<std::unique_ptr<Store>> OpenExistingDb(const std::string& path, Clock& wall) { return Open(path, wall, false); }

Result<std::unique_ptr<Store>> OpenDbForReading(const std::string& path, Clock& wall) { return OpenDbForReading(path, wall, {}); }

Result<std::unique_ptr<Store>> OpenDbForReading(const std::string& path, Clock& wall, const std::vector<std::string>& runs) {
  if (pg::IsPostgresUrl(path)) return lab::OpenLabStore(path, wall, runs);
  return Open(path, wall, true);
}

}  // namespace kp
