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
#include <toml++/toml.h>

#include "drivers/spelling.h"

#include "drivers/data_dir.h"
#include "drivers/text_limits.h"


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
      {"chamber-setpoint", {"chamber", Arg::kNumber, [](InstrumentProfile& p) -> std::string& { return p.chamber.set_temperature; }}},
      {"chamber-read", {"chamber", Arg::kQuery, [](InstrumentProfile& p) -> std::string& { return p.chamber.read_temperature; }}},
      {"chamber-run", {"chamber", Arg::kNone, [](InstrumentProfile& p) -> std::string& { return p.chamber.run_on; }}},
      {"chamber-stop", {"chamber", Arg::kNone, [](InstrumentProfile& p) -> std::string& { return p.chamber.run_off; }}},
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
      {"chamber", {"chamber-setpoint", "chamber-read"}},
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

bool InstrumentProfile::SelectsChannels() const {
  if (!channel_select.empty()) return true;
  bool suffixed = false;
  InstrumentProfile copy = *this;
  ForEachCommand(copy, [&](std::string& c) { suffixed = suffixed || c.find("{ch}") != std::string::npos; });
  return suffixed;
}

namespace {

// The older `key = text` dialect files (".kpp" before dialects became TOML).
bool LooksLikeOlderDialect(std::string_view text) {
  std::istringstream in{std::string(text)};
  std::string raw;
  while (std::getline(in, raw)) {
    std::string_view line = Trim(raw);
    if (line.empty() || line.front() == '#') continue;
    return line.starts_with("roles") && line.find('[') == std::string_view::npos;
  }
  return false;
}

int LineOf(const toml::node* n) { return n != nullptr ? static_cast<int>(n->source().begin.line) : 1; }

// "INP ON" and "inp  on" are the same command.
std::string Normalised(std::string_view c) {
  std::string out;
  bool blank = false;
  for (char ch : Trim(c)) {
    if (ch == ' ' || ch == '\t') {
      blank = true;
      continue;
    }
    if (blank && !out.empty()) out += ' ';
    blank = false;
    out += static_cast<char>(std::toupper(static_cast<unsigned char>(ch)));
  }
  return out;
}

// init, teardown and the behaviour switches (see profile.h).
Status ParseBehaviour(const toml::table& doc, InstrumentProfile& p,
                      const std::function<std::string(const toml::node*, const std::string&)>& where) {
  for (const char* key : {"init", "teardown"}) {
    const toml::node* n = doc.get(key);
    if (n == nullptr) continue;
    const toml::array* list = n->as_array();
    if (list == nullptr)
      return InvalidInput(fmt::format("{}a list of commands in quotes, as in {} = [\"*CLS\", \"SYST:REM\"]", where(n, key), key));
    std::vector<std::string>& out = std::string_view(key) == "init" ? p.init : p.teardown;
    for (const toml::node& e : *list) {
      std::optional<std::string> c = e.value<std::string>();
      if (!c) return InvalidInput(fmt::format("{}every command is a quoted text", where(&e, key)));
      if (Trim(*c).empty()) return InvalidInput(fmt::format("{}empty command", where(&e, key)));
      if (c->find("{}") != std::string::npos)
        return InvalidInput(fmt::format("{}'{}' takes no number here; remove {{}}", where(&e, key), *c));
      std::string norm = Normalised(*c);
      for (const std::string* on : {&p.load.input_on, &p.supply.output_on})
        if (!on->empty() && norm == Normalised(*on))
          return InvalidInput(fmt::format("{}'{}' switches the {} on; {} may not (the run does that itself)", where(&e, key), *c,
                                          on == &p.load.input_on ? "load input" : "supply output", key));
      out.push_back(*c);
    }
  }
  for (const char* key : {"check-settings", "strip-reply-units"}) {
    const toml::node* n = doc.get(key);
    if (n == nullptr) continue;
    std::optional<bool> v = n->is_boolean() ? n->value<bool>() : std::nullopt;
    if (!v) return InvalidInput(fmt::format("{}must be true or false", where(n, key)));
    (std::string_view(key) == "check-settings" ? p.check_settings : p.strip_units) = *v;
  }
  if (const toml::node* n = doc.get("error-query")) {
    std::optional<std::string> v = n->value<std::string>();
    if (!v || v->find('?') == std::string::npos || v->find("{}") != std::string::npos)
      return InvalidInput(fmt::format("{}must be a query in quotes (with '?'), as in \"SYST:ERR?\"", where(n, "error-query")));
    p.error_query = *v;
  }
  if (const toml::node* n = doc.get("mode-settle-s")) {
    std::optional<double> v = n->value<double>();
    if (!v || !(*v >= 0.0 && *v <= 60.0))
      return InvalidInput(fmt::format("{}must be a number of seconds from 0 to 60", where(n, "mode-settle-s")));
    if (!p.HasRole("load")) return InvalidInput(fmt::format("{}is for loads, which this dialect's roles do not list", where(n, "mode-settle-s")));
    p.load.mode_settle_s = *v;
  }
  return Status::Ok();
}

}  // namespace

