#include "analysis/quantity.h"

#include <fmt/format.h>

#include <cctype>
#include <charconv>
#include <cmath>

#include "analysis/calendar.h"

namespace kp {
namespace {

struct UnitScale {
  std::string_view unit;
  double scale;
};

constexpr UnitScale kCurrent[] = {{"A", 1.0},
                                  {"mA", 1e-3},
                                  {"uA", 1e-6},
                                  {"\xC2\xB5"
                                   "A",
                                   1e-6},
                                  {"nA", 1e-9}};
constexpr UnitScale kCharge[] = {{"Ah", 1000.0},
                                 {"mAh", 1.0},
                                 {"uAh", 1e-3},
                                 {"\xC2\xB5"
                                  "Ah",
                                  1e-3},
                                 {"C", 1.0 / 3.6}};
constexpr UnitScale kDuration[] = {{"s", 1.0}, {"ms", 1e-3}, {"min", 60.0}, {"h", 3600.0}, {"d", 86400.0}};
constexpr UnitScale kRate[] = {{"%/month", 0.01}, {"%/year", 0.01 / 12.0}, {"%/day", 0.01 * kDaysPerMonth}};
constexpr UnitScale kFraction[] = {{"", 1.0}, {"%", 0.01}};

template <size_t N>
const UnitScale* Find(const UnitScale (&table)[N], std::string_view unit) {
  for (const UnitScale& u : table)
    if (u.unit == unit) return &u;
  return nullptr;
}

template <size_t N>
std::string Units(const UnitScale (&table)[N]) {
  std::string s;
  for (const UnitScale& u : table) {
    if (u.unit.empty()) continue;
    if (!s.empty()) s += ", ";
    s += u.unit;
  }
  return s;
}

}  // namespace

ParsedQuantity ParseQuantity(std::string_view text, QuantityKind kind) {
  ParsedQuantity r;
  size_t b = 0;
  while (b < text.size() && std::isspace(static_cast<unsigned char>(text[b]))) ++b;
  size_t e = text.size();
  while (e > b && std::isspace(static_cast<unsigned char>(text[e - 1]))) --e;
  std::string_view t = text.substr(b, e - b);
  double v = 0;
  auto [ptr, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
  if (ec != std::errc() || t.empty()) {
    r.error = fmt::format("'{}' does not start with a number", t);
    r.error_column = b + 1;
    return r;
  }
  size_t num_len = static_cast<size_t>(ptr - t.data());
  std::string_view unit = t.substr(num_len);
  while (!unit.empty() && unit.front() == ' ') unit.remove_prefix(1), ++num_len;
  const UnitScale* u = nullptr;
  std::string expected;
  switch (kind) {
    case QuantityKind::kCurrent:
      u = Find(kCurrent, unit), expected = Units(kCurrent);
      break;
    case QuantityKind::kCharge:
      u = Find(kCharge, unit), expected = Units(kCharge);
      break;
    case QuantityKind::kDuration:
      u = Find(kDuration, unit), expected = Units(kDuration);
      break;
    case QuantityKind::kFraction:
      u = Find(kFraction, unit), expected = "%, or none for a fraction";
      break;
    case QuantityKind::kRatePerMonth:
      u = Find(kRate, unit), expected = Units(kRate);
      break;
  }
  if (!u) {
    r.error = fmt::format("unknown unit '{}' in '{}' (expected {})", unit, t, expected);
    r.error_column = b + num_len + 1;
    return r;
  }
  if (!std::isfinite(v)) {
    r.error = fmt::format("'{}' is not a finite number", t);
    r.error_column = b + 1;
    return r;
  }
  if (v < 0) {
    r.error = fmt::format("'{}' must not be negative", t);
    r.error_column = b + 1;
    return r;
  }
  // Bounds far beyond any bench (no test draws 10 kA, lasts 300 years or
  // holds a billion mAh): a value past them is a typo, not a setting.
  double limit = 1e9;
  const char* base = "";
  switch (kind) {
    case QuantityKind::kCurrent: limit = 1e4, base = "A"; break;
    case QuantityKind::kCharge: limit = 1e9, base = "mAh"; break;
    case QuantityKind::kDuration: limit = 1e10, base = "s"; break;
    case QuantityKind::kFraction: limit = 1e9, base = ""; break;
    case QuantityKind::kRatePerMonth: limit = 1e9, base = " per month"; break;
  }
  if (v * u->scale > limit) {
    r.error = fmt::format("'{}' is out of range (at most {:g}{})", t, limit, base);
    r.error_column = b + 1;
    return r;
  }
  r.value = v * u->scale;
  return r;
}

}  // namespace kp
