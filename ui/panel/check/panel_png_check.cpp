// Checks a panel screenshot against the database it was drawn from: size, not
// blank, the voltage trace's colour where the stored samples map to inside the
// plot rectangle (and not far away from them), and the cutoff line at its level.
// Usage: kp_panel_png_check PNG LAYOUT_JSON DB RUN WIDTH HEIGHT
// Second form, the elements of any view (live or compare, either palette):
//   kp_panel_png_check --elements PNG LAYOUT_JSON WIDTH HEIGHT BADGE MIN_PLOTS
// every plot the layout lists shows its background and, inside its frame,
// drawn pixels and the colour of each of its traces; at least MIN_PLOTS plots;
// and the state badge reads BADGE ("-": no badge expected) in its colour.
// An optional MIN_TILES (the bench overview): at least that many tiles, each
// filled with the plot background and showing its state colour (its badge and
// frame).
#include <stb_image.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <iostream>
#include <set>
#include <string>

#include <nlohmann/json.hpp>

#include "drivers/clock.h"
#include "rig/store.h"

namespace {

struct Image {
  int w = 0, h = 0;
  unsigned char* px = nullptr;
  const unsigned char* At(int x, int y) const { return px + 3 * (static_cast<size_t>(y) * w + x); }
};

bool Near(const unsigned char* p, const nlohmann::json& rgb, int tol) {
  int d = std::abs(p[0] - rgb[0].get<int>()) + std::abs(p[1] - rgb[1].get<int>()) + std::abs(p[2] - rgb[2].get<int>());
  return d <= tol;
}

bool ColourInBox(const Image& img, double cx, double cy, int r, const nlohmann::json& rgb, int tol) {
  for (int y = static_cast<int>(cy) - r; y <= static_cast<int>(cy) + r; ++y)
    for (int x = static_cast<int>(cx) - r; x <= static_cast<int>(cx) + r; ++x)
      if (x >= 0 && y >= 0 && x < img.w && y < img.h && Near(img.At(x, y), rgb, tol)) return true;
  return false;
}

int Fail(const std::string& why) {
  std::cerr << "panel screenshot check FAILED: " << why << "\n";
  return 1;
}

}  // namespace

int CountNear(const Image& img, int x0, int y0, int x1, int y1, const nlohmann::json& rgb, int tol, int* total) {
  int n = 0, all = 0;
  for (int y = std::max(0, y0); y < std::min(img.h, y1); ++y)
    for (int x = std::max(0, x0); x < std::min(img.w, x1); ++x) {
      ++all;
      if (Near(img.At(x, y), rgb, tol)) ++n;
    }
  if (total) *total = all;
  return n;
}

// A whole number from the command line; -1 when it is not one.
long WholeNumber(const char* text) {
  char* end = nullptr;
  long v = std::strtol(text, &end, 10);
  return (end == text || *end != '\0') ? -1 : v;
}