Result<InstrumentProfile> ParseProfile(std::string_view text, const std::string& file) {
  KP_RETURN_IF_ERROR(CheckTextLimits(text, file));
  InstrumentProfile p;
  p.file = file;
  // Start from empty commands: a dialect says everything it supports.
  ForEachCommand(p, [](std::string& c) { c.clear(); });
  toml::table doc;
  try {
    doc = toml::parse(text, file);
  } catch (const toml::parse_error& e) {
    if (LooksLikeOlderDialect(text))
      return InvalidInput(fmt::format(
          "{}:{}: this is an instrument dialect in the older 'key = text' format; dialects are TOML files now (.kpd): "
          "write roles = [\"load\"], quote every value and put the commands under [commands] (see drivers/profiles/*.kpd)",
          file, e.source().begin.line));
    return InvalidInput(fmt::format("{}:{}:{}: {}", file, e.source().begin.line, e.source().begin.column, e.description()));
  }
  auto where = [&](const toml::node* n, const std::string& key) {
    return fmt::format("{}:{}: key '{}': ", file, LineOf(n), key);
  };
  static const std::vector<std::string> kTop = {"format",         "roles",       "description",       "identity",     "channels",
                                                "channel-select", "commands",    "init",              "teardown",     "check-settings",
                                                "error-query",    "strip-reply-units", "mode-settle-s"};
  for (const auto& [k, v] : doc) {
    std::string key(k.str());
    if (std::find(kTop.begin(), kTop.end(), key) == kTop.end()) {
      std::vector<std::string> commands;
      for (const auto& [name, spec] : Keys()) commands.push_back(name);
      if (std::find(commands.begin(), commands.end(), key) != commands.end())
        return InvalidInput(fmt::format("{}a command belongs under [commands]", where(&v, key)));
      return InvalidInput(fmt::format("{}unknown key{} (known: format, roles, description, identity, channels, channel-select, "
                                      "init, teardown, check-settings, error-query, strip-reply-units, mode-settle-s, [commands])",
                                      where(&v, key), DidYouMean(key, kTop)));
    }
  }
  if (const toml::node* f = doc.get("format")) {
    std::optional<std::string> v = f->value<std::string>();
    if (!v || *v != "kneepoint-dialect 1")
      return InvalidInput(fmt::format("{}must be \"kneepoint-dialect 1\"", where(f, "format")));
  }
  const toml::node* roles = doc.get("roles");
  if (roles == nullptr) return InvalidInput(fmt::format("{}:1: no 'roles' key: the dialect says nothing", file));
  const toml::array* role_list = roles->as_array();
  if (role_list == nullptr)
    return InvalidInput(fmt::format("{}a list of roles, as in roles = [\"load\"]", where(roles, "roles")));
  for (const toml::node& r : *role_list) {
    std::optional<std::string> role = r.value<std::string>();
    if (!role) return InvalidInput(fmt::format("{}every role is a quoted word", where(&r, "roles")));
    if (!Required().count(*role))
      return InvalidInput(fmt::format("{}unknown role '{}'{} (load, meter, thermometer, supply, chamber)", where(&r, "roles"), *role,
                                      DidYouMean(*role, {"load", "meter", "thermometer", "supply", "chamber"})));
    p.roles.push_back(*role);
  }
  if (p.roles.empty()) return InvalidInput(fmt::format("{}lists no role", where(roles, "roles")));
  for (const char* key : {"description", "identity"}) {
    const toml::node* n = doc.get(key);
    if (n == nullptr) continue;
    std::optional<std::string> v = n->value<std::string>();
    if (!v) return InvalidInput(fmt::format("{}must be a quoted text", where(n, key)));
    if (std::string_view(key) == "description") {
      p.description = *v;
    } else {
      if (v->empty()) return InvalidInput(fmt::format("{}empty pattern (use \"*\" to accept any)", where(n, key)));
      p.identity = *v;
    }
  }
  if (const toml::node* n = doc.get("channels")) {
    std::optional<int64_t> v = n->value<int64_t>();
    if (!n->is_integer() || !v || *v < 1 || *v > 256)
      return InvalidInput(fmt::format("{}the number of channels, a whole number 1 .. 256", where(n, "channels")));
    p.channels = static_cast<int>(*v);
  }
  if (const toml::node* n = doc.get("channel-select")) {
    std::optional<std::string> v = n->value<std::string>();
    if (!v || v->empty()) return InvalidInput(fmt::format("{}must be the SCPI text in quotes", where(n, "channel-select")));
    if (v->find("{ch}") == std::string::npos)
      return InvalidInput(fmt::format("{}'{}' needs {{ch}} where the channel number goes", where(n, "channel-select"), *v));
    if (v->find('?') != std::string::npos || v->find("{}") != std::string::npos)
      return InvalidInput(fmt::format("{}'{}' must be a command without a reply or a number", where(n, "channel-select"), *v));
    p.channel_select = *v;
  }
  if (const toml::node* cn = doc.get("commands")) {
    const toml::table* commands = cn->as_table();
    if (commands == nullptr) return InvalidInput(fmt::format("{}must be the [commands] table", where(cn, "commands")));
    std::vector<std::string> known;
    for (const auto& [name, spec] : Keys()) known.push_back(name);
    for (const auto& [k, v] : *commands) {
      std::string key(k.str());
      auto it = Keys().find(key);
      if (it == Keys().end()) return InvalidInput(fmt::format("{}unknown key{}", where(&v, key), DidYouMean(key, known)));
      const KeySpec& spec = it->second;
      if (!p.HasRole(spec.role))
        return InvalidInput(
            fmt::format("{}belongs to role '{}', which this dialect's roles do not list", where(&v, key), spec.role));
      std::optional<std::string> value = v.value<std::string>();
      if (!value) return InvalidInput(fmt::format("{}must be the SCPI text in quotes", where(&v, key)));
      if (value->empty())
        return InvalidInput(fmt::format("{}empty value (write \"none\" if the instrument cannot do it)", where(&v, key)));
      if (*value == "none") continue;
      if (spec.arg == Arg::kNumber && value->find("{}") == std::string::npos)
        return InvalidInput(fmt::format("{}'{}' needs {{}} where the number goes", where(&v, key), *value));
      if (spec.arg != Arg::kNumber && value->find("{}") != std::string::npos)
        return InvalidInput(fmt::format("{}'{}' takes no number; remove {{}}", where(&v, key), *value));
      if (spec.arg == Arg::kQuery && value->find('?') == std::string::npos)
        return InvalidInput(fmt::format("{}'{}' is a reading and must be a query (with '?')", where(&v, key), *value));
      spec.field(p) = *value;
    }
  }
  KP_RETURN_IF_ERROR(ParseBehaviour(doc, p, where));
  for (const std::string& role : p.roles) {
    for (const std::string& key : Required().at(role)) {
      if (Keys().at(key).field(p).empty())
        return InvalidInput(fmt::format("{}:{}: role '{}' needs key '{}' under [commands]", file, LineOf(roles), role, key));
    }
  }
  return p;
}

