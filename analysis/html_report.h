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

// A boxed statement at the top of a section: the verdict, a warning.
struct HtmlCallout {
  std::string text;
  std::string tone = "neutral";  // "pass", "fail", "warn" or "neutral" (CSS class; pass/fail also in print)
};

struct HtmlSection {
  std::string title;
  std::vector<HtmlCallout> callouts;    // before the paragraphs
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

// Who made the page and when: shown in the page's header line and footer.
struct HtmlPageMeta {
  std::string subtitle;      // one line under the title ("Cell LN-2500 #1 · rated capacity")
  std::string generator;     // "Kneepoint 0.2.0 (commit abc1234)"
  std::string generated_at;  // ISO 8601 UTC
};

// The page: responsive (plots as wide as the text), printable (A4 or Letter
// margins, no table or plot split across pages, header repeated on each page's
// tables), self-contained.
std::string RenderHtmlPage(const std::string& title, const std::vector<HtmlSection>& sections, const HtmlPageMeta& meta = {});

// A figure cell: shown with `decimals`, exact value in data-value. A value
// that rounds to zero is shown without a sign ("0.0", never "-0.0").
HtmlCell FigureCell(const std::string& key, double value, int decimals, const std::string& unit = "");
HtmlCell TextCell(const std::string& text);
// A duration shown as h:mm:ss, exact seconds in data-value.
HtmlCell DurationCell(const std::string& key, double seconds);

}  // namespace kp
