#include "drivers/profile.h"

#include <algorithm>
#include <cctype>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <functional>
#include <map>
#include <set>
#include <sstream>

#include <fmt/format.h>

#include "drivers/text_limits.h"

#ifndef KP_PROFILE_DIR
#define KP_PROFILE_DIR "drivers/profiles"
#endif

namespace kp {
namespace {

std::string_view Trim(std::string_view s) {
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.front()))) s.remove_prefix(1);
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.back()))) s.remove_suffix(1);
  return s;
}

enum class Arg { kNone, kNumber, kQuery };

struct KeySpec {
  const char* role;
  Arg arg;
  std::function<std::string&(InstrumentProfile&)> field;
};

const std::map<std::string, KeySpec>& Keys() {
  static const std::map<std::string, KeySpec> keys = {
      {"cc-select", {"load", Arg::kNone, [](InstrumentProfile& p) -> std::string& { return p.load.mode_current; }}},
      {"cr-select", {"load", Arg::kNone, [](InstrumentProfile& p) -> std::string& { return p.load.mode_resistance; }}},
      {"cp-select", {"load", Arg::kNone, [](InstrumentProfile& p) -> std::string& { return p.load.mode_power; }}},
      {"cc-level", {"load", Arg::kNumber, [](InstrumentProfile& p) -> std::string& { return p.load.set_current; }}},
      {"cr-level", {"load", Arg::kNumber, [](InstrumentProfile& p) -> std::string& { return p.load.set_resistance; }}},
      {"cp-level", {"load", Arg::kNumber, [](InstrumentProfile& p) -> std::string& { return p.load.set_power; }}},
      {"input-on", {"load", Arg::kNone, [](InstrumentProfile& p) -> std::string& { return p.load.input_on; }}},
      {"input-off", {"load", Arg::kNone, [](InstrumentProfile& p) -> std::string& { return p.load.input_off; }}},
      {"load-read-voltage", {"load", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.load.measure_voltage; }}},
      {"load-read-current", {"load", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.load.measure_current; }}},
      {"load-read-power", {"load", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.load.measure_power; }}},
      {"sense-remote", {"load", Arg::kNone, [](InstrumentProfile& p) -> std::string& { return p.load.remote_sense_on; }}},
      {"sense-local", {"load", Arg::kNone, [](InstrumentProfile& p) -> std::string& { return p.load.remote_sense_off; }}},
      {"guard-undervoltage", {"load", Arg::kNumber, [](InstrumentProfile& p) -> std::string& { return p.load.under_voltage_backstop; }}},
      {"guard-overcurrent", {"load", Arg::kNumber, [](InstrumentProfile& p) -> std::string& { return p.load.over_current_backstop; }}},
      {"guard-overpower", {"load", Arg::kNumber, [](InstrumentProfile& p) -> std::string& { return p.load.over_power_backstop; }}},
      {"guard-watchdog", {"load", Arg::kNumber, [](InstrumentProfile& p) -> std::string& { return p.load.watchdog_backstop; }}},
      {"guard-undervoltage-read", {"load", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.load.under_voltage_read; }}},
      {"guard-overcurrent-read", {"load", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.load.over_current_read; }}},
      {"guard-overpower-read", {"load", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.load.over_power_read; }}},
      {"guard-watchdog-read", {"load", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.load.watchdog_read; }}},
      {"input-state", {"load", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.load.input_state; }}},
      {"output-state", {"supply", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.supply.output_state; }}},
      {"meter-read-voltage", {"meter", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.meter.measure_voltage; }}},
      {"read-temperature", {"thermometer", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.thermometer.measure_temperature; }}},
      {"supply-voltage", {"supply", Arg::kNumber, [](InstrumentProfile& p) -> std::string& { return p.supply.set_voltage; }}},
      {"supply-current", {"supply", Arg::kNumber, [](InstrumentProfile& p) -> std::string& { return p.supply.set_current; }}},
      {"output-on", {"supply", Arg::kNone, [](InstrumentProfile& p) -> std::string& { return p.supply.output_on; }}},
      {"output-off", {"supply", Arg::kNone, [](InstrumentProfile& p) -> std::string& { return p.supply.output_off; }}},
      {"supply-read-voltage", {"supply", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.supply.measure_voltage; }}},
      {"supply-read-current", {"supply", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.supply.measure_current; }}},
  };
  return keys;
}

