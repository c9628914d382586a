#include "procedures/units.h"

#include <fmt/format.h>

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdlib>
#include <vector>

#include "analysis/calendar.h"
#include "drivers/spelling.h"

namespace kp {
namespace {

std::string Lower(std::string_view s) {
  std::string out(s);
  for (char& c : out) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return out;
}

// The SI spelling of a prefixed unit, lower-cased key -> (dimension, scale).
struct Spelling {
  const char* text;
  Dimension dimension;
  double scale;
};

// Bases that take a prefix; Plan's base units (charge in mAh).
constexpr Spelling kBases[] = {
    {"A", Dimension::kCurrent, 1.0},   {"W", Dimension::kPower, 1.0},    {"Ohm", Dimension::kResistance, 1.0},
    {"V", Dimension::kVoltage, 1.0},   {"Ah", Dimension::kCharge, 1e3}, {"Wh", Dimension::kEnergy, 1.0},
};
// Units without a prefix.
constexpr Spelling kPlain[] = {
    {"C", Dimension::kCRate, 1.0},         {"It", Dimension::kCRate, 1.0},     {"%", Dimension::kPercent, 1.0},
    {"degC", Dimension::kTemperature, 1.0}, {"s", Dimension::kTime, 1.0},       {"ms", Dimension::kTime, 1e-3},
    {"min", Dimension::kTime, 60.0},        {"h", Dimension::kTime, 3600.0},    {"d", Dimension::kTime, 86400.0},
};

bool IsUnitByte(unsigned char c) { return std::isalpha(c) != 0 || c == '%' || c >= 0x80; }
bool IsDigit(char c) { return c >= '0' && c <= '9'; }

std::optional<UnitInfo> Plain(std::string_view u, bool fold) {
  for (const Spelling& s : kPlain)
    if (fold ? Lower(s.text) == Lower(u) : std::string_view(s.text) == u) return UnitInfo{s.dimension, s.scale};
  return std::nullopt;
}

std::optional<UnitInfo> Prefixed(std::string_view u, bool fold) {
  double prefix = 1.0;
  std::string_view base = u;
  if (base.starts_with("\xC2\xB5") || base.starts_with("\xCE\xBC")) {  // µ (micro sign) or μ (Greek mu)
    prefix = 1e-6;
    base.remove_prefix(2);
  } else if (base.size() > 1) {
    char p = fold ? static_cast<char>(std::tolower(static_cast<unsigned char>(base[0]))) : base[0];
    if (p == 'n' || p == 'u' || p == 'm' || p == 'k') {
      std::string_view rest = base.substr(1);
      bool rest_is_base = rest == "\xCE\xA9";
      for (const Spelling& s : kBases)
        if (fold ? Lower(s.text) == Lower(rest) : std::string_view(s.text) == rest) rest_is_base = true;
      if (rest_is_base) {
        prefix = p == 'n' ? 1e-9 : p == 'u' ? 1e-6 : p == 'm' ? 1e-3 : 1e3;
        base = rest;
      }
    }
  }
  if (base == "\xCE\xA9") return UnitInfo{Dimension::kResistance, prefix};  // Ω
  for (const Spelling& s : kBases)
    if (fold ? Lower(s.text) == Lower(base) : std::string_view(s.text) == base)
      return UnitInfo{s.dimension, s.scale * prefix};
  return std::nullopt;
}

// Every spelling of a dimension's units, for suggestions.
std::vector<std::string> SpellingsOf(Dimension d) {
  std::vector<std::string> out;
  for (const Spelling& s : kPlain)
    if (s.dimension == d) out.emplace_back(s.text);
  for (const Spelling& s : kBases) {
    if (s.dimension != d) continue;
    for (const char* p : {"", "n", "u", "m", "k"}) out.push_back(std::string(p) + s.text);
  }
  if (d == Dimension::kCurrent)
    for (const char* c : {"C", "It"}) out.emplace_back(c);
  if (d == Dimension::kCharge) out.emplace_back("%");
  return out;
}

// The unit a bare number most likely lacks, for the hint.
const char* LikelyUnit(double v, Dimension d) {
  double a = std::fabs(v);
  switch (d) {
    case Dimension::kCurrent: return a >= 10 ? "mA" : "A";
    case Dimension::kPower: return a >= 100 ? "mW" : "W";
    case Dimension::kResistance: return a >= 1000 ? "mOhm" : "Ohm";
    case Dimension::kVoltage: return a >= 100 ? "mV" : "V";
    case Dimension::kTime: return "s";
    case Dimension::kCharge: return a >= 10 ? "mAh" : "Ah";
    case Dimension::kEnergy: return a >= 100 ? "mWh" : "Wh";
    case Dimension::kTemperature: return "degC";
    case Dimension::kCRate: return "C";
    case Dimension::kPercent: return "%";
    case Dimension::kFraction: return "%";
    case Dimension::kRatePerMonth: return "%/month";
  }
  return "";
}

}  // namespace

const char* DimensionName(Dimension d) {
  switch (d) {
    case Dimension::kCurrent: return "current";
    case Dimension::kPower: return "power";
    case Dimension::kResistance: return "resistance";
    case Dimension::kVoltage: return "voltage";
    case Dimension::kTime: return "time";
    case Dimension::kCharge: return "charge";
    case Dimension::kEnergy: return "energy";
    case Dimension::kTemperature: return "temperature";
    case Dimension::kCRate: return "C-rate";
    case Dimension::kPercent: return "percentage";
    case Dimension::kFraction: return "ratio";
    case Dimension::kRatePerMonth: return "rate per month";
  }
  return "?";
}

const char* UnitsOf(Dimension d) {
  switch (d) {
    case Dimension::kCurrent: return "nA, uA, mA, A, or a C-rate like 0.2C or 0.2It";
    case Dimension::kPower: return "uW, mW, W, kW";
    case Dimension::kResistance: return "mOhm, Ohm, kOhm";
    case Dimension::kVoltage: return "uV, mV, V";
    case Dimension::kTime: return "ms, s, min, h, d, 1h30min or 1:30:00";
    case Dimension::kCharge: return "uAh, mAh, Ah";
    case Dimension::kEnergy: return "mWh, Wh, kWh";
    case Dimension::kTemperature: return "degC or °C";
    case Dimension::kCRate: return "C or It";
    case Dimension::kPercent: return "%";
    case Dimension::kFraction: return "% or a plain ratio like 0.4";
    case Dimension::kRatePerMonth: return "%/month, %/year, %/day";
  }
  return "?";
}

UnitLookup LookUpUnit(std::string_view u) {
  UnitLookup r;
  if (u.empty()) return r;
  if (u == "\xC2\xB0"
           "C" ||
      u == "\xE2\x84\x83") {  // °C, ℃
    r.info = UnitInfo{Dimension::kTemperature, 1.0};
    return r;
  }
  // Exact SI spellings first.
  if ((r.info = Plain(u, false)) || (r.info = Prefixed(u, false))) return r;
  // The mega prefix written the SI way: a slip for milli, never a bench value.
  if (u.size() > 1 && u[0] == 'M') {
    std::string_view rest = u.substr(1);
    for (const Spelling& s : kBases)
      if (rest == s.text) {
        const char* names = s.dimension == Dimension::kCurrent      ? "amperes"
                            : s.dimension == Dimension::kPower      ? "watts"
                            : s.dimension == Dimension::kResistance ? "ohms"
                            : s.dimension == Dimension::kVoltage    ? "volts"
                            : s.dimension == Dimension::kCharge     ? "ampere-hours"
                                                                    : "watt-hours";
        r.error = fmt::format("'{}' would be mega-{}: Kneepoint has no mega prefix; write m{} for milli", u, names, s.text);
        return r;
      }
  }
  if (u == "m" || u == "M") {
    r.error = fmt::format("'{}' is not a unit: write min for minutes or ms for milliseconds", u);
    return r;
  }
  // Then without regard to case ("2.5v", "600MA" is refused above, "600ma" is mA).
  if ((r.info = Plain(u, true)) || (r.info = Prefixed(u, true))) return r;
  if (Lower(u) == "ohms") return UnitLookup{UnitInfo{Dimension::kResistance, 1.0}, ""};
  return r;
}

std::optional<UnitInfo> ParseUnit(std::string_view unit) { return LookUpUnit(unit).info; }

ScannedQuantity ScanQuantity(std::string_view text, size_t pos) {
  ScannedQuantity q;
  const size_t n = text.size();
  const size_t start = pos;
  auto fail = [&](size_t at, std::string msg) {
    q.error = std::move(msg);
    q.error_pos = at;
    q.end = std::max(q.end, at);
    return q;
  };
  // One number: [-]digits[.digits][e[+-]digits].
  auto number = [&](size_t& i, bool allow_sign) -> std::optional<double> {
    size_t b = i;
    if (allow_sign && i < n && (text[i] == '-' || text[i] == '+')) ++i;
    size_t digits = 0, dots = 0;
    while (i < n && (IsDigit(text[i]) || text[i] == '.')) {
      if (text[i] == '.') ++dots; else ++digits;
      ++i;
    }
    if (digits == 0 || dots > 1 || text[i - 1] == '.') return std::nullopt;
    if (i + 1 < n && (text[i] == 'e' || text[i] == 'E') &&
        (IsDigit(text[i + 1]) || ((text[i + 1] == '-' || text[i + 1] == '+') && i + 2 < n && IsDigit(text[i + 2])))) {
      i += 2;
      while (i < n && IsDigit(text[i])) ++i;
    }
    return std::strtod(std::string(text.substr(b, i - b)).c_str(), nullptr);
  };
  size_t i = pos;
  {
    size_t s = i + (i < n && (text[i] == '-' || text[i] == '+') ? 1 : 0);
    std::string word = Lower(text.substr(s, 3));
    if (word == "nan" || word == "inf") return fail(start, fmt::format("'{}' is not a finite number", text.substr(start)));
  }
  std::optional<double> v = number(i, true);
  if (!v) {
    size_t e = i;
    while (e < n && IsUnitByte(static_cast<unsigned char>(text[e]))) ++e;
    return fail(start, fmt::format("malformed number '{}'", text.substr(start, e - start)));
  }
  q.number = *v;
  // h:mm:ss
  if (i < n && text[i] == ':' && i + 1 < n && IsDigit(text[i + 1])) {
    size_t b = start;
    std::vector<std::string_view> parts;
    size_t j = b;
    while (j < n && (IsDigit(text[j]) || text[j] == ':' || text[j] == '.')) ++j;
    std::string_view all = text.substr(b, j - b);
    size_t p0 = 0;
    while (true) {
      size_t c = all.find(':', p0);
      parts.push_back(all.substr(p0, c == std::string_view::npos ? std::string_view::npos : c - p0));
      if (c == std::string_view::npos) break;
      p0 = c + 1;
    }
    q.end = j;
    q.text = std::string(all);
    if (parts.size() != 3)
      return fail(b, fmt::format("'{}' is not h:mm:ss: write {}:00 or use units ({})", all, all, UnitsOf(Dimension::kTime)));
    double h = std::strtod(std::string(parts[0]).c_str(), nullptr);
    double mm = std::strtod(std::string(parts[1]).c_str(), nullptr);
    double ss = std::strtod(std::string(parts[2]).c_str(), nullptr);
    bool ok = !parts[0].empty() && parts[0].find('.') == std::string_view::npos && parts[1].size() == 2 &&
              parts[1].find('.') == std::string_view::npos && parts[2].size() >= 2 && IsDigit(parts[2][0]) &&
              IsDigit(parts[2][1]) && (parts[2].size() == 2 || parts[2][2] == '.') && mm < 60 && ss < 60 &&
              std::count(parts[2].begin(), parts[2].end(), '.') <= 1 && parts[2].back() != '.';
    if (!ok) return fail(b, fmt::format("'{}' is not a duration h:mm:ss (minutes and seconds two digits, under 60)", all));
    q.number = h * 3600 + mm * 60 + ss;
    q.unit = "s";
    return q;
  }
  // The unit, attached or after spaces.
  size_t u0 = i;
  while (u0 < n && IsUnitByte(static_cast<unsigned char>(text[u0]))) ++u0;
  if (u0 > i) {
    q.unit = std::string(text.substr(i, u0 - i));
    i = u0;
  } else {
    size_t sp = i;
    while (sp < n && (text[sp] == ' ' || text[sp] == '\t')) ++sp;
    size_t e = sp;
    while (e < n && IsUnitByte(static_cast<unsigned char>(text[e]))) ++e;
    // Only a whole word: "1 min-voltage=" is a bare 1 and the next option.
    bool whole_word = e == n || !(std::isalnum(static_cast<unsigned char>(text[e])) != 0 || text[e] == '-' ||
                                  text[e] == '_' || text[e] == '.');
    UnitLookup after = e > sp && whole_word ? LookUpUnit(text.substr(sp, e - sp)) : UnitLookup{};
    if (sp > i && e > sp && (after.info || !after.error.empty())) {
      q.unit = std::string(text.substr(sp, e - sp));
      i = e;
    }
  }
  // Compound durations: 1h30min, 2d12h, 1min30s (each part a smaller unit).
  if (i < n && IsDigit(text[i]) && !q.unit.empty()) {
    std::optional<UnitInfo> first = ParseUnit(q.unit);
    if (first && first->dimension == Dimension::kTime) {
      double total = q.number * first->scale;
      double last_scale = first->scale;
      while (i < n && IsDigit(text[i])) {
        size_t b = i;
        std::optional<double> part = number(i, false);
        size_t ue = i;
        while (ue < n && IsUnitByte(static_cast<unsigned char>(text[ue]))) ++ue;
        std::string_view pu = text.substr(i, ue - i);
        std::optional<UnitInfo> info = ParseUnit(pu);
        q.end = ue;
        q.text = std::string(text.substr(start, ue - start));
        if (!part) return fail(b, fmt::format("malformed duration '{}'", q.text));
        if (pu.empty())
          return fail(b, fmt::format("'{}': the last part has no unit (as in 1h30min)", q.text));
        if (!info || info->dimension != Dimension::kTime || info->scale >= last_scale)
          return fail(i, fmt::format("'{}': each part of a duration needs a smaller time unit than the one before "
                                     "(as in 1h30min or 2min30s)",
                                     q.text));
        total += *part * info->scale;
        last_scale = info->scale;
        i = ue;
      }
      q.number = total;
      q.unit = "s";
    }
  }
  q.end = i;
  q.text = std::string(text.substr(start, i - start));
  return q;
}

std::string BareNumberHint(std::string_view number, Dimension want) {
  double v = std::strtod(std::string(number).c_str(), nullptr);
  return fmt::format("'{}' has no unit: did you mean {}{}?", number, number, LikelyUnit(v, want));
}

ConvertedQuantity ConvertQuantity(const ScannedQuantity& q, Dimension want, std::string_view what,
                                  const QuantityContext& ctx) {
  ConvertedQuantity r;
  auto fail = [&](std::string msg) {
    r.error = std::move(msg);
    return r;
  };
  if (q.unit.empty()) {
    if (want == Dimension::kFraction) {
      r.value = q.number;
      return r;
    }
    return fail(fmt::format("{} ({} takes {})", BareNumberHint(q.text, want), what, UnitsOf(want)));
  }
  UnitLookup lu = LookUpUnit(q.unit);
  if (!lu.info) {
    if (!lu.error.empty()) return fail(lu.error);
    std::vector<std::string> known = SpellingsOf(want == Dimension::kFraction ? Dimension::kPercent : want);
    std::string hint = DidYouMean(q.unit, known);
    return fail(fmt::format("unknown unit '{}' in '{}'{}{}", q.unit, q.text, hint,
                            hint.empty() ? fmt::format(" ({} takes {})", what, UnitsOf(want)) : ""));
  }
  const UnitInfo u = *lu.info;
  if (u.dimension == Dimension::kCRate && want == Dimension::kCurrent) {
    if (!ctx.rated_mah)
      return fail(fmt::format("C-rate '{}' needs a rated capacity, which {} has none of: give a current (nA, uA, mA, A)",
                              q.text, what));
    r.value = q.number * *ctx.rated_mah / 1000.0;
    return r;
  }
  if (u.dimension == Dimension::kPercent && want == Dimension::kCharge) {
    if (!ctx.rated_mah)
      return fail(fmt::format("'{}' of rated capacity needs a rated capacity, which {} has none of: give mAh or Ah",
                              q.text, what));
    r.value = q.number / 100.0 * *ctx.rated_mah;
    return r;
  }
  if (u.dimension == Dimension::kPercent && want == Dimension::kFraction) {
    r.value = q.number / 100.0;
    return r;
  }
  if (u.dimension != want) {
    std::string hint;
    if (want == Dimension::kTemperature && u.dimension == Dimension::kCRate && Lower(q.unit) == "c")
      hint = fmt::format(": did you mean {}degC?", q.text.substr(0, q.text.size() - 1));
    else if (want == Dimension::kCharge && u.dimension == Dimension::kCRate && Lower(q.unit) == "c")
      hint = ": C is a C-rate here; write a charge in mAh or Ah (1 mAh = 3.6 coulombs)";
    return fail(fmt::format("{} needs a {} ({}), but '{}' is a {}{}", what, DimensionName(want), UnitsOf(want), q.text,
                            DimensionName(u.dimension), hint));
  }
  r.value = q.number * u.scale;
  return r;
}

ParsedQuantity ParseQuantityText(std::string_view text, Dimension want, std::string_view what,
                                 const QuantityContext& ctx) {
  ParsedQuantity r;
  std::string name = what.empty() ? std::string("the value") : std::string(what);
  size_t b = 0;
  while (b < text.size() && std::isspace(static_cast<unsigned char>(text[b]))) ++b;
  size_t e = text.size();
  while (e > b && std::isspace(static_cast<unsigned char>(text[e - 1]))) --e;
  std::string_view t = text.substr(b, e - b);
  auto fail = [&](size_t col, std::string msg) {
    r.error = std::move(msg);
    r.error_column = col;
    return r;
  };
  if (t.empty()) return fail(b + 1, fmt::format("{} is empty: give a number with a unit ({})", name, UnitsOf(want)));
  // A rate: "2%/month" is a percentage over a period.
  double per_month = 1.0;
  if (want == Dimension::kRatePerMonth) {
    size_t slash = t.find('/');
    if (slash == std::string_view::npos)
      return fail(b + 1, fmt::format("'{}' has no period: did you mean {}/month?", t,
                                     t.find('%') == std::string_view::npos ? std::string(t) + "%" : std::string(t)));
    std::string period = Lower(t.substr(slash + 1));
    if (period == "month" || period == "mo")
      per_month = 1.0;
    else if (period == "year" || period == "yr" || period == "a")
      per_month = 1.0 / 12.0;
    else if (period == "day" || period == "d")
      per_month = kDaysPerMonth;
    else
      return fail(b + slash + 2, fmt::format("unknown period '{}' in '{}'{} (use %/month, %/year or %/day)", period, t,
                                             DidYouMean(period, {"month", "year", "day"})));
    t = t.substr(0, slash);
  }
  bool digit_start = !t.empty() && (IsDigit(t[0]) || ((t[0] == '-' || t[0] == '+' || t[0] == '.') && t.size() > 1 &&
                                                      (IsDigit(t[1]) || t[1] == '.')));
  std::string lower_head = Lower(t.substr(t[0] == '-' || t[0] == '+' ? 1 : 0, 3));
  if (!digit_start && lower_head != "nan" && lower_head != "inf")
    return fail(b + 1, fmt::format("'{}' does not start with a number", t));
  ScannedQuantity q = ScanQuantity(t, 0);
  if (!q.error.empty()) return fail(b + q.error_pos + 1, q.error);
  if (q.end != t.size()) {
    std::string_view rest = t.substr(q.end);
    size_t sp = rest.find_first_not_of(" \t");
    return fail(b + q.end + sp + 1,
                q.unit.empty() ? fmt::format("unknown unit '{}' in '{}'{}", rest.substr(sp), t,
                                             DidYouMean(rest.substr(sp), SpellingsOf(want)))
                               : fmt::format("unexpected '{}' after '{}'", rest.substr(sp), q.text));
  }
  if (!std::isfinite(q.number)) return fail(b + 1, fmt::format("'{}' is not a finite number", t));
  if (q.number < 0 && want != Dimension::kTemperature) return fail(b + 1, fmt::format("'{}' must not be negative", t));
  Dimension as = want == Dimension::kRatePerMonth ? Dimension::kFraction : want;
  if (want == Dimension::kRatePerMonth && Lower(q.unit) != "%")
    return fail(b + 1, fmt::format("'{}' must be a percentage per period, as in 2%/month", text.substr(b, e - b)));
  ConvertedQuantity c = ConvertQuantity(q, as, name, ctx);
  if (!c.value) {
    size_t unit_col = q.unit.empty() ? 1 : q.text.size() - q.unit.size() + 1;
    return fail(b + (c.error.find("has no unit") != std::string::npos ? 1 : unit_col), c.error);
  }
  double v = *c.value * per_month;
  // Bounds far beyond any bench (no test draws 10 kA, lasts 300 years or
  // holds a billion mAh): a value past them is a typo, not a setting.
  double limit = 1e9;
  const char* base = "";
  switch (want) {
    case Dimension::kCurrent: limit = 1e4, base = "A"; break;
    case Dimension::kCharge: limit = 1e9, base = "mAh"; break;
    case Dimension::kTime: limit = 1e10, base = "s"; break;
    case Dimension::kRatePerMonth: base = " per month"; break;
    default: break;
  }
  if (v > limit) return fail(b + 1, fmt::format("'{}' is out of range (at most {:g}{})", text.substr(b, e - b), limit, base));
  r.value = v;
  return r;
}

std::string FormatQuantity(double v, Dimension d) {
  double a = std::fabs(v);
  switch (d) {
    case Dimension::kCurrent:
      if (a != 0 && a < 1e-3) return fmt::format("{:g} uA", v * 1e6);
      if (a < 1.0) return fmt::format("{:g} mA", v * 1e3);
      return fmt::format("{:g} A", v);
    case Dimension::kPower:
      return a < 1.0 ? fmt::format("{:g} mW", v * 1e3) : fmt::format("{:g} W", v);
    case Dimension::kResistance:
      return a < 1.0 ? fmt::format("{:g} mOhm", v * 1e3) : fmt::format("{:g} Ohm", v);
    case Dimension::kVoltage:
      return fmt::format("{:g} V", v);
    case Dimension::kTime:
      if (a < 1.0) return fmt::format("{:g} ms", v * 1e3);
      if (a >= 3600.0) return fmt::format("{:g} h", v / 3600.0);
      if (a >= 120.0) return fmt::format("{:g} min", v / 60.0);
      return fmt::format("{:g} s", v);
    case Dimension::kCharge:
      return fmt::format("{:g} mAh", v);
    case Dimension::kEnergy:
      return fmt::format("{:g} Wh", v);
    case Dimension::kTemperature:
      return fmt::format("{:g} degC", v);
    case Dimension::kCRate:
      return fmt::format("{:g}C", v);
    case Dimension::kPercent:
      return fmt::format("{:g}%", v);
    case Dimension::kFraction:
      return fmt::format("{:g}%", v * 100.0);
    case Dimension::kRatePerMonth:
      return fmt::format("{:g}%/month", v * 100.0);
  }
  return fmt::format("{:g}", v);
}

}  // namespace kp
