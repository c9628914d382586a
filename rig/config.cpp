#include "rig/config.h"

#include <cstdlib>
#include <fstream>
#include <sstream>

#include <fmt/format.h>
#include <toml++/toml.h>

namespace kp {
namespace fs = std::filesystem;

fs::path ConfigPath() {
  if (const char* c = std::getenv("KNEEPOINT_CONFIG"); c != nullptr && *c != '\0') return c;
  if (const char* x = std::getenv("XDG_CONFIG_HOME"); x != nullptr && *x == '/') return fs::path(x) / "kneepoint" / "config.toml";
  if (const char* h = std::getenv("HOME"); h != nullptr && *h != '\0') return fs::path(h) / ".config" / "kneepoint" / "config.toml";
  return {};
}

Result<UserConfig> ParseUserConfig(std::string_view text, const std::string& file) {
  toml::table t;
  try {
    t = toml::parse(text, file);
  } catch (const toml::parse_error& e) {
    const auto& b = e.source().begin;
    return InvalidInput(fmt::format("{}:{}:{}: {}", file, b.line, b.column, e.description()));
  }
  UserConfig c;
  c.file = file;
  for (const auto& entry : t) {
    // Named references, not structured bindings: lambdas below use them
    // (clang 14 cannot capture a structured binding).
    const toml::key& key = entry.first;
    const toml::node& node = entry.second;
    const auto& src = key.source().begin;
    std::string where = fmt::format("{}:{}:{}: {}", file, src.line, src.column, key.str());
    auto text_value = [&](std::optional<std::string>& out) -> Status {
      const auto* s = node.as_string();
      if (s == nullptr || s->get().empty()) return InvalidInput(where + ": expected a non-empty text in quotes");
      out = s->get();
      return Status::Ok();
    };
    if (key == "bench") {
      KP_RETURN_IF_ERROR(text_value(c.bench));
    } else if (key == "operator") {
      KP_RETURN_IF_ERROR(text_value(c.operator_name));
    } else if (key == "database") {
      KP_RETURN_IF_ERROR(text_value(c.database));
    } else if (key == "rig") {
      KP_RETURN_IF_ERROR(text_value(c.rig));
    } else if (key == "dialect_path") {
      const auto* a = node.as_array();
      if (a == nullptr) return InvalidInput(where + ": expected a list of folders, e.g. [\"/srv/lab/dialects\"]");
      for (const auto& e : *a) {
        const auto* s = e.as_string();
        if (s == nullptr || s->get().empty()) return InvalidInput(where + ": every entry must be a folder name in quotes");
        c.dialect_path.push_back(s->get());
      }
    } else {
      return InvalidInput(where + ": unknown key (known: bench, operator, database, rig, dialect_path)");
    }
  }
  return c;
}

Result<UserConfig> LoadUserConfig() {
  fs::path p = ConfigPath();
  std::error_code ec;
  if (p.empty() || !fs::exists(p, ec)) return UserConfig{};
  std::ifstream in(p, std::ios::binary);
  if (!in) return IoError(fmt::format("cannot read the configuration file '{}'", p.string()));
  std::ostringstream text;
  text << in.rdbuf();
  return ParseUserConfig(text.str(), p.string());
}

std::string ChooseDatabase(const std::string& option, const UserConfig& config) {
  if (!option.empty()) return option;
  if (config.database) return *config.database;
  return kDefaultDatabase;
}

}  // namespace kp
