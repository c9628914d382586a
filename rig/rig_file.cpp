#include "rig/rig_file.h"

#include "drivers/profile_path.h"

#include <algorithm>
#include <cctype>
#include <filesystem>
#include <fstream>
#include <limits>
#include <cmath>
#include <map>
#include <set>
#include <sstream>

#include <fmt/format.h>
#include <toml++/toml.h>

#include "drivers/address.h"
#include "drivers/text_limits.h"
#include "procedures/units.h"
#include "rig/rig_channels.h"

namespace kp {
namespace {

namespace fs = std::filesystem;

class Reader {
 public:
  explicit Reader(std::string path) : path_(std::move(path)) {}

  Status Error(const toml::node* node, const std::string& key, const std::string& what) const {
    int line = node != nullptr ? static_cast<int>(node->source().begin.line) : 0;
    return InvalidInput(fmt::format("{}:{}: key '{}': {}", path_, line, key, what));
  }
  Status ErrorAt(int line, const std::string& key, const std::string& what) const {
    return InvalidInput(fmt::format("{}:{}: key '{}': {}", path_, line, key, what));
  }

  // Rejects keys not in `known`.
  Status OnlyKnown(const toml::table& t, const std::string& prefix, const std::set<std::string>& known) const {
    for (const auto& [k, v] : t) {
      if (!known.count(std::string(k.str()))) {
        std::string list;
        for (const auto& n : known) list += (list.empty() ? "" : ", ") + n;
        return Error(&v, prefix + std::string(k.str()), "unknown key (known: " + list + ")");
      }
    }
    return Status::Ok();
  }

  Status Number(const toml::table& t, const std::string& prefix, const char* key, double& out, double lo, double hi) const {
    const toml::node* n = t.get(key);
    if (n == nullptr) return Status::Ok();
    std::optional<double> v = n->value<double>();
    // A key named for its unit (`_a`, `_v`, `_w`, `_s`, `_c`) also takes a
    // quoted value in any unit of that quantity ("500ms", "10 A"), read by the
    // one unit parser of procedures and options.
    std::optional<Dimension> dim;
    std::string_view k(key);
    if (k.ends_with("_a")) dim = Dimension::kCurrent;
    else if (k.ends_with("_v")) dim = Dimension::kVoltage;
    else if (k.ends_with("_w")) dim = Dimension::kPower;
    else if (k.ends_with("_s")) dim = Dimension::kTime;
    else if (k.ends_with("_c")) dim = Dimension::kTemperature;
    if (n->is_string() && dim) {
      std::string text = *n->value<std::string>();
      bool negative = text.find_first_not_of(" \t") != std::string::npos && text[text.find_first_not_of(" \t")] == '-';
      ParsedQuantity q = ParseQuantityText(negative ? text.substr(text.find('-') + 1) : text, *dim, prefix + key);
      if (!q.value) return Error(n, prefix + key, q.error);
      v = negative ? -*q.value : *q.value;
    } else if (!v || (!n->is_floating_point() && !n->is_integer())) {
      return Error(n, prefix + key,
                   dim ? fmt::format("must be a number in the key's unit or a quoted value with its unit ({})", UnitsOf(*dim))
                       : std::string("must be a number"));
    }
    if (!(*v >= lo && *v <= hi)) return Error(n, prefix + key, fmt::format("{} is outside {} .. {}", *v, lo, hi));
    out = *v;
    return Status::Ok();
  }

  Status Integer(const toml::table& t, const std::string& prefix, const char* key, int& out, int lo, int hi) const {
    const toml::node* n = t.get(key);
    if (n == nullptr) return Status::Ok();
    if (!n->is_integer()) return Error(n, prefix + key, "must be a whole number");
    int64_t v = *n->value<int64_t>();
    if (v < lo || v > hi) return Error(n, prefix + key, fmt::format("{} is outside {} .. {}", v, lo, hi));
    out = static_cast<int>(v);
    return Status::Ok();
  }

  Status Bool(const toml::table& t, const std::string& prefix, const char* key, bool& out) const {
    const toml::node* n = t.get(key);
    if (n == nullptr) return Status::Ok();
    if (!n->is_boolean()) return Error(n, prefix + key, "must be true or false");
    out = *n->value<bool>();
    return Status::Ok();
  }