int CheckElements(int argc, char** argv) {
  if (argc != 8 && argc != 9) return Fail("usage: kp_panel_png_check --elements PNG LAYOUT_JSON WIDTH HEIGHT BADGE MIN_PLOTS [MIN_TILES]");
  Image img;
  int comp = 0;
  img.px = stbi_load(argv[2], &img.w, &img.h, &comp, 3);
  if (!img.px) return Fail(std::string("cannot read ") + argv[2]);
  if (img.w != WholeNumber(argv[4]) || img.h != WholeNumber(argv[5])) return Fail("unexpected picture size");
  std::ifstream lf(argv[3]);
  nlohmann::json lay = nlohmann::json::parse(lf, nullptr, false);
  if (lay.is_discarded() || !lay.contains("plots")) return Fail("cannot parse layout json");
  const std::string want_badge = argv[6];
  const long min_plots_arg = WholeNumber(argv[7]);
  if (min_plots_arg < 0) return Fail(std::string("MIN_PLOTS must be a whole number, not ") + argv[7]);
  const size_t min_plots = static_cast<size_t>(min_plots_arg);
  const auto& bg = lay["plot_bg_rgb"];
  if (lay["plots"].size() < min_plots)
    return Fail("only " + std::to_string(lay["plots"].size()) + " plots drawn, expected " + argv[7]);
  for (const auto& p : lay["plots"]) {
    const std::string name = p["name"];
    const int x0 = static_cast<int>(p["x0"].get<double>()) + 2, y0 = static_cast<int>(p["y0"].get<double>()) + 2;
    const int x1 = static_cast<int>(p["x1"].get<double>()) - 2, y1 = static_cast<int>(p["y1"].get<double>()) - 2;
    if (x1 - x0 < 100 || y1 - y0 < 40) return Fail("plot '" + name + "' is too small");
    int total = 0;
    const int bg_px = CountNear(img, x0, y0, x1, y1, bg, 6, &total);
    // The palette's background fills most of the frame...
    if (bg_px < total / 3) return Fail("plot '" + name + "': its background colour covers only " + std::to_string(bg_px) + " px");
    // ...and something is drawn on it.
    const int ink = total - bg_px;
    std::cout << "plot '" << name << "': " << ink << " drawn px of " << total;
    if (ink < total / 200) return Fail("plot '" + name + "' is empty");
    // Trace colours are counted outside the legend (its colour swatches
    // alone must not pass for a drawn trace).
    const int lx1 = static_cast<int>(p.value("legend_x1", 0.0)) + 1, ly1 = static_cast<int>(p.value("legend_y1", 0.0)) + 1;
    for (const auto& rgb : p["traces"]) {
      const int n = CountNear(img, x0, y0, x1, y1, rgb, 40, nullptr) - CountNear(img, x0, y0, std::min(lx1, x1), std::min(ly1, y1), rgb, 40, nullptr);
      std::cout << ", trace " << rgb.dump() << ": " << n << " px";
      if (n < 30) return Fail("plot '" + name + "': trace colour " + rgb.dump() + " not drawn");
    }
    std::cout << "\n";
  }
  if (want_badge == "-") {
    if (lay.contains("badge")) return Fail("a state badge was drawn where none was expected");
  } else {
    if (!lay.contains("badge")) return Fail("no state badge drawn, expected " + want_badge);
    const auto& b = lay["badge"];
    if (b["text"] != want_badge) return Fail("badge reads " + b["text"].get<std::string>() + ", expected " + want_badge);
    int total = 0;
    const int n = CountNear(img, static_cast<int>(b["x0"].get<double>()), static_cast<int>(b["y0"].get<double>()),
                            static_cast<int>(b["x1"].get<double>()), static_cast<int>(b["y1"].get<double>()), b["rgb"], 12, &total);
    std::cout << "badge " << want_badge << ": " << n << " of " << total << " px in its colour\n";
    if (total < 100 || n < total / 3) return Fail("badge colour missing where the badge was drawn");
  }
  if (argc == 9) {
    const long min_tiles = WholeNumber(argv[8]);
    if (min_tiles < 0) return Fail(std::string("MIN_TILES must be a whole number, not ") + argv[8]);
    const auto tiles = lay.value("tiles", nlohmann::json::array());
    if (static_cast<long>(tiles.size()) < min_tiles)
      return Fail("only " + std::to_string(tiles.size()) + " tiles drawn, expected " + argv[8]);
    for (const auto& t : tiles) {
      const std::string slot = t["text"];
      const int x0 = static_cast<int>(t["x0"].get<double>()), y0 = static_cast<int>(t["y0"].get<double>());
      const int x1 = static_cast<int>(t["x1"].get<double>()), y1 = static_cast<int>(t["y1"].get<double>());
      if (x1 - x0 < 80 || y1 - y0 < 60 || x0 < 0 || y0 < 0 || x1 > img.w || y1 > img.h)
        return Fail("tile " + slot + " is too small or outside the picture");
      int total = 0;
      const int bg_px = CountNear(img, x0 + 3, y0 + 3, x1 - 3, y1 - 3, bg, 6, &total);
      const int state_px = CountNear(img, x0, y0, x1, y1, t["rgb"], 12, nullptr);
      std::cout << "tile " << slot << ": " << bg_px << " of " << total << " px background, " << state_px << " px in its state colour\n";
      if (bg_px < total / 3) return Fail("tile " + slot + ": its background is missing");
      if (bg_px > total - total / 100) return Fail("tile " + slot + " is empty");
      if (state_px < 300) return Fail("tile " + slot + ": its state colour (badge, frame) is missing");
    }
  }
  std::cout << "panel elements check passed (" << argv[2] << ")\n";
  stbi_image_free(img.px);
  return 0;
}