// Keys a role cannot work without.
const std::map<std::string, std::vector<std::string>>& Required() {
  static const std::map<std::string, std::vector<std::string>> req = {
      {"load", {"cc-select", "cc-level", "input-on", "input-off", "load-read-voltage", "load-read-current"}},
      {"meter", {"meter-read-voltage"}},
      {"thermometer", {"read-temperature"}},
      {"supply", {"supply-voltage", "supply-current", "output-on", "output-off", "supply-read-voltage", "supply-read-current"}},
  };
  return req;
}

void ForEachCommand(InstrumentProfile& p, const std::function<void(std::string&)>& f) {
  for (auto& [key, spec] : Keys()) f(spec.field(p));
}

}  // namespace

bool InstrumentProfile::HasRole(std::string_view role) const {
  return std::find(roles.begin(), roles.end(), role) != roles.end();
}

Result<InstrumentProfile> ParseProfile(std::string_view text, const std::string& file) {
  KP_RETURN_IF_ERROR(CheckTextLimits(text, file));
  InstrumentProfile p;
  p.file = file;
  // Start from empty commands: a profile says everything it supports.
  ForEachCommand(p, [](std::string& c) { c.clear(); });
  std::map<std::string, int> seen;
  int roles_line = 0;
  std::istringstream in{std::string(text)};
  std::string raw;
  int line_no = 0;
  while (std::getline(in, raw)) {
    ++line_no;
    std::string_view line = Trim(raw);
    if (line.empty() || line.front() == '#') continue;
    auto where = [&](const std::string& key) { return fmt::format("{}:{}: {}", file, line_no, key.empty() ? "" : "key '" + key + "': "); };
    size_t eq = line.find('=');
    if (eq == std::string_view::npos)
      return InvalidInput(fmt::format("{}expected 'key = value', got '{}'", where(""), line));
    std::string key(Trim(line.substr(0, eq)));
    std::string value(Trim(line.substr(eq + 1)));
    if (key.empty()) return InvalidInput(fmt::format("{}missing key before '='", where("")));
    if (auto it = seen.find(key); it != seen.end())
      return InvalidInput(fmt::format("{}repeated (first set on line {})", where(key), it->second));
    seen[key] = line_no;
    if (key == "roles") {
      roles_line = line_no;
      std::string_view rest = value;
      while (!rest.empty()) {
        size_t comma = rest.find(',');
        std::string role(Trim(rest.substr(0, comma)));
        rest = comma == std::string_view::npos ? std::string_view() : rest.substr(comma + 1);
        if (!Required().count(role))
          return InvalidInput(fmt::format("{}unknown role '{}' (load, meter, thermometer, supply)", where(key), role));
        p.roles.push_back(role);
      }
      if (p.roles.empty()) return InvalidInput(fmt::format("{}lists no role", where(key)));
      continue;
    }
    if (roles_line == 0) return InvalidInput(fmt::format("{}the first key must be 'roles'", where(key)));
    if (key == "description") {
      p.description = value;
      continue;
    }
    if (key == "identity") {
      if (value.empty()) return InvalidInput(fmt::format("{}empty pattern (use * to accept any)", where(key)));
      p.identity = value;
      continue;
    }
    auto it = Keys().find(key);
    if (it == Keys().end()) return InvalidInput(fmt::format("{}unknown key", where(key)));
    const KeySpec& spec = it->second;
    if (!p.HasRole(spec.role))
      return InvalidInput(fmt::format("{}belongs to role '{}', which this profile's roles do not list", where(key), spec.role));
    if (value.empty()) return InvalidInput(fmt::format("{}empty value (write 'none' if the instrument cannot do it)", where(key)));
    if (value == "none") continue;
    if (spec.arg == Arg::kNumber && value.find("{}") == std::string::npos)
      return InvalidInput(fmt::format("{}'{}' needs {{}} where the number goes", where(key), value));
    if (spec.arg != Arg::kNumber && value.find("{}") != std::string::npos)
      return InvalidInput(fmt::format("{}'{}' takes no number; remove {{}}", where(key), value));
    if (spec.arg == Arg::kQuery && value.find('?') == std::string::npos)
      return InvalidInput(fmt::format("{}'{}' is a reading and must be a query (with '?')", where(key), value));
    spec.field(p) = value;
  }
  if (roles_line == 0) return InvalidInput(fmt::format("{}:1: no 'roles' key: the profile says nothing", file));
  for (const std::string& role : p.roles) {
    for (const std::string& key : Required().at(role)) {
      if (Keys().at(key).field(p).empty())
        return InvalidInput(fmt::format("{}:{}: role '{}' needs key '{}'", file, roles_line, role, key));
    }
  }
  return p;
}

