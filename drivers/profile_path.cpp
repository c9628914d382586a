#include "drivers/profile_path.h"

#include <fmt/format.h>

#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <string_view>

#include "drivers/data_dir.h"
#include "drivers/profile.h"


namespace kp {

namespace fs = std::filesystem;

std::vector<std::string> ProfileSearchRoots(const std::string& base_dir) {
  std::vector<std::string> roots{base_dir.empty() ? std::string(".") : base_dir};
  if (const char* env = std::getenv("KNEEPOINT_PROFILES")) {
    std::string_view rest = env;
    while (!rest.empty()) {
      size_t colon = rest.find(':');
      if (colon != 0) roots.emplace_back(rest.substr(0, colon));
      rest = colon == std::string_view::npos ? std::string_view() : rest.substr(colon + 1);
    }
  }
  if (std::optional<fs::path> shipped = DataSubdir("profiles")) roots.push_back(shipped->string());
  return roots;
}

Status ConfineProfilePath(const std::string& path, const std::string& base_dir) {
  std::error_code ec;
  fs::path real = fs::canonical(path, ec);
  if (ec) return InvalidInput(fmt::format("profile file '{}' cannot be opened", path));
  // .kpd, or .kpp so that a dialect in the older format gets its own message.
  if ((real.extension() != kDialectExtension && real.extension() != ".kpp") || !fs::is_regular_file(real, ec))
    return InvalidInput(fmt::format("'{}' is not an instrument dialect file ({})", path, kDialectExtension));
  for (const std::string& root : ProfileSearchRoots(base_dir)) {
    fs::path r = fs::canonical(root, ec);
    if (ec) continue;
    auto [ri, pi] = std::mismatch(r.begin(), r.end(), real.begin(), real.end());
    if (ri == r.end()) return Status::Ok();
  }
  return InvalidInput(fmt::format("profile file '{}' is outside the profile search path (the rig file's folder, $KNEEPOINT_PROFILES, "
                                  "the shipped profiles)",
                                  path));
}

}  // namespace kp
