#include "ui/panel/theme.h"

#include <filesystem>

namespace kp::ui {

namespace {
constexpr ImU32 Rgb(int r, int g, int b, int a = 255) { return IM_COL32(r, g, b, a); }
}  // namespace

Theme Theme::Night() {
  Theme t;
  t.dark = true;
  t.window_bg = Rgb(26, 29, 36);
  t.plot_bg = Rgb(32, 36, 44);  // slate
  t.plot_frame = Rgb(84, 92, 108);
  t.grid = Rgb(50, 56, 68);
  t.tick_text = Rgb(190, 196, 206);
  t.cursor = Rgb(200, 205, 215, 160);
  t.voltage = Rgb(242, 142, 60);      // ember
  t.current = Rgb(104, 156, 255);     // periwinkle
  t.temperature = Rgb(170, 230, 200);  // sage
  t.charge = Rgb(236, 232, 220);
  t.cutoff = Rgb(230, 60, 70);
  t.limit = Rgb(200, 120, 130);
  t.ok = Rgb(96, 200, 130);
  t.caution = Rgb(236, 180, 80);
  t.alarm = Rgb(240, 96, 88);
  t.idle = Rgb(150, 170, 200);
  t.interrupted = Rgb(190, 150, 230);
  t.badge_text = Rgb(24, 27, 33);
  t.alarm_row = Rgb(110, 30, 36, 220);
  t.notice_row = Rgb(84, 68, 28, 200);
  return t;
}

Theme Theme::Day() {
  Theme t;
  t.dark = false;
  t.window_bg = Rgb(240, 239, 234);
  t.plot_bg = Rgb(252, 251, 247);  // paper
  t.plot_frame = Rgb(150, 150, 150);
  t.grid = Rgb(226, 225, 218);
  t.tick_text = Rgb(60, 60, 70);
  t.cursor = Rgb(40, 40, 40, 140);
  t.voltage = Rgb(200, 90, 0);       // burnt ember
  t.current = Rgb(30, 90, 200);      // ink blue
  t.temperature = Rgb(0, 125, 95);   // teal
  t.charge = Rgb(40, 40, 40);
  t.cutoff = Rgb(170, 0, 20);
  t.limit = Rgb(170, 80, 90);
  t.ok = Rgb(20, 130, 70);
  t.caution = Rgb(160, 100, 0);
  t.alarm = Rgb(190, 30, 30);
  t.idle = Rgb(70, 90, 130);
  t.interrupted = Rgb(110, 70, 170);
  t.badge_text = Rgb(255, 255, 255);
  t.alarm_row = Rgb(250, 200, 200, 255);
  t.notice_row = Rgb(250, 232, 190, 255);
  return t;
}

ImU32 Theme::Series(int i) const {
  // The first four stay apart under simulated protanopia and deuteranopia
  // (tests/ui/palette_test.cpp); later ones repeat hues at other lightness.
  static constexpr ImU32 kNight[kSeriesCount] = {Rgb(242, 142, 60),  Rgb(104, 156, 255), Rgb(236, 232, 220),
                                                 Rgb(190, 100, 180), Rgb(120, 200, 110), Rgb(160, 160, 170)};
  static constexpr ImU32 kDay[kSeriesCount] = {Rgb(200, 90, 0),   Rgb(30, 90, 200),  Rgb(40, 40, 40),
                                               Rgb(160, 50, 140), Rgb(40, 140, 60), Rgb(130, 130, 130)};
  return (dark ? kNight : kDay)[((i % kSeriesCount) + kSeriesCount) % kSeriesCount];
}

ImU32 Theme::Dimmed(ImU32 c) const {
  int a[3], b[3];
  UnpackRgb(c, a);
  UnpackRgb(plot_bg, b);
  // Halfway to the background: still legible, plainly not a live value.
  return Rgb((a[0] + b[0]) / 2, (a[1] + b[1]) / 2, (a[2] + b[2]) / 2);
}

Fonts LoadFonts(float scale) {
  ImGuiIO& io = ImGui::GetIO();
  Fonts f;
  const char* regular = "/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf";
  const char* bold = "/usr/share/fonts/truetype/dejavu/DejaVuSans-Bold.ttf";
  std::error_code ec;
  static const ImWchar kRanges[] = {0x0020, 0x00FF, 0x2013, 0x2014, 0x2022, 0x2022, 0x2026, 0x2026,
                                    0x2190, 0x2193, 0x2212, 0x2212, 0x25A0, 0x25A0, 0x25B2, 0x25BC, 0};
  if (std::filesystem::exists(regular, ec)) {
    f.body = io.Fonts->AddFontFromFileTTF(regular, 16.0f * scale, nullptr, kRanges);
    f.medium = io.Fonts->AddFontFromFileTTF(std::filesystem::exists(bold, ec) ? bold : regular, 20.0f * scale, nullptr, kRanges);
    f.big = io.Fonts->AddFontFromFileTTF(std::filesystem::exists(bold, ec) ? bold : regular, 40.0f * scale, nullptr, kRanges);
  }
  if (!f.body || !f.medium || !f.big) {
    io.Fonts->Clear();
    ImFontConfig cfg;
    cfg.SizePixels = 13.0f * scale;
    f.body = io.Fonts->AddFontDefault(&cfg);
    cfg.SizePixels = 18.0f * scale;
    f.medium = io.Fonts->AddFontDefault(&cfg);
    cfg.SizePixels = 36.0f * scale;
    f.big = io.Fonts->AddFontDefault(&cfg);
  }
  return f;
}

void ApplyTheme(const Theme& theme, float scale) {
  ImGuiStyle style;
  if (theme.dark) {
    ImGui::StyleColorsDark(&style);
    style.Colors[ImGuiCol_WindowBg] = ImColor(theme.window_bg);
    style.Colors[ImGuiCol_ChildBg] = ImColor(theme.window_bg);
    style.Colors[ImGuiCol_Header] = ImColor(52, 70, 100);
    style.Colors[ImGuiCol_HeaderHovered] = ImColor(66, 90, 130);
    style.Colors[ImGuiCol_Button] = ImColor(48, 62, 86);
    style.Colors[ImGuiCol_ButtonHovered] = ImColor(66, 86, 120);
    style.Colors[ImGuiCol_TableRowBgAlt] = ImColor(33, 37, 46);
  } else {
    ImGui::StyleColorsLight(&style);
    style.Colors[ImGuiCol_WindowBg] = ImColor(theme.window_bg);
    style.Colors[ImGuiCol_ChildBg] = ImColor(theme.window_bg);
    style.Colors[ImGuiCol_TableRowBgAlt] = ImColor(228, 228, 220);
    style.Colors[ImGuiCol_FrameBg] = ImColor(222, 224, 216);
    style.Colors[ImGuiCol_PopupBg] = ImColor(246, 246, 242);
  }
  style.WindowRounding = 0.0f;
  style.FrameRounding = 3.0f;
  style.ChildBorderSize = 0.0f;
  style.ScaleAllSizes(scale);
  ImGui::GetStyle() = style;
}

void UnpackRgb(ImU32 c, int rgb[3]) {
  rgb[0] = static_cast<int>((c >> IM_COL32_R_SHIFT) & 0xFF);
  rgb[1] = static_cast<int>((c >> IM_COL32_G_SHIFT) & 0xFF);
  rgb[2] = static_cast<int>((c >> IM_COL32_B_SHIFT) & 0xFF);
}

}  // namespace kp::ui
