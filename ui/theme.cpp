#include "ui/theme.h"

#include <filesystem>

namespace kp::ui {

namespace {
constexpr ImU32 Rgb(int r, int g, int b, int a = 255) { return IM_COL32(r, g, b, a); }
}  // namespace

Theme Theme::Night() {
  Theme t;
  t.dark = true;
  t.plot_bg = Rgb(14, 18, 26);
  t.plot_frame = Rgb(70, 80, 98);
  t.grid = Rgb(40, 47, 60);
  t.tick_text = Rgb(170, 178, 192);
  t.cursor = Rgb(200, 205, 215, 160);
  t.voltage = Rgb(255, 196, 40);      // amber
  t.current = Rgb(64, 200, 236);      // glacier cyan
  t.temperature = Rgb(244, 108, 160);  // rose
  t.charge = Rgb(140, 220, 120);
  t.cutoff = Rgb(236, 60, 48);
  t.limit = Rgb(255, 136, 0);
  t.ok = Rgb(72, 210, 120);
  t.caution = Rgb(255, 190, 60);
  t.alarm = Rgb(255, 72, 64);
  t.idle = Rgb(120, 160, 230);
  t.alarm_row = Rgb(120, 20, 24, 220);
  t.notice_row = Rgb(90, 70, 10, 200);
  return t;
}

Theme Theme::Day() {
  Theme t;
  t.dark = false;
  t.plot_bg = Rgb(252, 252, 248);
  t.plot_frame = Rgb(150, 150, 150);
  t.grid = Rgb(225, 225, 220);
  t.tick_text = Rgb(60, 60, 70);
  t.cursor = Rgb(40, 40, 40, 140);
  t.voltage = Rgb(196, 104, 0);  // burnt orange
  t.current = Rgb(0, 110, 180);
  t.temperature = Rgb(190, 30, 110);
  t.charge = Rgb(40, 140, 40);
  t.cutoff = Rgb(210, 20, 20);
  t.limit = Rgb(230, 120, 0);
  t.ok = Rgb(20, 150, 70);
  t.caution = Rgb(200, 130, 0);
  t.alarm = Rgb(210, 30, 30);
  t.idle = Rgb(50, 90, 180);
  t.alarm_row = Rgb(255, 190, 190, 255);
  t.notice_row = Rgb(255, 236, 170, 255);
  return t;
}

ImU32 Theme::Series(int i) const {
  static constexpr ImU32 kNight[] = {Rgb(255, 196, 40), Rgb(64, 200, 236), Rgb(244, 108, 160), Rgb(140, 220, 120),
                                     Rgb(190, 150, 255), Rgb(255, 140, 90),  Rgb(200, 200, 200)};
  static constexpr ImU32 kDay[] = {Rgb(196, 104, 0),  Rgb(0, 110, 180),  Rgb(190, 30, 110), Rgb(40, 140, 40),
                                   Rgb(110, 60, 190), Rgb(200, 70, 20), Rgb(80, 80, 80)};
  constexpr int n = static_cast<int>(sizeof(kNight) / sizeof(kNight[0]));
  return (dark ? kNight : kDay)[((i % n) + n) % n];
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
    style.Colors[ImGuiCol_WindowBg] = ImColor(22, 27, 36);
    style.Colors[ImGuiCol_ChildBg] = ImColor(22, 27, 36);
    style.Colors[ImGuiCol_Header] = ImColor(52, 70, 100);
    style.Colors[ImGuiCol_HeaderHovered] = ImColor(66, 90, 130);
    style.Colors[ImGuiCol_Button] = ImColor(48, 62, 86);
    style.Colors[ImGuiCol_ButtonHovered] = ImColor(66, 86, 120);
    style.Colors[ImGuiCol_TableRowBgAlt] = ImColor(30, 36, 48);
  } else {
    ImGui::StyleColorsLight(&style);
    style.Colors[ImGuiCol_WindowBg] = ImColor(238, 238, 232);
    style.Colors[ImGuiCol_ChildBg] = ImColor(238, 238, 232);
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
