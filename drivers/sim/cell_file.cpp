#include "drivers/sim/cell_file.h"

#include <fmt/format.h>
#include <toml++/toml.h>

#include <cmath>
#include <functional>
#include <map>
#include <random>
#include <set>

#include "drivers/sim/cell_presets.h"
#include "drivers/text_limits.h"

namespace kp::sim {
namespace {

constexpr std::string_view kFormat = "kneepoint-cell 1";

struct NumberKey {
  const char* section;
  const char* key;
  double lo, hi;
  bool lo_open;  // value must be > lo rather than >= lo
  std::function<void(CellPreset&, double)> set;
};

// Every numeric key of the format, its range and where it goes (unit
// conversions happen here and nowhere else).
const std::vector<NumberKey>& NumberKeys() {
  static const std::vector<NumberKey> keys = {
      {"rating", "rated_mah", 0, 1e7, true, [](CellPreset& c, double v) { c.params.rated_ah = v / 1000.0; }},
      {"rating", "nominal_v", 0, 100, true, [](CellPreset& c, double v) { c.params.nominal_v = v; }},
      {"rating", "full_v", 0, 100, true, [](CellPreset& c, double v) { c.params.full_v = v; }},
      {"rating", "cutoff_v", 0, 100, true, [](CellPreset& c, double v) { c.params.cutoff_v = v; }},
      {"store", "capacity_mah", 0, 1e7, true, [](CellPreset& c, double v) { c.params.capacity_ah = v / 1000.0; }},
      {"store", "self_discharge_pct_per_month", 0, 99, false,
       [](CellPreset& c, double v) { c.params.self_discharge_per_month = v / 100.0; }},
      {"store", "charge_efficiency_pct", 0, 100, false, [](CellPreset& c, double v) { c.params.charge_efficiency = v / 100.0; }},
      {"store", "initial_level", 0, 1, false, [](CellPreset& c, double v) { c.params.initial_soc = v; }},
      {"ocv", "temp_coeff_mv_per_k", -10, 10, false,
       [](CellPreset& c, double v) { c.params.ocv_temp_coeff_v_per_k = v / 1000.0; }},
      {"ocv", "reference_c", -60, 100, false, [](CellPreset& c, double v) { c.params.reference_c = v; }},
      {"ocv", "hysteresis_mv", 0, 500, false, [](CellPreset& c, double v) { c.params.ocv_hysteresis_v = v / 1000.0; }},
      {"ocv", "hysteresis_span", 0, 1, true, [](CellPreset& c, double v) { c.params.ocv_hysteresis_span = v; }},
      {"impedance", "r0_mohm", 0, 1e6, true, [](CellPreset& c, double v) { c.params.r0_ohm = v / 1000.0; }},
      {"impedance", "fast_mohm", 0, 1e6, false, [](CellPreset& c, double v) { c.params.r1_ohm = v / 1000.0; }},
      {"impedance", "fast_tau_s", 0, 1e6, true, [](CellPreset& c, double v) { c.params.tau1_s = v; }},
      {"impedance", "slow_mohm", 0, 1e6, false, [](CellPreset& c, double v) { c.params.r2_ohm = v / 1000.0; }},
      {"impedance", "slow_tau_s", 0, 1e7, true, [](CellPreset& c, double v) { c.params.tau2_s = v; }},
      {"impedance", "activation_kj_per_mol", 0, 200, false,
       [](CellPreset& c, double v) { c.params.activation_energy_j_per_mol = v * 1000.0; }},
      {"impedance", "empty_rise", 0, 100, false, [](CellPreset& c, double v) { c.params.resistance_rise_at_empty = v; }},
      {"impedance", "empty_rise_width", 0, 1, true, [](CellPreset& c, double v) { c.params.resistance_rise_width = v; }},
      {"wells", "available_fraction", 0, 1, true, [](CellPreset& c, double v) { c.params.kibam_c = v; }},
      {"wells", "exchange_per_hour", 0, 1e6, false, [](CellPreset& c, double v) { c.params.kibam_k_per_s = v / 3600.0; }},
      {"wells", "exchange_activation_kj_per_mol", 0, 200, false,
       [](CellPreset& c, double v) { c.params.kibam_activation_energy_j_per_mol = v * 1000.0; }},
      {"thermal", "heat_capacity_j_per_k", 0, 1e9, true, [](CellPreset& c, double v) { c.params.heat_capacity_j_per_k = v; }},
      {"thermal", "to_ambient_k_per_w", 0, 1e6, true, [](CellPreset& c, double v) { c.params.thermal_resistance_k_per_w = v; }},
      {"thermal", "ambient_c", -60, 100, false, [](CellPreset& c, double v) { c.params.ambient_c = v; }},
      {"spread", "capacity_pct", 0, 50, false, [](CellPreset& c, double v) { c.spread.capacity_rel = v / 100.0; }},
      {"spread", "resistance_pct", 0, 50, false, [](CellPreset& c, double v) { c.spread.resistance_rel = v / 100.0; }},
      {"spread", "self_discharge_pct", 0, 50, false, [](CellPreset& c, double v) { c.spread.self_discharge_rel = v / 100.0; }},
  };
  return keys;
}

// Keys that are not plain numbers.
const std::map<std::string, std::set<std::string>>& OtherKeys() {
  static const std::map<std::string, std::set<std::string>> keys = {
      {"identity", {"name", "chemistry", "rechargeable"}},
      {"ocv", {"level", "volts"}},
  };
  return keys;
}

class Parser {
 public:
  explicit Parser(std::string_view source) : source_(source) {}

