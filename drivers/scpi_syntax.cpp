#include "drivers/scpi_syntax.h"

#include <cctype>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstdlib>

namespace kp {
namespace {

std::string_view Trim(std::string_view s) {
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.front()))) s.remove_prefix(1);
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.back()))) s.remove_suffix(1);
  return s;
}

bool EqualNoCase(std::string_view a, std::string_view b) {
  if (a.size() != b.size()) return false;
  for (size_t i = 0; i < a.size(); ++i) {
    if (std::toupper(static_cast<unsigned char>(a[i])) != std::toupper(static_cast<unsigned char>(b[i]))) return false;
  }
  return true;
}

struct Node {
  bool optional = false;
  std::string long_form;   // "CURRent" -> "CURRENT"
  std::string short_form;  // "CURR"
};

std::vector<Node> ParsePattern(std::string_view p) {
  std::vector<Node> nodes;
  size_t i = 0;
  while (i < p.size()) {
    bool optional = false;
    if (p[i] == '[') {
      optional = true;
      ++i;
    }
    if (i < p.size() && p[i] == ':') ++i;
    std::string word;
    while (i < p.size() && p[i] != ':' && p[i] != '[' && p[i] != ']') word.push_back(p[i++]);
    if (i < p.size() && p[i] == ']') ++i;
    if (i < p.size() && p[i] == ':' && !optional) ++i;
    if (word.empty()) continue;
    Node n;
    n.optional = optional;
    for (char c : word) {
      n.long_form.push_back(static_cast<char>(std::toupper(static_cast<unsigned char>(c))));
      if (std::isupper(static_cast<unsigned char>(c)) || c == '*' || std::isdigit(static_cast<unsigned char>(c))) {
        n.short_form.push_back(c);
      }
    }
    if (n.short_form.empty()) n.short_form = n.long_form;
    nodes.push_back(std::move(n));
  }
  return nodes;
}

std::vector<std::string_view> SplitHeader(std::string_view h) {
  std::vector<std::string_view> parts;
  if (!h.empty() && h.front() == ':') h.remove_prefix(1);
  size_t start = 0;
  for (size_t i = 0; i <= h.size(); ++i) {
    if (i == h.size() || h[i] == ':') {
      parts.push_back(h.substr(start, i - start));
      start = i + 1;
    }
  }
  return parts;
}

bool MatchFrom(const std::vector<Node>& nodes, size_t ni, const std::vector<std::string_view>& parts, size_t pi) {
  if (ni == nodes.size()) return pi == parts.size();
  const Node& n = nodes[ni];
  if (pi < parts.size() && (EqualNoCase(parts[pi], n.long_form) || EqualNoCase(parts[pi], n.short_form))) {
    if (MatchFrom(nodes, ni + 1, parts, pi + 1)) return true;
  }
  return n.optional && MatchFrom(nodes, ni + 1, parts, pi);
}

}  // namespace

Result<ScpiNumber> ParseScpiNumber(std::string_view text) {
  std::string_view s = Trim(text);
  if (s.empty()) return ProtocolError("empty numeric reply");
  // Grammar (IEEE 488.2 §7.7.2 decimal numeric, from memory):
  // [sign] (digits [. digits*] | . digits) [(E|e) [sign] digits]
  size_t i = 0;
  if (s[i] == '+' || s[i] == '-') ++i;
  size_t mantissa_digits = 0;
  while (i < s.size() && std::isdigit(static_cast<unsigned char>(s[i]))) ++i, ++mantissa_digits;
  if (i < s.size() && s[i] == '.') {
    ++i;
    while (i < s.size() && std::isdigit(static_cast<unsigned char>(s[i]))) ++i, ++mantissa_digits;
  }
  if (mantissa_digits == 0) return ProtocolError("not a number: '" + std::string(s) + "'");
  if (i < s.size() && (s[i] == 'E' || s[i] == 'e')) {
    ++i;
    if (i < s.size() && (s[i] == '+' || s[i] == '-')) ++i;
    size_t exp_digits = 0;
    while (i < s.size() && std::isdigit(static_cast<unsigned char>(s[i]))) ++i, ++exp_digits;
    if (exp_digits == 0) return ProtocolError("exponent without digits: '" + std::string(s) + "'");
  }
  if (i != s.size()) return ProtocolError("trailing text in numeric reply: '" + std::string(s) + "'");
  std::string copy(s);
  errno = 0;
  char* end = nullptr;
  double v = std::strtod(copy.c_str(), &end);
  if (errno == ERANGE && std::isinf(v)) return ProtocolError("number out of range: '" + copy + "'");
  ScpiNumber n;
  // Compare with a relative tolerance: instruments print 9.9E37 as 9.90000E+37.
  auto near = [](double a, double b) { return std::fabs(a - b) <= 1e-9 * std::fabs(b); };
  if (near(v, 9.91e37)) {
    n.kind = ScpiNumber::Kind::kNotANumber;
  } else if (near(v, 9.9e37)) {
    n.kind = ScpiNumber::Kind::kOverflow;
  } else if (near(v, -9.9e37)) {
    n.kind = ScpiNumber::Kind::kUnderflow;
  } else {
    n.value = v;
  }
  return n;
}

std::string FormatNr3(double value) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%+.5E", value);
  return buf;
}

bool ScpiHeaderMatches(std::string_view pattern, std::string_view header) {
  pattern = Trim(pattern);
  header = Trim(header);
  bool pq = !pattern.empty() && pattern.back() == '?';
  bool hq = !header.empty() && header.back() == '?';
  if (pq != hq) return false;
  if (pq) pattern.remove_suffix(1), header.remove_suffix(1);
  if (header.empty()) return false;
  if (header.front() == '*' || pattern.front() == '*') return EqualNoCase(pattern, header);
  auto parts = SplitHeader(header);
  for (auto p : parts) {
    if (p.empty()) return false;
  }
  return MatchFrom(ParsePattern(pattern), 0, parts, 0);
}

ScpiCommand SplitScpiCommand(std::string_view line) {
  line = Trim(line);
  ScpiCommand cmd;
  size_t sp = 0;
  while (sp < line.size() && !std::isspace(static_cast<unsigned char>(line[sp]))) ++sp;
  cmd.header = std::string(line.substr(0, sp));
  std::string_view rest = Trim(line.substr(sp));
  if (rest.empty()) return cmd;
  size_t start = 0;
  for (size_t i = 0; i <= rest.size(); ++i) {
    if (i == rest.size() || rest[i] == ',') {
      cmd.args.emplace_back(Trim(rest.substr(start, i - start)));
      start = i + 1;
    }
  }
  return cmd;
}

}  // namespace kp