  Status String(const toml::table& t, const std::string& prefix, const char* key, std::string& out, bool required, int line) const {
    const toml::node* n = t.get(key);
    if (n == nullptr) {
      if (required) return ErrorAt(line, prefix + key, "missing");
      return Status::Ok();
    }
    if (!n->is_string()) return Error(n, prefix + key, "must be a string in quotes");
    out = *n->value<std::string>();
    if (required && out.empty()) return Error(n, prefix + key, "must not be empty");
    return Status::Ok();
  }

  const std::string& path() const { return path_; }

 private:
  std::string path_;
};

const std::set<std::string> kRoles = {"load", "meter", "thermometer", "supply", "chamber"};

}  // namespace

Result<RigFileSpec> ParseRigFile(std::string_view text, const std::string& path) {
  KP_RETURN_IF_ERROR(CheckTextLimits(text, path));
  Reader r(path);
  toml::table root;
  try {
    root = toml::parse(text, path);
  } catch (const toml::parse_error& e) {
    return InvalidInput(fmt::format("{}:{}:{}: {}", path, e.source().begin.line, e.source().begin.column, e.description()));
  }
  std::string base_dir = fs::path(path).parent_path().string();
  if (base_dir.empty()) base_dir = ".";
  RigFileSpec spec;
  spec.path = path;
  spec.text = std::string(text);
  KP_RETURN_IF_ERROR(r.OnlyKnown(root, "", {"bench", "instrument", "channel", "enclosure"}));
  const bool has_channels = root.contains("channel");

  if (const toml::node* bn = root.get("bench")) {
    const toml::table* b = bn->as_table();
    if (b == nullptr) return r.Error(bn, "bench", "must be a table ([bench])");
    const std::string p = "bench.";
    KP_RETURN_IF_ERROR(r.OnlyKnown(*b, p, {"name", "clock_speed", "trace", "max_current_a", "max_voltage_v", "load_rating_w",
                                          "chamber_min_c", "chamber_max_c"}));
    int line = static_cast<int>(bn->source().begin.line);
    KP_RETURN_IF_ERROR(r.String(*b, p, "name", spec.name, false, line));
    KP_RETURN_IF_ERROR(r.Number(*b, p, "clock_speed", spec.clock_speed, 1e-3, 1e6));
    std::string trace;
    KP_RETURN_IF_ERROR(r.String(*b, p, "trace", trace, false, line));
    if (!trace.empty()) spec.trace = fs::path(trace).is_relative() ? (fs::path(base_dir) / trace).string() : trace;
    KP_RETURN_IF_ERROR(r.Number(*b, p, "max_current_a", spec.limits.max_current_a, 0.0, 1e4));
    KP_RETURN_IF_ERROR(r.Number(*b, p, "max_voltage_v", spec.limits.max_voltage_v, 0.0, 1e4));
    KP_RETURN_IF_ERROR(r.Number(*b, p, "load_rating_w", spec.limits.load_rating_w, 0.0, 1e6));
    // Set points the chamber may be given (absent: the chamber's own range).
    for (const char* key : {"chamber_min_c", "chamber_max_c"}) {
      double v = std::numeric_limits<double>::quiet_NaN();
      KP_RETURN_IF_ERROR(r.Number(*b, p, key, v, -100.0, 300.0));
      if (!std::isnan(v)) (std::string_view(key) == "chamber_min_c" ? spec.limits.chamber_min_c : spec.limits.chamber_max_c) = v;
    }
    if (spec.limits.chamber_min_c && spec.limits.chamber_max_c && *spec.limits.chamber_min_c >= *spec.limits.chamber_max_c)
      return r.Error(b->get("chamber_max_c"), p + "chamber_max_c", "must be above chamber_min_c");
  }
  if (spec.name.empty()) spec.name = fs::path(path).stem().string();

  const toml::node* in = root.get("instrument");
  if (in == nullptr) return r.ErrorAt(1, "instrument", "no [[instrument]] tables: a rig needs at least a load and a thermometer");
  const toml::array* arr = in->as_array();
  if (arr == nullptr || !arr->is_array_of_tables()) return r.Error(in, "instrument", "must be written as [[instrument]] tables");

  std::map<std::string, std::string> role_owner;
  std::set<std::string> names;
  for (size_t i = 0; i < arr->size(); ++i) {
    const toml::node& node = *arr->get(i);
    const toml::table& t = *node.as_table();
    InstrumentSpec is;
    is.line = static_cast<int>(node.source().begin.line);
    const std::string p = fmt::format("instrument[{}].", i + 1);
    KP_RETURN_IF_ERROR(r.OnlyKnown(t, p, {"name", "address", "profile", "roles", "channel", "timeout_s", "retries", "confirm_writes",
                                          "remote_sense", "stuck_after", "late_reply_s", "voltage_offset_v", "voltage_gain", "current_offset_a", "current_gain",
                                          "temperature_offset_c", "temperature_gain", "unguarded", "temperature_tolerance_c", "calibrated_on"}));
    KP_RETURN_IF_ERROR(r.String(t, p, "name", is.name, false, is.line));
    if (is.name.empty()) is.name = fmt::format("instrument {}", i + 1);
    if (!names.insert(is.name).second) return r.Error(t.get("name"), p + "name", fmt::format("'{}' is used twice", is.name));
    KP_RETURN_IF_ERROR(r.String(t, p, "address", is.address, true, is.line));
    if (Result<Address> a = ParseAddress(is.address); !a.ok()) return r.Error(t.get("address"), p + "address", a.status().message());
    else if (a->kind == Address::Kind::kPty)
      return r.Error(t.get("address"), p + "address", "'pty' is for `kneepoint sim`; use serial:/dev/pts/N");
    else if (a->kind == Address::Kind::kTcp && a->port == 0)
      return r.Error(t.get("address"), p + "address", "port 0 is only for listening");
    KP_RETURN_IF_ERROR(r.String(t, p, "profile", is.profile_ref, true, is.line));

    const toml::node* rn = t.get("roles");
    if (rn == nullptr) return r.ErrorAt(is.line, p + "roles", "missing (e.g. roles = [\"load\"])");
    const toml::array* ra = rn->as_array();
    if (ra == nullptr || ra->empty()) return r.Error(rn, p + "roles", "must be a non-empty list of strings");
    for (const toml::node& e : *ra) {
      std::optional<std::string> role = e.value<std::string>();
      if (!role || !kRoles.count(*role)) return r.Error(&e, p + "roles", "each role must be \"load\", \"meter\", \"thermometer\", \"supply\" or \"chamber\"");
      if (auto [it, fresh] = role_owner.emplace(*role, is.name); !fresh && !has_channels)
        return r.Error(&e, p + "roles", fmt::format("role '{}' is already taken by '{}'", *role, it->second));
      is.roles.push_back(*role);
    }
    if (const toml::node* cn = t.get("channel")) {
      if (cn->is_integer()) is.channel = std::to_string(*cn->value<int64_t>());
      else if (cn->is_string()) is.channel = *cn->value<std::string>();
      else return r.Error(cn, p + "channel", "must be a number or a string");
    }
    KP_RETURN_IF_ERROR(r.Number(t, p, "timeout_s", is.timeout_s, 0.01, 600.0));
    KP_RETURN_IF_ERROR(r.Integer(t, p, "retries", is.retries, 0, 10));
    KP_RETURN_IF_ERROR(r.Bool(t, p, "confirm_writes", is.confirm_writes));
    KP_RETURN_IF_ERROR(r.Bool(t, p, "remote_sense", is.remote_sense));
    KP_RETURN_IF_ERROR(r.Integer(t, p, "stuck_after", is.stuck_after, 0, 1000000));
    KP_RETURN_IF_ERROR(r.Number(t, p, "late_reply_s", is.late_reply_s, 0.0, 600.0));
    KP_RETURN_IF_ERROR(r.Number(t, p, "temperature_tolerance_c", is.temperature_tolerance_c, 0.0, 20.0));
    KP_RETURN_IF_ERROR(r.Number(t, p, "voltage_offset_v", is.voltage.offset, -1e3, 1e3));
    KP_RETURN_IF_ERROR(r.Number(t, p, "voltage_gain", is.voltage.gain, 0.5, 2.0));
    KP_RETURN_IF_ERROR(r.Number(t, p, "current_offset_a", is.current.offset, -1e3, 1e3));
    KP_RETURN_IF_ERROR(r.Number(t, p, "current_gain", is.current.gain, 0.5, 2.0));
    KP_RETURN_IF_ERROR(r.Number(t, p, "temperature_offset_c", is.temperature.offset, -100.0, 100.0));
    KP_RETURN_IF_ERROR(r.Number(t, p, "temperature_gain", is.temperature.gain, 0.5, 2.0));

    // The profile: found, well-formed, and able to fill the roles asked of it.
    const toml::node* pn = t.get("profile");
    Result<std::string> found = FindProfile(is.profile_ref, base_dir);
    if (!found.ok()) return r.Error(pn, p + "profile", found.status().message());
    if (Status in = ConfineProfilePath(*found, base_dir); !in.ok()) return r.Error(pn, p + "profile", in.message());
    Result<InstrumentProfile> prof = LoadProfileFile(*found);
    if (!prof.ok()) return r.Error(pn, p + "profile", prof.status().message());
    for (const std::string& role : is.roles) {
      if (!prof->HasRole(role))
        return r.Error(rn, p + "roles", fmt::format("profile '{}' cannot act as {}", is.profile_ref, role));
    }
    // Missing load protections must be acknowledged, and only missing ones.
    const toml::node* un = t.get("unguarded");
    if (un != nullptr) {
      const toml::array* ua = un->as_array();
      if (ua == nullptr) return r.Error(un, p + "unguarded", "must be a list of strings, e.g. [\"watchdog\"]");
      if (std::find(is.roles.begin(), is.roles.end(), "load") == is.roles.end())
        return r.Error(un, p + "unguarded", "only a load has protections to acknowledge");
      for (const toml::node& e : *ua) {
        std::optional<std::string> g = e.value<std::string>();
        bool known = false;
        for (LoadGuard lg : kLoadGuards) known = known || (g && *g == LoadGuardName(lg));
        if (!known) return r.Error(&e, p + "unguarded", "each entry must be \"undervoltage\", \"overcurrent\", \"overpower\" or \"watchdog\"");
        is.unguarded.push_back(*g);
      }
    }
    if (std::find(is.roles.begin(), is.roles.end(), "load") != is.roles.end()) {
      for (LoadGuard lg : kLoadGuards) {
        const bool listed = std::find(is.unguarded.begin(), is.unguarded.end(), LoadGuardName(lg)) != is.unguarded.end();
        const bool has = LoadHasGuard(prof->load, lg);
        if (!has && !listed)
          return r.ErrorAt(is.line, p + "unguarded",
                           fmt::format("profile '{}' has no {} protection (guard-{} = none); running without this hardware "
                                       "backstop must be acknowledged: unguarded = [\"{}\"]",
                                       is.profile_ref, LoadGuardName(lg), LoadGuardName(lg), LoadGuardName(lg)));
        if (has && listed)
          return r.Error(un, p + "unguarded",
                         fmt::format("profile '{}' has the {} protection (guard-{}); remove it from the list", is.profile_ref,
                                     LoadGuardName(lg), LoadGuardName(lg)));
      }
    }
    is.profile = std::move(*prof);
    if (const toml::node* cd = t.get("calibrated_on")) {
      // A TOML date (2026-03-14) or the same in quotes: stored with each run.
      if (const auto* d = cd->as_date()) {
        const toml::date v = d->get();
        is.calibrated_on = fmt::format("{:04}-{:02}-{:02}", v.year, v.month, v.day);
      } else if (cd->is_string()) {
        is.calibrated_on = *cd->value<std::string>();
        const std::string& c = is.calibrated_on;
        bool ok = c.size() == 10 && c[4] == '-' && c[7] == '-';
        for (size_t k : {0, 1, 2, 3, 5, 6, 8, 9}) ok = ok && c.size() == 10 && std::isdigit(static_cast<unsigned char>(c[k]));
        if (!ok) return r.Error(cd, p + "calibrated_on", "must be a date, YYYY-MM-DD");
      } else {
        return r.Error(cd, p + "calibrated_on", "must be a date, YYYY-MM-DD");
      }
    }
    if (!is.channel.empty()) ApplyChannel(is.profile, is.channel);
    spec.instruments.push_back(std::move(is));
  }
  for (const char* needed : {"load", "thermometer"}) {
    if (!role_owner.count(needed))
      return r.Error(in, "instrument", fmt::format("no instrument has the role '{}' (a run needs a load and a thermometer)", needed));
  }
  KP_RETURN_IF_ERROR(ParseChannelTables(root, spec));
  return spec;
}

Result<RigFileSpec> LoadRigFile(const std::string& path) {
  KP_ASSIGN_OR_RETURN(std::string text, ReadLimitedTextFile(path, "rig file"));
  return ParseRigFile(text, path);
}

}  // namespace kp