  Status Error(const toml::node* at, std::string_view key, const std::string& what) const {
    if (at != nullptr && at->source().begin.line > 0)
      return InvalidInput(fmt::format("{}:{}: {}: {}", source_, at->source().begin.line, key, what));
    return InvalidInput(fmt::format("{}: {}: {}", source_, key, what));
  }

  Result<CellPreset> Parse(const toml::table& root) {
    CellPreset out;
    // Which keys exist at all, so typos are reported rather than ignored.
    std::map<std::string, std::set<std::string>> known = OtherKeys();
    for (const NumberKey& k : NumberKeys()) known[k.section].insert(k.key);
    for (auto&& [key, node] : root) {
      std::string name(key.str());
      if (name == "format") continue;
      if (!known.count(name)) return Error(&node, name, "unknown key or section");
      if (!node.is_table()) return Error(&node, name, "must be a section ([" + name + "])");
      for (auto&& [sub, subnode] : *node.as_table()) {
        if (!known[name].count(std::string(sub.str())))
          return Error(&subnode, name + "." + std::string(sub.str()), "unknown key");
      }
    }
    const toml::node* format = root.get("format");
    if (format == nullptr)
      return Error(nullptr, "format", fmt::format("missing; the first line should be format = \"{}\"", kFormat));
    if (format->value<std::string>() != std::string(kFormat))
      return Error(format, "format", fmt::format("unsupported; expected \"{}\"", kFormat));

    KP_ASSIGN_OR_RETURN(out.params.name, String(root, "identity", "name"));
    KP_ASSIGN_OR_RETURN(out.params.chemistry, String(root, "identity", "chemistry"));
    KP_ASSIGN_OR_RETURN(const toml::node* rech, Node(root, "identity", "rechargeable"));
    if (!rech->is_boolean()) return Error(rech, "identity.rechargeable", "must be true or false");
    out.params.rechargeable = *rech->value<bool>();

    for (const NumberKey& k : NumberKeys()) {
      std::string full = fmt::format("{}.{}", k.section, k.key);
      const toml::table* sec = root[k.section].as_table();
      const toml::node* n = sec != nullptr ? sec->get(k.key) : nullptr;
      if (n == nullptr) {
        if (std::string_view(k.section) == "spread") continue;  // optional: no spread
        // Optional keys: the wells' activation energy (else the resistances'), hysteresis (else none).
        const std::string_view key(k.key);
        if (key == "exchange_activation_kj_per_mol" || key == "hysteresis_mv" || key == "hysteresis_span") continue;
        return Error(sec, full, sec != nullptr ? "missing" : fmt::format("missing (no [{}] section)", k.section));
      }
      std::optional<double> v = n->is_number() ? n->value<double>() : std::nullopt;
      if (!v || !std::isfinite(*v)) return Error(n, full, "must be a number");
      if (*v < k.lo || *v > k.hi || (k.lo_open && *v == k.lo))
        return Error(n, full, fmt::format("{} is out of range ({} {} .. {})", *v, k.lo_open ? ">" : ">=", k.lo, k.hi));
      k.set(out, *v);
    }
    KP_RETURN_IF_ERROR(OcvTable(root, out.params));
    const CellParams& p = out.params;
    const toml::node* rating = root.get("rating");
    if (!(p.cutoff_v < p.nominal_v && p.nominal_v <= p.full_v))
      return Error(rating, "rating", "expected cutoff_v < nominal_v <= full_v");
    if (p.rechargeable != (p.charge_efficiency > 0))
      return Error(root.get("store"), "store.charge_efficiency_pct",
                   p.rechargeable ? "a rechargeable cell needs an efficiency above 0" : "a primary cell stores no charge: use 0");
    return out;
  }

