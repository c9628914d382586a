#include "drivers/data_dir.h"

#include <cstdlib>
#include <system_error>

namespace kp {
namespace fs = std::filesystem;

fs::path ProgramDir() {
  std::error_code ec;
  fs::path exe = fs::read_symlink("/proc/self/exe", ec);
  if (ec) return {};
  return exe.parent_path();
}

std::optional<fs::path> DataDir() {
  std::error_code ec;
  if (const char* env = std::getenv("KNEEPOINT_DATA_DIR"); env != nullptr && *env != '\0') {
    // An explicit choice: used when it exists, never silently replaced.
    if (fs::is_directory(env, ec)) return fs::path(env);
    return std::nullopt;
  }
  fs::path dir = ProgramDir();
  if (dir.empty()) return std::nullopt;
  for (const fs::path& candidate : {dir / ".." / "share" / "kneepoint", dir / "share" / "kneepoint",
                                    dir / ".." / ".." / "share" / "kneepoint"}) {
    if (fs::is_directory(candidate, ec)) return fs::weakly_canonical(candidate, ec);
  }
  return std::nullopt;
}

std::optional<fs::path> DataSubdir(const fs::path& sub) {
  std::optional<fs::path> d = DataDir();
  if (!d) return std::nullopt;
  std::error_code ec;
  if (!fs::is_directory(*d / sub, ec)) return std::nullopt;
  return *d / sub;
}

}  // namespace kp
