#include "analysis/html_report.h"

#include <fmt/format.h>

namespace kp {

HtmlCell FigureCell(const std::string& key, double value, int decimals, const std::string& unit) {
  HtmlCell c;
  c.text = fmt::format("{:.{}f}", value, decimals) + (unit.empty() ? "" : " " + unit);
  c.figure = key;
  c.value = value;
  return c;
}

HtmlCell TextCell(const std::string& text) { return HtmlCell{text, "", std::nullopt}; }

std::string RenderHtmlPage(const std::string& title, const std::vector<HtmlSection>& sections) {
  std::string o;
  o += "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<!DOCTYPE html>\n";
  o += "<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n<meta charset=\"UTF-8\"/>\n";
  o += fmt::format("<title>{}</title>\n", XmlEscape(title));
  o += "<style>\n"
       "body{font-family:sans-serif;margin:2em;color:#222;max-width:60em}\n"
       "h1{font-size:1.5em}h2{font-size:1.2em;border-bottom:1px solid #ccc;margin-top:1.6em}\n"
       "table{border-collapse:collapse;margin:0.6em 0}td,th{border:1px solid #ccc;padding:0.2em 0.6em;text-align:right}\n"
       "th{background:#eef1f4}td.t{text-align:left}caption{text-align:left;font-style:italic}\n"
       "svg.plot{display:block;margin:0.8em 0}\n"
       "pre{background:#f6f7f9;border:1px solid #ddd;padding:0.5em;overflow-x:auto;font-size:0.9em}\n"
       "</style>\n</head>\n<body>\n";
  o += fmt::format("<h1>{}</h1>\n", XmlEscape(title));
  for (const HtmlSection& s : sections) {
    o += fmt::format("<h2>{}</h2>\n", XmlEscape(s.title));
    for (const std::string& p : s.paragraphs) o += fmt::format("<p>{}</p>\n", XmlEscape(p));
    for (const HtmlTable& t : s.tables) {
      o += "<table>\n";
      if (!t.caption.empty()) o += fmt::format("<caption>{}</caption>\n", XmlEscape(t.caption));
      if (!t.header.empty()) {
        o += "<tr>";
        for (const std::string& h : t.header) o += fmt::format("<th>{}</th>", XmlEscape(h));
        o += "</tr>\n";
      }
      for (const auto& row : t.rows) {
        o += "<tr>";
        for (const HtmlCell& c : row) {
          if (c.value)
            o += fmt::format("<td data-figure=\"{}\" data-value=\"{:.17g}\">{}</td>", XmlEscape(c.figure), *c.value,
                             XmlEscape(c.text));
          else
            o += fmt::format("<td class=\"t\">{}</td>", XmlEscape(c.text));
        }
        o += "</tr>\n";
      }
      o += "</table>\n";
    }
    for (const HtmlSection::Preformatted& p : s.preformatted)
      o += fmt::format("<p>{}:</p>\n<pre>{}</pre>\n", XmlEscape(p.caption), XmlEscape(p.text));
    for (const PlotSpec& p : s.plots) o += RenderSvgPlot(p);
  }
  o += "</body>\n</html>\n";
  return o;
}

}  // namespace kp
