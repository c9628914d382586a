// The panel's two palettes ("night shift" dark, "day shift" light) and its
// fonts, sized for the monitor's content scale so the headline figures read
// across a lab. Call from the UI thread after ImGui::CreateContext.
#pragma once

#include <imgui.h>

namespace kp::ui {

struct Theme {
  bool dark = true;
  ImU32 plot_bg, plot_frame, grid, tick_text, cursor;
  ImU32 voltage, current, temperature, charge;
  ImU32 cutoff, limit;
  ImU32 ok, caution, alarm, idle;  // state colours (running / near limit / aborted / finished)
  ImU32 alarm_row, notice_row;     // event log backgrounds
  // Distinct colours for overlaid runs in the compare view.
  ImU32 Series(int i) const;
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
