#include "rig/rig_channels.h"

#include <algorithm>
#include <cctype>
#include <map>
#include <set>

#include <fmt/format.h>

#include "drivers/spelling.h"

namespace kp {
namespace {

Status ErrorAt(const std::string& path, const toml::node* n, const std::string& key, const std::string& what) {
  int line = n != nullptr ? static_cast<int>(n->source().begin.line) : 0;
  int col = n != nullptr ? static_cast<int>(n->source().begin.column) : 0;
  return InvalidInput(fmt::format("{}:{}:{}: key '{}': {}", path, line, col, key, what));
}

bool HasRole(const InstrumentSpec& is, const std::string& role) {
  for (const std::string& r : is.roles)
    if (r == role) return true;
  return false;
}

// Reads "NAME#CH" / "NAME" into `out`, checking the instrument, its role and its channel.
Status Bind(const RigFileSpec& spec, const toml::table& t, const std::string& prefix, const char* key, const char* role,
            bool required, int table_line, int table_col, ChannelBinding& out) {
  const std::string k = prefix + key;
  const toml::node* n = t.get(key);
  if (n == nullptr) {
    if (!required) return Status::Ok();
    return InvalidInput(fmt::format("{}:{}:{}: key '{}': missing (e.g. {} = \"NAME#1\": an instrument with the {} role and its channel)",
                                    spec.path, table_line, table_col, k, key, role));
  }
  std::optional<std::string> text = n->value<std::string>();
  if (!text || text->empty()) return ErrorAt(spec.path, n, k, "must be \"INSTRUMENT#CHANNEL\" (or the instrument's name alone) in quotes");
  std::string name = *text, channel;
  bool has_hash = false;
  if (size_t hash = text->rfind('#'); hash != std::string::npos) {
    name = text->substr(0, hash);
    channel = text->substr(hash + 1);
    has_hash = true;
  }
  if (has_hash && channel.empty()) return ErrorAt(spec.path, n, k, fmt::format("'{}': no channel after '#'", *text));
  for (char c : channel)
    if (std::isspace(static_cast<unsigned char>(c)) || c == '{' || c == '}' || c == ';')
      return ErrorAt(spec.path, n, k, fmt::format("channel '{}' may not hold blanks, braces or ';'", channel));
  int index = -1;
  std::vector<std::string> names;
  for (size_t i = 0; i < spec.instruments.size(); ++i) {
    names.push_back(spec.instruments[i].name);
    if (spec.instruments[i].name == name) index = static_cast<int>(i);
  }
  if (index < 0) return ErrorAt(spec.path, n, k, fmt::format("no [[instrument]] is named '{}'{}", name, DidYouMean(name, names)));
  const InstrumentSpec& is = spec.instruments[static_cast<size_t>(index)];
  if (!HasRole(is, role))
    return ErrorAt(spec.path, n, k, fmt::format("instrument '{}' (line {}) does not have the role '{}'", name, is.line, role));
  if (!is.channel.empty())
    return ErrorAt(spec.path, n, k,
                   fmt::format("instrument '{}' (line {}) has a fixed channel = \"{}\"; remove that key to use it from [[channel]] tables",
                               name, is.line, is.channel));
  const bool selects = is.profile.SelectsChannels();
  if (selects && channel.empty())
    return ErrorAt(spec.path, n, k,
                   fmt::format("instrument '{}' has several channels (dialect '{}'): write \"{}#N\" with its channel", name,
                               is.profile_ref, name));
  if (!selects && !channel.empty())
    return ErrorAt(spec.path, n, k,
                   fmt::format("dialect '{}' of instrument '{}' cannot address channels (no channel-select line and no {{ch}} in "
                               "its commands): write \"{}\" alone",
                               is.profile_ref, name, name));
  if (!channel.empty() && is.profile.channels > 0) {
    bool numeric = true;
    for (char c : channel) numeric = numeric && std::isdigit(static_cast<unsigned char>(c));
    if (numeric && (channel.size() > 4 || std::stoi(channel) > is.profile.channels))
      return ErrorAt(spec.path, n, k,
                     fmt::format("channel {} is beyond instrument '{}', which has {} (dialect '{}')", channel, name,
                                 is.profile.channels, is.profile_ref));
  }
  out.instrument = index;
  out.channel = channel;
  out.line = static_cast<int>(n->source().begin.line);
  out.col = static_cast<int>(n->source().begin.column);
  return Status::Ok();
}

}  // namespace

InstrumentProfile BoundProfile(const RigFileSpec& spec, const ChannelBinding& b) {
  InstrumentProfile p = spec.instruments.at(static_cast<size_t>(b.instrument)).profile;
  if (!b.channel.empty()) ApplyChannel(p, b.channel);
  return p;
}

std::string BindingText(const RigFileSpec& spec, const ChannelBinding& b) {
  if (!b.bound()) return "";
  const std::string& name = spec.instruments.at(static_cast<size_t>(b.instrument)).name;
  return b.channel.empty() ? name : name + "#" + b.channel;
}

Status ParseChannelTables(const toml::table& root, RigFileSpec& spec) {
  if (const toml::node* cn = root.get("channel")) {
    const toml::array* arr = cn->as_array();
    if (arr == nullptr || !arr->is_array_of_tables()) return ErrorAt(spec.path, cn, "channel", "must be written as [[channel]] tables");
    std::map<std::string, int> slots;                        // slot -> line
    std::map<std::pair<std::string, std::string>, std::string> used;  // (role, instrument#channel) -> slot
    for (size_t i = 0; i < arr->size(); ++i) {
      const toml::node& node = *arr->get(i);
      const toml::table& t = *node.as_table();
      ChannelSpec ch;
      ch.line = static_cast<int>(node.source().begin.line);
      ch.col = static_cast<int>(node.source().begin.column);
      const std::string p = fmt::format("channel[{}].", i + 1);
      static const std::vector<std::string> kKnown = {"slot", "load", "sense", "temperature", "supply"};
      for (const auto& [key, v] : t) {
        std::string k(key.str());
        if (std::find(kKnown.begin(), kKnown.end(), k) == kKnown.end())
          return ErrorAt(spec.path, &v, p + k,
                         fmt::format("unknown key{} (known: slot, load, sense, temperature, supply)", DidYouMean(k, kKnown)));
      }
      const toml::node* sn = t.get("slot");
      if (sn == nullptr)
        return InvalidInput(fmt::format("{}:{}:{}: key '{}slot': missing: name the cell position (slot = \"A1\")", spec.path, ch.line,
                                        ch.col, p));
      std::optional<std::string> slot = sn->value<std::string>();
      if (!slot || slot->empty() || slot->find_first_of(", \t") != std::string::npos)
        return ErrorAt(spec.path, sn, p + "slot", "must be a short name in quotes, without blanks or commas (slot = \"A1\")");
      if (auto [it, fresh] = slots.emplace(*slot, static_cast<int>(sn->source().begin.line)); !fresh)
        return ErrorAt(spec.path, sn, p + "slot", fmt::format("slot '{}' is already declared on line {}", *slot, it->second));
      ch.slot = *slot;
      KP_RETURN_IF_ERROR(Bind(spec, t, p, "load", "load", true, ch.line, ch.col, ch.load));
      KP_RETURN_IF_ERROR(Bind(spec, t, p, "temperature", "thermometer", true, ch.line, ch.col, ch.temperature));
      KP_RETURN_IF_ERROR(Bind(spec, t, p, "sense", "meter", false, ch.line, ch.col, ch.sense));
      KP_RETURN_IF_ERROR(Bind(spec, t, p, "supply", "supply", false, ch.line, ch.col, ch.supply));
      for (auto [key, b] : {std::pair<const char*, ChannelBinding*>{"load", &ch.load}, {"temperature", &ch.temperature},
                            {"sense", &ch.sense}, {"supply", &ch.supply}}) {
        if (!b->bound()) continue;
        std::string what = BindingText(spec, *b);
        if (auto [it, fresh] = used.emplace(std::make_pair(std::string(key), what), ch.slot); !fresh)
          return ErrorAt(spec.path, t.get(key), p + key,
                         fmt::format("'{}' already serves slot '{}' as its {}; one instrument channel serves one cell", what,
                                     it->second, key));
      }
      spec.channels.push_back(std::move(ch));
    }
    if (spec.channels.empty()) return ErrorAt(spec.path, cn, "channel", "no [[channel]] tables");
  }
  if (const toml::node* en = root.get("enclosure")) {
    const toml::table* t = en->as_table();
    if (t == nullptr) return ErrorAt(spec.path, en, "enclosure", "must be a table ([enclosure])");
    for (const auto& [key, v] : *t) {
      std::string k(key.str());
      if (k != "sensor" && k != "max_c")
        return ErrorAt(spec.path, &v, "enclosure." + k, fmt::format("unknown key{} (known: sensor, max_c)", DidYouMean(k, {"sensor", "max_c"})));
    }
    int line = static_cast<int>(en->source().begin.line), col = static_cast<int>(en->source().begin.column);
    KP_RETURN_IF_ERROR(Bind(spec, *t, "enclosure.", "sensor", "thermometer", true, line, col, spec.enclosure.sensor));
    const toml::node* mn = t->get("max_c");
    std::optional<double> max = mn != nullptr ? mn->value<double>() : std::nullopt;
    if (mn == nullptr)
      return InvalidInput(fmt::format("{}:{}:{}: key 'enclosure.max_c': missing: the enclosure's highest temperature in degC", spec.path,
                                      line, col));
    if (!max || !(mn->is_integer() || mn->is_floating_point()) || !(*max > -40.0 && *max <= 150.0))
      return ErrorAt(spec.path, mn, "enclosure.max_c", "must be a temperature in degC, above -40 and at most 150");
    spec.enclosure.max_c = *max;
  }
  return Status::Ok();
}

}  // namespace kp
