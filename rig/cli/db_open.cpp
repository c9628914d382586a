#include "rig/cli/db_open.h"

#include <filesystem>

#include <fmt/format.h>

namespace kp::cli {

Result<std::unique_ptr<Store>> OpenExistingDb(const std::string& path, Clock& wall) {
  std::error_code ec;
  if (!std::filesystem::exists(path, ec)) return NotFound(fmt::format("no database at '{}' (give one with --db)", path));
  Store::Options o;
  o.create = false;
  auto store = Store::Open(path, wall, o);
  if (!store.ok()) return store.status();
  (void)(*store)->ReconcileOrphans();
  return store;
}

}  // namespace kp::cli