int main(int argc, char** argv) {
  if (argc > 1 && std::string(argv[1]) == "--elements") return CheckElements(argc, argv);
  if (argc != 7) return Fail("usage: kp_panel_png_check PNG LAYOUT_JSON DB RUN WIDTH HEIGHT");
  Image img;
  int comp = 0;
  img.px = stbi_load(argv[1], &img.w, &img.h, &comp, 3);
  if (!img.px) return Fail(std::string("cannot read ") + argv[1]);
  int want_w = static_cast<int>(std::strtol(argv[5], nullptr, 10));
  int want_h = static_cast<int>(std::strtol(argv[6], nullptr, 10));
  if (img.w != want_w || img.h != want_h)
    return Fail("size " + std::to_string(img.w) + "x" + std::to_string(img.h) + ", expected " + argv[5] + "x" + argv[6]);

  // Not blank: many distinct colours, no colour covering almost everything.
  std::set<int> colours;
  for (int i = 0; i < img.w * img.h; i += 7) {
    const unsigned char* p = img.px + 3 * i;
    colours.insert(p[0] << 16 | p[1] << 8 | p[2]);
  }
  if (colours.size() < 40) return Fail("image looks blank (" + std::to_string(colours.size()) + " colours)");

  std::ifstream lf(argv[2]);
  nlohmann::json lay = nlohmann::json::parse(lf, nullptr, false);
  if (lay.is_discarded()) return Fail("cannot parse layout json");
  const auto& plot = lay["voltage_plot"];
  double x0 = plot["x0"], y0 = plot["y0"], x1 = plot["x1"], y1 = plot["y1"];
  double t_lo = plot["t_lo"], t_hi = plot["t_hi"], v_lo = plot["v_lo"], v_hi = plot["v_hi"];
  const auto& vrgb = lay["voltage_rgb"];
  if (!(x1 - x0 > 200 && y1 - y0 > 100)) return Fail("voltage plot rectangle too small");

  kp::SteadyClock wall;
  kp::Store::Options o;
  o.create = false;
  auto store = kp::Store::Open(argv[3], wall, o);
  if (!store.ok()) return Fail("cannot open database");
  auto samples = (*store)->LoadSamples(std::strtoll(argv[4], nullptr, 10));
  if (!samples.ok() || samples->size() < 100) return Fail("run has too few samples");

  auto px_of = [&](double t) { return x0 + (t - t_lo) / (t_hi - t_lo) * (x1 - x0); };
  auto py_of = [&](double v) { return y1 - (v - v_lo) / (v_hi - v_lo) * (y1 - y0); };
  int probes = 0, hits = 0, false_hits = 0;
  size_t n = samples->size();
  for (int k = 1; k < 40; ++k) {
    const kp::Sample& s = (*samples)[n * static_cast<size_t>(k) / 40];
    if (s.t_s < t_lo || s.t_s > t_hi) continue;
    double px = px_of(s.t_s), py = py_of(s.voltage_v);
    if (py < y0 + 4 || py > y1 - 4) continue;
    ++probes;
    if (ColourInBox(img, px, py, 3, vrgb, 60)) ++hits;
    // A point well away from the trace (a fifth of the plot height) must not show it.
    double away = py - 0.2 * (y1 - y0) > y0 + 4 ? py - 0.2 * (y1 - y0) : py + 0.2 * (y1 - y0);
    if (ColourInBox(img, px, away, 2, vrgb, 60)) ++false_hits;
  }
  std::cout << "voltage trace: " << hits << "/" << probes << " probes hit, " << false_hits << " off-trace probes coloured\n";
  if (probes < 20) return Fail("too few samples map inside the plot");
  if (hits < probes * 9 / 10) return Fail("voltage trace missing where the samples map");
  if (false_hits > probes / 10) return Fail("voltage colour found away from the trace");

  if (lay.contains("cutoff_v")) {
    double cy = py_of(lay["cutoff_v"].get<double>());
    int line_hits = 0, line_probes = 0;
    for (int k = 1; k < 20; ++k) {
      double px = x0 + (x1 - x0) * k / 20.0;
      ++line_probes;
      if (ColourInBox(img, px, cy, 2, lay["cutoff_rgb"], 60)) ++line_hits;
    }
    std::cout << "cutoff line: " << line_hits << "/" << line_probes << "\n";
    if (line_hits < line_probes / 2) return Fail("cutoff line not drawn at its level");
  }
  std::cout << "panel screenshot check passed (" << img.w << "x" << img.h << ", " << colours.size() << " colours)\n";
  stbi_image_free(img.px);
  return 0;
}