 private:
  Result<const toml::node*> Node(const toml::table& root, const char* section, const char* key) const {
    const toml::table* sec = root[section].as_table();
    std::string full = fmt::format("{}.{}", section, key);
    if (sec == nullptr) return Error(nullptr, full, fmt::format("missing (no [{}] section)", section));
    const toml::node* n = sec->get(key);
    if (n == nullptr) return Error(sec, full, "missing");
    return n;
  }

  Result<std::string> String(const toml::table& root, const char* section, const char* key) const {
    KP_ASSIGN_OR_RETURN(const toml::node* n, Node(root, section, key));
    if (!n->is_string() || n->value<std::string>()->empty())
      return Error(n, fmt::format("{}.{}", section, key), "must be a non-empty string");
    return *n->value<std::string>();
  }

  Result<std::vector<double>> Numbers(const toml::table& root, const char* key) const {
    KP_ASSIGN_OR_RETURN(const toml::node* n, Node(root, "ocv", key));
    std::string full = fmt::format("ocv.{}", key);
    if (!n->is_array()) return Error(n, full, "must be an array of numbers");
    std::vector<double> out;
    for (const toml::node& el : *n->as_array()) {
      std::optional<double> v = el.is_number() ? el.value<double>() : std::nullopt;
      if (!v || !std::isfinite(*v)) return Error(&el, full, fmt::format("element {} must be a number", out.size() + 1));
      out.push_back(*v);
    }
    return out;
  }

  Status OcvTable(const toml::table& root, CellParams& p) const {
    KP_ASSIGN_OR_RETURN(std::vector<double> level, Numbers(root, "level"));
    KP_ASSIGN_OR_RETURN(std::vector<double> volts, Numbers(root, "volts"));
    const toml::node* at = root["ocv"]["volts"].node();
    if (level.size() != volts.size())
      return Error(at, "ocv.volts", fmt::format("has {} values but ocv.level has {}", volts.size(), level.size()));
    if (level.size() < 2) return Error(at, "ocv.level", "needs at least two points");
    if (level.front() != 0.0 || level.back() != 1.0)
      return Error(root["ocv"]["level"].node(), "ocv.level", "must run from 0 to 1");
    p.ocv_table.clear();
    for (size_t i = 0; i < level.size(); ++i) {
      if (i > 0 && level[i] <= level[i - 1])
        return Error(root["ocv"]["level"].node(), "ocv.level", fmt::format("must increase (element {})", i + 1));
      if (i > 0 && volts[i] < volts[i - 1])
        return Error(at, "ocv.volts", fmt::format("must not fall as the level rises (element {})", i + 1));
      if (volts[i] <= 0.0) return Error(at, "ocv.volts", fmt::format("element {} must be > 0", i + 1));
      p.ocv_table.emplace_back(level[i], volts[i]);
    }
    return Status::Ok();
  }

  std::string source_;
};

// Box-Muller from the raw 64-bit engine, so a seed gives the same cell with any
// standard library (std::normal_distribution is implementation-defined).
double Gaussian(std::mt19937_64& rng) {
  auto uniform = [&] { return (static_cast<double>(rng() >> 11) + 0.5) * 0x1.0p-53; };
  double u1 = uniform(), u2 = uniform();
  return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * M_PI * u2);
}

}  // namespace

