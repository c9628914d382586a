// The panel's two palettes ("night shift" dark slate, "day shift" paper),
// the project's own: ember voltage, periwinkle current and a sage (night) or
// teal (day) temperature, chosen for contrast against their background and
// for staying apart under simulated colour-blind vision (checked in
// tests/ui/palette_test.cpp). Also its fonts, sized for the monitor's content scale so the headline figures read
// across a lab. Call from the UI thread after ImGui::CreateContext.
#pragma once

#include <imgui.h>

namespace kp::ui {

struct Theme {
  bool dark = true;
  ImU32 window_bg, plot_bg, plot_frame, grid, tick_text, cursor;
  ImU32 voltage, current, temperature, charge;
  ImU32 cutoff, limit;
  // State colours: running, paused or held (load off, waiting), aborted,
  // completed, interrupted (runner gone, resumable). Badges draw them as
  // filled boxes with badge_text on top.
  ImU32 ok, caution, alarm, idle, interrupted, badge_text;
  ImU32 alarm_row, notice_row;     // event log backgrounds
  // Distinct colours for overlaid runs in the compare view.
  ImU32 Series(int i) const;
  static constexpr int kSeriesCount = 6;
  // A reading shown after the load went off: the colour faded towards the background.
  ImU32 Dimmed(ImU32 c) const;
  static Theme Night();
  static Theme Day();
};

struct Fonts {
  ImFont* body = nullptr;
  ImFont* big = nullptr;     // headline figures
  ImFont* medium = nullptr;  // section titles
};

// Loads DejaVu Sans when installed (ImGui's built-in font otherwise) at
// `scale` × the base sizes. Must run before the first NewFrame.
Fonts LoadFonts(float scale);
// Styles ImGui for `theme` and scales paddings by `scale`.
void ApplyTheme(const Theme& theme, float scale);

// RGB of a packed colour, for the headless check's layout file.
void UnpackRgb(ImU32 c, int rgb[3]);

}  // namespace kp::ui
