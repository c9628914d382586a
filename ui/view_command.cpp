#include "ui/view_command.h"

#include "rig/config.h"
#include "rig/lab/pg.h"

#include <filesystem>
#include <fstream>
#include <iostream>
#include <sstream>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "ui/panel/gl_window.h"
#include "ui/panel/panel.h"
#include "ui/panel/run_feed.h"

namespace kp::ui {
namespace {

struct ViewOptions {
  std::string db = kDefaultDatabase;  // or the configuration file's (rig/config.h)
  int64_t run = 0;
  std::string compare;
  std::string tab = "live";
  std::string screenshot;
  std::string size = "1600x1000";
  int frames = 3;
  std::string layout_out;
  bool light = false;
  float scale = 0.0f;
  std::string new_run;
};

Status ParseSize(const std::string& s, int* w, int* h) {
  char x = 0;
  std::istringstream in(s);
  if (!(in >> *w >> x >> *h) || (x != 'x' && x != 'X') || *w < 320 || *h < 240 || *w > 8192 || *h > 8192)
    return InvalidInput(fmt::format("--size '{}': expected WIDTHxHEIGHT, e.g. 1600x1000 (320x240 to 8192x8192)", s));
  return Status::Ok();
}

Status ParseIds(const std::string& s, std::set<int64_t>* out) {
  std::string item;
  std::istringstream in(s);
  while (std::getline(in, item, ',')) {
    if (item.empty()) continue;
    char* end = nullptr;
    long long v = std::strtoll(item.c_str(), &end, 10);
    if (*end != '\0' || v <= 0) return InvalidInput(fmt::format("--compare: '{}' is not a run id", item));
    out->insert(v);
  }
  return Status::Ok();
}

nlohmann::json Rgb(ImU32 c) {
  int rgb[3];
  UnpackRgb(c, rgb);
  return {rgb[0], rgb[1], rgb[2]};
}

Status WriteLayout(const std::string& path, const Panel& panel) {
  const PlotResult& p = panel.voltage_plot();
  nlohmann::json j;
  j["voltage_plot"] = {{"x0", p.rect_min.x}, {"y0", p.rect_min.y}, {"x1", p.rect_max.x}, {"y1", p.rect_max.y},
                       {"t_lo", p.x.lo},     {"t_hi", p.x.hi},     {"v_lo", p.y[0].lo},  {"v_hi", p.y[0].hi}};
  // Every plot drawn, with its background and trace colours, and the state
  // badge: the headless check looks for each of them in the picture.
  j["plot_bg_rgb"] = Rgb(panel.theme().plot_bg);
  j["plots"] = nlohmann::json::array();
  for (const DrawnPlot& d : panel.plots()) {
    nlohmann::json traces = nlohmann::json::array();
    for (ImU32 c : d.trace_colours) traces.push_back(Rgb(c));
    j["plots"].push_back({{"name", d.name},
                          {"x0", d.result.rect_min.x},
                          {"y0", d.result.rect_min.y},
                          {"x1", d.result.rect_max.x},
                          {"y1", d.result.rect_max.y},
                          {"x_title", d.result.x_title},
                          {"legend_x1", d.result.legend_max.x},
                          {"legend_y1", d.result.legend_max.y},
                          {"x_labels", d.result.x_labels},
                          {"traces", traces}});
  }
  if (panel.badge()) {
    const DrawnBadge& b = *panel.badge();
    j["badge"] = {{"text", b.text}, {"x0", b.min.x}, {"y0", b.min.y}, {"x1", b.max.x}, {"y1", b.max.y}, {"rgb", Rgb(b.colour)}};
  }
  j["tab"] = panel.tab() == Tab::kLive ? "live" : panel.tab() == Tab::kCompare ? "compare" : "bench";
  // The bench overview's tiles: box, state colour and slot.
  j["tiles"] = nlohmann::json::array();
  for (const DrawnBadge& t : panel.tiles())
    j["tiles"].push_back({{"text", t.text}, {"x0", t.min.x}, {"y0", t.min.y}, {"x1", t.max.x}, {"y1", t.max.y}, {"rgb", Rgb(t.colour)}});
  j["voltage_rgb"] = Rgb(panel.theme().voltage);
  j["cutoff_rgb"] = Rgb(panel.theme().cutoff);
  if (panel.selected()) {
    auto it = panel.state().watched.find(*panel.selected());
    if (it != panel.state().watched.end() && it->second.limits.cutoff_v) j["cutoff_v"] = *it->second.limits.cutoff_v;
  }
  std::ofstream out(path);
  out << j.dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
  if (!out) return IoError("cannot write " + path);
  return Status::Ok();
}

int RunView(const ViewOptions& o) {
  int w = 0, h = 0;
  if (Status st = ParseSize(o.size, &w, &h); !st.ok()) return cli::Fail(st);
  PanelOptions po;
  po.db_path = o.db;
  if (o.run > 0) po.run_id = o.run;
  if (Status st = ParseIds(o.compare, &po.compare); !st.ok()) return cli::Fail(st);
  if (o.tab == "compare") po.tab = Tab::kCompare;
  else if (o.tab == "bench") po.tab = Tab::kBench;
  else if (o.tab != "live") return cli::Fail(InvalidInput(fmt::format("--tab '{}': expected live, compare or bench", o.tab)));
  po.dark = !o.light;
  po.new_run_procedure = o.new_run;
  std::error_code ec;
  if (!pg::IsPostgresUrl(o.db) && !std::filesystem::exists(o.db, ec))
    return cli::Fail(NotFound(fmt::format("database '{}' not found (create one with `kneepoint demo`)", o.db)));
  if (o.frames < 1) return cli::Fail(InvalidInput("--frames must be at least 1"));

  bool headless = !o.screenshot.empty();
  GlWindow::Options wo;
  wo.width = w;
  wo.height = h;
  wo.title = "Kneepoint — " + o.db;
  wo.vsync = !headless;
  auto window = GlWindow::Open(wo);
  if (!window.ok()) return cli::Fail(window.status());
  GlWindow& win = **window;
  po.scale = o.scale > 0.0f ? o.scale : win.ContentScale();
  Fonts fonts = LoadFonts(po.scale);

  RunFeed::Options fo;
  fo.db_path = o.db;
  if (!headless) fo.on_news = [] { GlWindow::Wake(); };  // new data ends the idle wait
  RunFeed feed(fo);
  Panel panel(feed, po, fonts);

  auto frame = [&] {
    win.BeginFrame();
    panel.Frame();
    win.Render();
    win.Rasterise();
  };

  if (headless) {
    // The pointer of a headless display sits mid-screen: keep it out of the picture.
    ImGui::GetIO().ConfigFlags |= ImGuiConfigFlags_NoMouse;
    frame();  // tells the reader which runs to load
    if (!feed.WaitCaughtUp(60.0)) return cli::Fail(TimeoutError("the database took too long to read"));
    for (int i = 0; i < 100000; ++i) {  // take in long runs (bounded work per frame)
      frame();
      win.Present();
      if (panel.state().Backlog() == 0) break;
    }
    // The plots may have asked for the raw samples of what they show: take them in.
    if (!feed.WaitCaughtUp(60.0)) return cli::Fail(TimeoutError("the database took too long to read"));
    frame();
    win.Present();
    for (int i = 0; i < o.frames; ++i) {
      frame();
      if (i + 1 < o.frames) win.Present();
    }
    if (o.run > 0) {
      const auto& runs = panel.state().runs;
      if (std::none_of(runs.begin(), runs.end(), [&](const RunListRow& r) { return r.id == o.run; }))
        return cli::Fail(NotFound(fmt::format("no run {} in {}", o.run, o.db)));
    }
    if (Status st = win.SavePng(o.screenshot); !st.ok()) return cli::Fail(st);
    win.Present();
    if (!o.layout_out.empty())
      if (Status st = WriteLayout(o.layout_out, panel); !st.ok()) return cli::Fail(st);
    std::cout << "wrote " << o.screenshot << " (" << w << "x" << h << ")\n";
    return cli::kExitOk;
  }
  // Frames are drawn on input and when the feed brings something new (it
  // wakes the wait), plus a few after each so ImGui settles hover and click
  // states; otherwise the loop sleeps: an idle panel costs no redraws, so the
  // software renderer stays off an idle bench PC. While a plan check runs in
  // a child process the loop looks every 0.2 s for its result.
  int settle_frames = 3;
  while (!win.ShouldClose()) {
    const bool busy = panel.state().Backlog() > 0;  // a long run loads without waiting
    if (busy || settle_frames > 0) {
      win.WaitEvents(0.0);
      if (!busy) --settle_frames;
    } else {
      win.WaitEvents(panel.Waiting() ? 0.2 : 30.0);
      settle_frames = 3;
    }
    frame();
    win.Present();
  }
  return cli::kExitOk;
}

}  // namespace

void RegisterView(cli::CliRegistry& registry) {
  auto opt = std::make_shared<ViewOptions>();
  CLI::App* cmd = registry.Add("view", "Open the live panel: watch, start and stop runs, compare them",
                               [opt] { return RunView(*opt); });
  cmd->add_option("--db", opt->db, "database file, or a lab database (postgresql://..., read only)")->capture_default_str();
  cmd->add_option("--run", opt->run, "run shown first (default: the newest)");
  cmd->add_option("--compare", opt->compare, "runs overlaid in the compare view, e.g. 1,2,3");
  cmd->add_option("--tab", opt->tab, "live, compare or bench (the overview of a multi-channel bench)")->capture_default_str();
  cmd->add_flag("--light", opt->light, "start in the light (day shift) theme");
  cmd->add_option("--scale", opt->scale, "font and spacing scale (default: the monitor's)");
  cmd->add_option("--new-run", opt->new_run, "open the start dialog for this procedure file (a folder: browse it)");
  cmd->add_option("--screenshot", opt->screenshot, "render, write this PNG and exit (headless use)");
  cmd->add_option("--size", opt->size, "window size WIDTHxHEIGHT")->capture_default_str();
  cmd->add_option("--frames", opt->frames, "frames rendered before a screenshot")->capture_default_str();
  cmd->add_option("--layout-out", opt->layout_out, "with --screenshot: write the voltage plot's placement as JSON");
}

}  // namespace kp::ui
