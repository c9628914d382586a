// Colour arithmetic for checking the panel's palettes, free of any window:
// WCAG 2.x relative luminance and contrast ratio, simulated dichromat vision
// (protanopia, deuteranopia, tritanopia) and CIELAB distance. Used by the
// palette tests (tests/ui/colour_math_test.cpp); nothing here runs per frame.
#pragma once

#include <array>

namespace kp::ui {

using Rgb8 = std::array<int, 3>;      // sRGB, 0..255
using Vec3 = std::array<double, 3>;

// sRGB component (0..1) to linear light, IEC 61966-2-1 (the 0.04045 threshold;
// WCAG 2.x prints 0.03928, which gives the same result for 8-bit values).
double SrgbToLinear(double c);
double LinearToSrgb(double c);
Vec3 Linear(Rgb8 c);

// WCAG 2.x relative luminance: 0.2126 R + 0.7152 G + 0.0722 B on linear RGB.
double RelativeLuminance(Rgb8 c);
// WCAG 2.x contrast ratio (L1 + 0.05) / (L2 + 0.05), lighter over darker: 1..21.
double ContrastRatio(Rgb8 a, Rgb8 b);

enum class Dichromacy { kProtanopia, kDeuteranopia, kTritanopia };
// How `c` looks to a dichromat: Machado, Oliveira & Fernandes (2009), "A
// Physiologically-based Model for Simulation of Color Vision Deficiency", IEEE
// TVCG 15(6), precomputed matrices for severity 1.0, applied to linear RGB and
// clamped to the gamut.
Rgb8 SimulateCvd(Rgb8 c, Dichromacy kind);

// CIE 1976 L*a*b* (D65 white) of an sRGB colour, and the CIE76 distance ΔE*ab.
Vec3 Lab(Rgb8 c);
double DeltaE76(Rgb8 a, Rgb8 b);

}  // namespace kp::ui
