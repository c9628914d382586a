// The panel's palettes checked with published formulas: WCAG 2.x contrast
// of every channel colour against its plot background, and the distance
// between channel colours (and the first four compare colours) as seen with
// simulated protanopia, deuteranopia and tritanopia (Machado et al. 2009).
#include "ui/panel/colour_math.h"

#include <gtest/gtest.h>

#include <cmath>
#include <string>
#include <utility>
#include <vector>

#include "ui/panel/theme.h"

namespace kp::ui {
namespace {

Rgb8 Of(ImU32 c) {
  int rgb[3];
  UnpackRgb(c, rgb);
  return {rgb[0], rgb[1], rgb[2]};
}

std::string Name(Rgb8 c) { return "(" + std::to_string(c[0]) + "," + std::to_string(c[1]) + "," + std::to_string(c[2]) + ")"; }

// Reference values of the formulas themselves.
TEST(ColourMath, WcagContrastReferenceValues) {
  // WCAG 2.x, definition of contrast ratio: black on white is 21:1, a colour on itself 1:1.
  EXPECT_NEAR(ContrastRatio({0, 0, 0}, {255, 255, 255}), 21.0, 1e-9);
  EXPECT_NEAR(ContrastRatio({120, 30, 200}, {120, 30, 200}), 1.0, 1e-12);
  // Relative luminance of sRGB primaries = the coefficients of the WCAG formula.
  EXPECT_NEAR(RelativeLuminance({255, 0, 0}), 0.2126, 1e-9);
  EXPECT_NEAR(RelativeLuminance({0, 255, 0}), 0.7152, 1e-9);
  EXPECT_NEAR(RelativeLuminance({0, 0, 255}), 0.0722, 1e-9);
  // #777777 on white is the usual example of just failing 4.5:1: 4.48:1 (from memory).
  EXPECT_NEAR(ContrastRatio({0x77, 0x77, 0x77}, {255, 255, 255}), 4.48, 0.01);
}

TEST(ColourMath, CvdSimulationReferenceValues) {
  // Machado et al. 2009 matrices keep neutrals neutral (each row sums to 1)...
  for (Dichromacy k : {Dichromacy::kProtanopia, Dichromacy::kDeuteranopia, Dichromacy::kTritanopia}) {
    Rgb8 grey = SimulateCvd({128, 128, 128}, k);
    for (int c : grey) EXPECT_NEAR(c, 128, 1);
  }
  // ...and fold red-green differences: pure red and a green of the same
  // lightness look alike to a deuteranope but not to normal vision.
  const Rgb8 red = {200, 60, 40}, green = {90, 140, 40};
  EXPECT_GT(DeltaE76(red, green), 40.0);
  EXPECT_LT(DeltaE76(SimulateCvd(red, Dichromacy::kDeuteranopia), SimulateCvd(green, Dichromacy::kDeuteranopia)), 15.0);
  // CIELAB of white is L* 100, a* = b* = 0 (D65 white point, CIE 15).
  Vec3 w = Lab({255, 255, 255});
  EXPECT_NEAR(w[0], 100.0, 0.05);
  EXPECT_NEAR(w[1], 0.0, 0.1);
  EXPECT_NEAR(w[2], 0.0, 0.1);
}

// Thresholds: WCAG 2.1 success criterion 1.4.11 (non-text contrast, 3:1) for
// traces and lines, 1.4.3 (text, 4.5:1) for tick labels and badge words;
// ΔE*ab >= 20 between colours that must be told apart (>= 12 for tritanopia,
// the rarest) (common practice, no source).
void CheckPalette(const Theme& t, const char* which) {
  SCOPED_TRACE(which);
  const Rgb8 bg = Of(t.plot_bg);
  std::vector<std::pair<std::string, Rgb8>> channels = {
      {"voltage", Of(t.voltage)}, {"current", Of(t.current)}, {"temperature", Of(t.temperature)}};
  for (const auto& [name, c] : channels) EXPECT_GE(ContrastRatio(c, bg), 3.0) << name << " " << Name(c);
  EXPECT_GE(ContrastRatio(Of(t.cutoff), bg), 3.0) << "cutoff";
  EXPECT_GE(ContrastRatio(Of(t.tick_text), bg), 4.5) << "tick text";
  for (ImU32 s : {t.ok, t.caution, t.alarm, t.idle, t.interrupted})
    EXPECT_GE(ContrastRatio(Of(t.badge_text), Of(s)), 4.5) << "badge " << Name(Of(s));

  // Pairs that must stay apart: the channels, the cutoff against the voltage
  // it is drawn over, and the first four compare colours.
  std::vector<std::pair<Rgb8, Rgb8>> pairs;
  for (size_t i = 0; i < channels.size(); ++i)
    for (size_t j = i + 1; j < channels.size(); ++j) pairs.push_back({channels[i].second, channels[j].second});
  pairs.push_back({Of(t.voltage), Of(t.cutoff)});
  for (int i = 0; i < 4; ++i) {
    EXPECT_GE(ContrastRatio(Of(t.Series(i)), bg), 3.0) << "series " << i;
    for (int j = i + 1; j < 4; ++j) pairs.push_back({Of(t.Series(i)), Of(t.Series(j))});
  }
  for (const auto& [a, b] : pairs) {
    EXPECT_GE(DeltaE76(a, b), 20.0) << Name(a) << " vs " << Name(b);
    EXPECT_GE(DeltaE76(SimulateCvd(a, Dichromacy::kProtanopia), SimulateCvd(b, Dichromacy::kProtanopia)), 20.0)
        << "protanopia " << Name(a) << " vs " << Name(b);
    EXPECT_GE(DeltaE76(SimulateCvd(a, Dichromacy::kDeuteranopia), SimulateCvd(b, Dichromacy::kDeuteranopia)), 20.0)
        << "deuteranopia " << Name(a) << " vs " << Name(b);
    EXPECT_GE(DeltaE76(SimulateCvd(a, Dichromacy::kTritanopia), SimulateCvd(b, Dichromacy::kTritanopia)), 12.0)
        << "tritanopia " << Name(a) << " vs " << Name(b);
  }
}

TEST(Palette, NightReadsForColourBlindEyes) { CheckPalette(Theme::Night(), "night"); }
TEST(Palette, DayReadsForColourBlindEyes) { CheckPalette(Theme::Day(), "day"); }

// Hue angle h_ab in CIELAB, degrees.
double Hue(Rgb8 c) {
  Vec3 l = Lab(c);
  double h = std::atan2(l[2], l[1]) * 180.0 / M_PI;
  return h < 0 ? h + 360.0 : h;
}

double HueDistance(double a, double b) {
  double d = std::fabs(a - b);
  return d > 180.0 ? 360.0 - d : d;
}

// The channels are not the yellow / cyan / magenta trio of bench instruments:
// each channel's hue stays at least 25° from all three.
TEST(Palette, ChannelsAreNotYellowCyanMagenta) {
  const double yellow = Hue({255, 255, 0}), cyan = Hue({0, 255, 255}), magenta = Hue({255, 0, 255});
  for (const Theme& t : {Theme::Night(), Theme::Day()})
    for (ImU32 c : {t.voltage, t.current, t.temperature})
      for (double h : {yellow, cyan, magenta}) EXPECT_GE(HueDistance(Hue(Of(c)), h), 25.0) << Name(Of(c));
}

}  // namespace
}  // namespace kp::ui