Result<CellPreset> ParseCellText(std::string_view text, std::string_view source_name) {
  KP_RETURN_IF_ERROR(CheckTextLimits(text, source_name));
  toml::table root;
  try {
    root = toml::parse(text, source_name);
  } catch (const toml::parse_error& e) {
    return InvalidInput(
        fmt::format("{}:{}:{}: {}", source_name, e.source().begin.line, e.source().begin.column, e.description()));
  }
  return Parser(source_name).Parse(root);
}

Result<CellPreset> LoadCellFile(const std::string& path) {
  KP_ASSIGN_OR_RETURN(std::string text, ReadLimitedTextFile(path, "cell file"));
  toml::table root;
  try {
    root = toml::parse(text, path);
  } catch (const toml::parse_error& e) {
    if (e.source().begin.line == 0) return InvalidInput(fmt::format("{}: {}", path, e.description()));
    return InvalidInput(fmt::format("{}:{}:{}: {}", path, e.source().begin.line, e.source().begin.column, e.description()));
  }
  return Parser(path).Parse(root);
}

namespace {

// A built-in preset's short name is its file's stem with '_' read as '-'
// ("li_ion.toml" is "li-ion").
std::string PresetName(std::string_view file) {
  std::string name(file.substr(0, file.rfind('.')));
  for (char& c : name)
    if (c == '_') c = '-';
  return name;
}

const embedded::EmbeddedText* FindPreset(std::string_view name) {
  for (const embedded::EmbeddedText& p : embedded::kCellPresets)
    if (PresetName(p.file) == name) return &p;
  return nullptr;
}

}  // namespace

std::vector<std::string> BuiltInCellNames() {
  std::vector<std::string> out;
  for (const embedded::EmbeddedText& p : embedded::kCellPresets) out.push_back(PresetName(p.file));
  return out;
}

std::string_view BuiltInCellText(std::string_view name) {
  const embedded::EmbeddedText* p = FindPreset(name);
  return p ? p->text : std::string_view();
}

Result<CellPreset> BuiltInCell(std::string_view name) {
  if (const embedded::EmbeddedText* p = FindPreset(name)) return ParseCellText(p->text, fmt::format("built-in {}", p->file));
  std::string names;
  for (const std::string& n : BuiltInCellNames()) names += (names.empty() ? "" : ", ") + n;
  return NotFound(fmt::format("no built-in cell '{}' (known: {})", name, names));
}

Result<CellPreset> LoadCell(std::string_view name_or_path) {
  if (!BuiltInCellText(name_or_path).empty()) return BuiltInCell(name_or_path);
  return LoadCellFile(std::string(name_or_path));
}

CellParams VaryCell(const CellParams& nominal, const CellSpread& spread, uint64_t seed) {
  CellParams p = nominal;
  std::mt19937_64 rng(seed);
  // Draw all three always, so one factor does not shift when another's spread changes.
  const double gc = Gaussian(rng), gr = Gaussian(rng), gs = Gaussian(rng);
  // Clamp to ±3 sigma and keep every factor positive.
  auto factor = [](double rel, double g) { return std::max(0.05, 1.0 + rel * std::clamp(g, -3.0, 3.0)); };
  p.capacity_ah *= factor(spread.capacity_rel, gc);
  const double fr = factor(spread.resistance_rel, gr);
  p.r0_ohm *= fr;
  p.r1_ohm *= fr;
  p.r2_ohm *= fr;
  p.self_discharge_per_month = std::min(0.99, p.self_discharge_per_month * factor(spread.self_discharge_rel, gs));
  return p;
}

CellParams DemoLiIonCell(double capacity_ah) {
  static const CellParams base = [] {
    Result<CellPreset> p = BuiltInCell("li-ion");
    // The built-in text is part of the program and covered by tests.
    if (!p.ok()) std::abort();
    return p->params;
  }();
  CellParams out = base;
  out.capacity_ah = capacity_ah;
  return out;
}

CellParams ScaleCell(const CellParams& cell, double rated_ah) {
  CellParams c = cell;
  if (rated_ah <= 0 || cell.rated_ah <= 0) return c;
  const double f = rated_ah / cell.rated_ah;
  c.rated_ah *= f;
  c.capacity_ah *= f;
  c.r0_ohm /= f;
  c.r1_ohm /= f;
  c.r2_ohm /= f;
  c.heat_capacity_j_per_k *= f;
  c.thermal_resistance_k_per_w /= f;
  return c;
}

}  // namespace kp::sim