Result<InstrumentProfile> LoadProfileFile(const std::string& path) {
  KP_ASSIGN_OR_RETURN(std::string text, ReadLimitedTextFile(path, "profile"));
  return ParseProfile(text, path);
}

Result<std::string> FindProfile(const std::string& ref, const std::string& base_dir) {
  namespace fs = std::filesystem;
  std::error_code ec;
  if (ref.find('/') != std::string::npos || ref.ends_with(".kpp")) {
    fs::path p(ref);
    if (p.is_relative()) p = fs::path(base_dir) / p;
    if (!fs::exists(p, ec)) return NotFound(fmt::format("profile file '{}' does not exist", p.string()));
    return p.string();
  }
  std::vector<fs::path> dirs{fs::path(base_dir) / "profiles"};
  if (const char* env = std::getenv("KNEEPOINT_PROFILES")) {
    std::string_view rest = env;
    while (!rest.empty()) {
      size_t colon = rest.find(':');
      if (colon != 0) dirs.emplace_back(std::string(rest.substr(0, colon)));
      rest = colon == std::string_view::npos ? std::string_view() : rest.substr(colon + 1);
    }
  }
  dirs.emplace_back(KP_PROFILE_DIR);
  std::string tried;
  for (const auto& d : dirs) {
    fs::path p = d / (ref + ".kpp");
    if (fs::exists(p, ec)) return p.string();
    tried += (tried.empty() ? "" : ", ") + d.string();
  }
  return NotFound(fmt::format("no profile named '{}' (looked for {}.kpp in {})", ref, ref, tried));
}

void ApplyChannel(InstrumentProfile& p, const std::string& channel) {
  ForEachCommand(p, [&](std::string& c) {
    for (size_t pos; (pos = c.find("{ch}")) != std::string::npos;) c.replace(pos, 4, channel);
  });
}

bool IdentityMatches(std::string_view pattern, std::string_view idn) {
  // Iterative glob with single-star backtracking.
  size_t p = 0, s = 0, star = std::string_view::npos, mark = 0;
  auto eq = [](char a, char b) { return std::tolower(static_cast<unsigned char>(a)) == std::tolower(static_cast<unsigned char>(b)); };
  while (s < idn.size()) {
    if (p < pattern.size() && (pattern[p] == '?' || eq(pattern[p], idn[s]))) {
      ++p;
      ++s;
    } else if (p < pattern.size() && pattern[p] == '*') {
      star = p++;
      mark = s;
    } else if (star != std::string_view::npos) {
      p = star + 1;
      s = ++mark;
    } else {
      return false;
    }
  }
  while (p < pattern.size() && pattern[p] == '*') ++p;
  return p == pattern.size();
}

}  // namespace kp
