// A small well-formedness checker for the XHTML/SVG the reports produce:
// balanced, properly nested tags, quoted attributes, known entities only,
// no stray '<' or '&'. Returns an empty string when well formed, else a
// message with the byte offset. Also collects the elements seen.
#pragma once

#include <cctype>
#include <map>
#include <string>
#include <string_view>
#include <vector>

namespace kp::testing {

struct XmlElement {
  std::string name;
  std::map<std::string, std::string> attributes;
  std::string text;  // direct text content (entities left as written)
};

inline std::string CheckXml(std::string_view s, std::vector<XmlElement>* elements = nullptr) {
  std::vector<std::string> stack;
  std::vector<size_t> open_index;
  size_t i = 0;
  auto err = [&](const std::string& m) { return "offset " + std::to_string(i) + ": " + m; };
  auto is_name = [](char c) {
    return std::isalnum(static_cast<unsigned char>(c)) || c == '-' || c == '_' || c == ':' || c == '.';
  };
  bool root_seen = false;
  while (i < s.size()) {
    char c = s[i];
    if (c == '<') {
      if (s.substr(i, 5) == "<?xml") {
        size_t e = s.find("?>", i);
        if (e == std::string_view::npos) return err("unterminated declaration");
        i = e + 2;
        continue;
      }
      if (s.substr(i, 4) == "<!--") {
        size_t e = s.find("-->", i);
        if (e == std::string_view::npos) return err("unterminated comment");
        i = e + 3;
        continue;
      }
      if (s.substr(i, 9) == "<!DOCTYPE") {
        size_t e = s.find('>', i);
        if (e == std::string_view::npos) return err("unterminated doctype");
        i = e + 1;
        continue;
      }
      bool closing = i + 1 < s.size() && s[i + 1] == '/';
      size_t j = i + (closing ? 2 : 1);
      size_t b = j;
      while (j < s.size() && is_name(s[j])) ++j;
      if (j == b) return err("tag without a name");
      std::string name(s.substr(b, j - b));
      if (closing) {
        while (j < s.size() && std::isspace(static_cast<unsigned char>(s[j]))) ++j;
        if (j >= s.size() || s[j] != '>') return err("bad closing tag " + name);
        if (stack.empty() || stack.back() != name)
          return err("closing </" + name + "> does not match <" + (stack.empty() ? "" : stack.back()) + ">");
        stack.pop_back();
        open_index.pop_back();
        i = j + 1;
        continue;
      }
      if (stack.empty() && root_seen) return err("second root element");
      root_seen = true;
      XmlElement el;
      el.name = name;
      bool self_close = false;
      while (true) {
        while (j < s.size() && std::isspace(static_cast<unsigned char>(s[j]))) ++j;
        if (j >= s.size()) return err("unterminated tag " + name);
        if (s[j] == '>') break;
        if (s[j] == '/' && j + 1 < s.size() && s[j + 1] == '>') {
          self_close = true;
          ++j;
          break;
        }
        size_t ab = j;
        while (j < s.size() && is_name(s[j])) ++j;
        if (j == ab) return err("bad attribute in " + name);
        std::string an(s.substr(ab, j - ab));
        if (j >= s.size() || s[j] != '=') return err("attribute " + an + " without value");
        ++j;
        if (j >= s.size() || (s[j] != '"' && s[j] != '\'')) return err("unquoted attribute " + an);
        char q = s[j++];
        size_t ve = s.find(q, j);
        if (ve == std::string_view::npos) return err("unterminated attribute " + an);
        std::string_view v = s.substr(j, ve - j);
        if (v.find('<') != std::string_view::npos) return err("'<' in attribute " + an);
        if (el.attributes.count(an)) return err("duplicate attribute " + an);
        el.attributes[an] = std::string(v);
        j = ve + 1;
      }
      i = j + 1;
      if (elements) elements->push_back(el);
      if (!self_close) {
        stack.push_back(name);
        open_index.push_back(elements ? elements->size() - 1 : 0);
      }
      continue;
    }
    if (c == '&') {
      size_t e = s.find(';', i);
      if (e == std::string_view::npos || e - i > 8) return err("stray '&'");
      std::string_view ent = s.substr(i + 1, e - i - 1);
      bool ok = ent == "amp" || ent == "lt" || ent == "gt" || ent == "quot" || ent == "apos" || (ent.size() > 1 && ent[0] == '#');
      if (!ok) return err("unknown entity &" + std::string(ent) + ";");
    }
    if (!stack.empty() && elements && !open_index.empty())
      (*elements)[open_index.back()].text += c;
    else if (stack.empty() && !std::isspace(static_cast<unsigned char>(c)))
      return err("text outside the root element");
    ++i;
  }
  if (!stack.empty()) return "unclosed <" + stack.back() + ">";
  if (!root_seen) return "no root element";
  return "";
}

}  // namespace kp::testing
