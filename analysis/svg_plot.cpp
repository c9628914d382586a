#include "analysis/svg_plot.h"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <limits>

namespace kp {
namespace {

constexpr const char* kPalette[] = {"#2a6f97", "#c8553d", "#588157", "#8e6c8a", "#d4a017", "#3d405b", "#e07a5f", "#219ebc"};

struct Range {
  double lo = std::numeric_limits<double>::infinity();
  double hi = -std::numeric_limits<double>::infinity();
  void Add(double v) {
    if (!std::isfinite(v)) return;
    lo = std::min(lo, v);
    hi = std::max(hi, v);
  }
  bool empty() const { return lo > hi; }
  void Pad() {
    if (empty()) lo = 0, hi = 1;
    if (hi - lo < 1e-12) {
      double m = std::max(std::abs(lo) * 0.05, 1e-3);
      lo -= m, hi += m;
    }
  }
};

std::string Tick(double v, double step) {
  // As many decimals as the step needs to be written exactly (0.025 needs 3),
  // so neighbouring ticks never share a label.
  int decimals = 0;
  while (decimals < 6) {
    double scaled = step * std::pow(10.0, decimals);
    if (std::abs(scaled - std::round(scaled)) < 1e-6 * std::max(1.0, scaled)) break;
    ++decimals;
  }
  if (std::abs(v) < step * 1e-6) v = 0.0;
  return fmt::format("{:.{}f}", v, decimals);
}

}  // namespace

std::string XmlEscape(std::string_view t) {
  std::string o;
  o.reserve(t.size());
  for (char c : t) {
    switch (c) {
      case '&':
        o += "&amp;";
        break;
      case '<':
        o += "&lt;";
        break;
      case '>':
        o += "&gt;";
        break;
      case '"':
        o += "&quot;";
        break;
      case '\'':
        o += "&#39;";
        break;
      default:
        o += c;
    }
  }
  return o;
}

std::vector<double> NiceTicks(double lo, double hi, int target) {
  std::vector<double> t;
  if (!(hi > lo)) return {lo};
  double raw = (hi - lo) / std::max(1, target);
  double mag = std::pow(10.0, std::floor(std::log10(raw)));
  double step = mag;
  for (double m : {1.0, 2.0, 2.5, 5.0, 10.0})
    if (m * mag >= raw) {
      step = m * mag;
      break;
    }
  for (double v = std::ceil(lo / step - 1e-9) * step; v <= hi + step * 1e-9; v += step) t.push_back(v);
  return t;
}

std::vector<size_t> ReducePoints(std::span<const double> y, size_t max_points) {
  std::vector<size_t> idx;
  size_t n = y.size();
  if (n <= max_points || max_points < 4) {
    idx.resize(n);
    for (size_t i = 0; i < n; ++i) idx[i] = i;
    return idx;
  }
  size_t buckets = max_points / 2;
  idx.push_back(0);
  for (size_t b = 0; b < buckets; ++b) {
    size_t from = 1 + b * (n - 2) / buckets, to = 1 + (b + 1) * (n - 2) / buckets;
    if (from >= to) continue;
    size_t lo = from, hi = from;
    for (size_t i = from; i < to; ++i) {
      if (y[i] < y[lo]) lo = i;
      if (y[i] > y[hi]) hi = i;
    }
    idx.push_back(std::min(lo, hi));
    if (lo != hi) idx.push_back(std::max(lo, hi));
  }
  idx.push_back(n - 1);
  return idx;
}

std::string RenderSvgPlot(const PlotSpec& p, int width, int height, size_t max_points) {
  if (p.height > 0) height = p.height;
  // Legend above the frame, in rows of entries laid out left to right.
  const double ml = 64, mr = 64, mb = 46;
  struct LegendSlot {
    double x, y;
  };
  std::vector<LegendSlot> slots;
  {
    double x = ml, y = 36;
    for (const PlotSeries& s : p.series) {
      double w = 34 + 6.5 * static_cast<double>(s.name.size() + (s.right_axis ? 14 : 0)) + 16;
      if (x + w > width - mr && x > ml) x = ml, y += 15;
      slots.push_back({x, y});
      x += w;
    }
  }
  const double mt = (slots.empty() ? 30.0 : slots.back().y + 10.0) + (p.marks.empty() ? 0.0 : 12.0);
  height = std::max(height, static_cast<int>(mt + mb + 60));
  const double pw = width - ml - mr, ph = height - mt - mb;
  Range xr, yr, y2r;
  bool has_right = false;
  for (const PlotSeries& s : p.series) {
    for (double v : s.x) xr.Add(v);
    for (double v : s.y) (s.right_axis ? y2r : yr).Add(v);
    has_right = has_right || s.right_axis;
  }
  // Reference levels and marks stay in view.
  for (const PlotLevel& l : p.levels) (l.right_axis ? y2r : yr).Add(l.value);
  for (const PlotMark& m : p.marks) xr.Add(m.x);
  xr.Pad();
  yr.Pad();
  y2r.Pad();
  const bool duration = p.x_axis == PlotAxis::kDuration;
  DurationTicks dt;
  auto x_ticks = [&] {
    if (!duration) return NiceTicks(xr.lo, xr.hi);
    dt = NiceDurationTicks(xr.lo, xr.hi);
    return dt.at_s;
  };
  auto xt = x_ticks();
  auto yt = NiceTicks(yr.lo, yr.hi);
  auto y2t = NiceTicks(y2r.lo, y2r.hi);
  // Extend ranges to the outer ticks for a tidy frame.
  auto widen = [](Range& r, const std::vector<double>& t) {
    if (t.size() >= 2) {
      double step = t[1] - t[0];
      r.lo = std::min(r.lo, t.front() - (t.front() > r.lo ? step : 0));
      r.hi = std::max(r.hi, t.back() + (t.back() < r.hi ? step : 0));
    }
  };
  widen(xr, xt);
  widen(yr, yt);
  widen(y2r, y2t);
  xt = x_ticks();
  yt = NiceTicks(yr.lo, yr.hi);
  y2t = NiceTicks(y2r.lo, y2r.hi);
  auto X = [&](double v) { return ml + (v - xr.lo) / (xr.hi - xr.lo) * pw; };
  auto Y = [&](double v, bool right) {
    const Range& r = right ? y2r : yr;
    return mt + ph - (v - r.lo) / (r.hi - r.lo) * ph;
  };
  std::string x_label = p.x_label;
  if (duration) x_label += " (" + (dt.format == "s" ? std::string("s") : dt.format) + ")";

  std::string o;
  o += fmt::format(
      "<svg xmlns=\"http://www.w3.org/2000/svg\" id=\"{}\" class=\"plot\" viewBox=\"0 0 {} {}\" "
      "preserveAspectRatio=\"xMidYMid meet\" role=\"img\" aria-label=\"{}\">\n",
      XmlEscape(p.id), width, height, XmlEscape(p.title));
  o += fmt::format("<title>{}</title>\n", XmlEscape(p.title));
  o += fmt::format("<rect x=\"{:.1f}\" y=\"{:.1f}\" width=\"{:.1f}\" height=\"{:.1f}\" fill=\"#fbfaf7\" stroke=\"#999\"/>\n", ml,
                   mt, pw, ph);
  o += fmt::format("<text x=\"{:.1f}\" y=\"18\" font-size=\"14\" text-anchor=\"middle\" font-weight=\"bold\">{}</text>\n",
                   ml + pw / 2, XmlEscape(p.title));
  double xstep = xt.size() >= 2 ? xt[1] - xt[0] : 1.0;
  for (double v : xt) {
    if (v < xr.lo - 1e-12 || v > xr.hi + 1e-12) continue;
    o += fmt::format("<line x1=\"{0:.1f}\" y1=\"{1:.1f}\" x2=\"{0:.1f}\" y2=\"{2:.1f}\" stroke=\"#ddd\"/>\n", X(v), mt, mt + ph);
    o += fmt::format("<text x=\"{:.1f}\" y=\"{:.1f}\" font-size=\"11\" text-anchor=\"middle\">{}</text>\n", X(v), mt + ph + 15,
                     duration ? FormatDurationTick(v, dt.format) : Tick(v, xstep));
  }
  double ystep = yt.size() >= 2 ? yt[1] - yt[0] : 1.0;
  for (double v : yt) {
    o += fmt::format("<line x1=\"{:.1f}\" y1=\"{:.1f}\" x2=\"{:.1f}\" y2=\"{:.1f}\" stroke=\"#ddd\"/>\n", ml, Y(v, false),
                     ml + pw, Y(v, false));
    o += fmt::format("<text x=\"{:.1f}\" y=\"{:.1f}\" font-size=\"11\" text-anchor=\"end\">{}</text>\n", ml - 5, Y(v, false) + 4,
                     Tick(v, ystep));
  }
  if (has_right) {
    double s2 = y2t.size() >= 2 ? y2t[1] - y2t[0] : 1.0;
    for (double v : y2t)
      o += fmt::format("<text x=\"{:.1f}\" y=\"{:.1f}\" font-size=\"11\" text-anchor=\"start\">{}</text>\n", ml + pw + 5,
                       Y(v, true) + 4, Tick(v, s2));
    o += fmt::format(
        "<text x=\"{0:.1f}\" y=\"{1:.1f}\" font-size=\"12\" text-anchor=\"middle\" transform=\"rotate(90 {0:.1f} "
        "{1:.1f})\">{2}</text>\n",
        width - 14.0, mt + ph / 2, XmlEscape(p.y2_label));
  }
  o += fmt::format("<text x=\"{:.1f}\" y=\"{:.1f}\" font-size=\"12\" text-anchor=\"middle\">{}</text>\n", ml + pw / 2,
                   height - 8.0, XmlEscape(x_label));
  o += fmt::format(
      "<text x=\"{0:.1f}\" y=\"{1:.1f}\" font-size=\"12\" text-anchor=\"middle\" transform=\"rotate(-90 {0:.1f} "
      "{1:.1f})\">{2}</text>\n",
      16.0, mt + ph / 2, XmlEscape(p.y_label));

  size_t colour = 0;
  size_t slot = 0;
  for (const PlotSeries& s : p.series) {
    const LegendSlot& at = slots[slot++];
    const char* c = kPalette[colour++ % std::size(kPalette)];
    size_t n = std::min(s.x.size(), s.y.size());
    auto idx = ReducePoints(std::span<const double>(s.y.data(), n), max_points);
    const char* stroke_width = s.thin ? "0.9" : "1.5";
    if (s.markers) {
      o += fmt::format("<g fill=\"{}\" class=\"series\" data-name=\"{}\">", c, XmlEscape(s.name));
      for (size_t i : idx) o += fmt::format("<circle cx=\"{:.1f}\" cy=\"{:.1f}\" r=\"3\"/>", X(s.x[i]), Y(s.y[i], s.right_axis));
      o += "</g>\n";
    } else if (!idx.empty()) {
      o += fmt::format(
          "<polyline class=\"series\" data-name=\"{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"{}\"{} points=\"",
          XmlEscape(s.name), c, stroke_width, s.right_axis ? " stroke-dasharray=\"5 3\"" : "");
      for (size_t i : idx) o += fmt::format("{:.1f},{:.1f} ", X(s.x[i]), Y(s.y[i], s.right_axis));
      o += "\"/>\n";
    }
    o += fmt::format("<line x1=\"{:.1f}\" y1=\"{:.1f}\" x2=\"{:.1f}\" y2=\"{:.1f}\" stroke=\"{}\" stroke-width=\"3\"{}/>", at.x,
                     at.y - 4, at.x + 24, at.y - 4, c, s.right_axis ? " stroke-dasharray=\"5 3\"" : "");
    o += fmt::format("<text x=\"{:.1f}\" y=\"{:.1f}\" font-size=\"11\">{}{}</text>\n", at.x + 28, at.y, XmlEscape(s.name),
                     s.right_axis ? " (right axis)" : "");
  }
  // Reference levels: dashed, labelled at the right end inside the frame.
  for (const PlotLevel& l : p.levels) {
    double y = Y(l.value, l.right_axis);
    o += fmt::format(
        "<line class=\"level\" data-name=\"{}\" x1=\"{:.1f}\" y1=\"{:.1f}\" x2=\"{:.1f}\" y2=\"{:.1f}\" stroke=\"#8a1c1c\" "
        "stroke-width=\"1\" stroke-dasharray=\"7 4\"/>\n",
        XmlEscape(l.label), ml, y, ml + pw, y);
    o += fmt::format("<text x=\"{:.1f}\" y=\"{:.1f}\" font-size=\"11\" text-anchor=\"end\" fill=\"#8a1c1c\">{}</text>\n",
                     ml + pw - 4, y - 4, XmlEscape(l.label));
  }
  // Marks: a vertical line through the frame, labelled above it.
  for (const PlotMark& m : p.marks) {
    double x = X(m.x);
    o += fmt::format(
        "<line class=\"mark\" data-name=\"{}\" x1=\"{:.1f}\" y1=\"{:.1f}\" x2=\"{:.1f}\" y2=\"{:.1f}\" stroke=\"#8a1c1c\" "
        "stroke-width=\"1.5\"/>\n",
        XmlEscape(m.label), x, mt, x, mt + ph);
    o += fmt::format("<text x=\"{:.1f}\" y=\"{:.1f}\" font-size=\"11\" text-anchor=\"{}\" fill=\"#8a1c1c\">{}</text>\n", x,
                     mt - 3, x > ml + pw * 0.7 ? "end" : "start", XmlEscape(m.label));
  }
  o += "</svg>\n";
  return o;
}

}  // namespace kp
