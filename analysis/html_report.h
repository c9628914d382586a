// Self-contained XHTML report pages as plain strings (no I/O): headings,
// paragraphs, tables whose figure cells carry their exact value
// (data-figure / data-value attributes, so a page can be checked against the
// JSON), and inline SVG plots. Readable offline: no scripts, no external files.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "analysis/svg_plot.h"

namespace kp {

struct HtmlCell {
  std::string text;             // as shown
  std::string figure;           // data-figure key, empty for plain cells
  std::optional<double> value;  // exact value behind `text`
};

struct HtmlTable {
  std::string caption;
  std::vector<std::string> header;
  std::vector<std::vector<HtmlCell>> rows;
};

struct HtmlSection {
  std::string title;
  std::vector<std::string> paragraphs;  // plain text, escaped on output
  std::vector<HtmlTable> tables;
  std::vector<PlotSpec> plots;
  // Texts shown verbatim (line breaks and spacing kept), each under its caption.
  struct Preformatted {
    std::string caption;
    std::string text;
  };
  std::vector<Preformatted> preformatted;
};

std::string RenderHtmlPage(const std::string& title, const std::vector<HtmlSection>& sections);

// A figure cell: shown with `decimals`, exact value in data-value.
HtmlCell FigureCell(const std::string& key, double value, int decimals, const std::string& unit = "");
HtmlCell TextCell(const std::string& text);

}  // namespace kp