bool IsDialectPath(std::string_view path) { return path.ends_with(kDialectExtension); }

Result<InstrumentProfile> LoadProfileFile(const std::string& path) {
  KP_ASSIGN_OR_RETURN(std::string text, ReadLimitedTextFile(path, "dialect"));
  return ParseProfile(text, path);
}

Result<std::string> FindProfile(const std::string& ref, const std::string& base_dir) {
  namespace fs = std::filesystem;
  std::error_code ec;
  if (ref.find('/') != std::string::npos || ref.ends_with(kDialectExtension) || ref.ends_with(".kpp")) {
    fs::path p(ref);
    if (p.is_relative()) p = fs::path(base_dir) / p;
    if (!fs::exists(p, ec)) return NotFound(fmt::format("dialect file '{}' does not exist", p.string()));
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
  // The dialects shipped with the program (drivers/data_dir.h).
  if (std::optional<fs::path> shipped = DataSubdir("profiles")) dirs.push_back(*shipped);
  std::string tried;
  for (const auto& d : dirs) {
    fs::path p = d / (ref + kDialectExtension);
    if (fs::exists(p, ec)) return p.string();
    tried += (tried.empty() ? "" : ", ") + d.string();
  }
  return NotFound(fmt::format("no profile named '{}' (looked for {}{} in {})", ref, ref, kDialectExtension, tried));
}

void ApplyChannel(InstrumentProfile& p, const std::string& channel) {
  auto fill = [&](std::string& c) {
    for (size_t pos; (pos = c.find("{ch}")) != std::string::npos;) c.replace(pos, 4, channel);
  };
  ForEachCommand(p, fill);
  for (std::string& c : p.init) fill(c);
  for (std::string& c : p.teardown) fill(c);
  fill(p.channel_select);
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
