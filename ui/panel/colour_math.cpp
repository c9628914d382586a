#include "ui/panel/colour_math.h"

#include <algorithm>
#include <cmath>

namespace kp::ui {

double SrgbToLinear(double c) { return c <= 0.04045 ? c / 12.92 : std::pow((c + 0.055) / 1.055, 2.4); }

double LinearToSrgb(double c) {
  c = std::clamp(c, 0.0, 1.0);
  return c <= 0.0031308 ? c * 12.92 : 1.055 * std::pow(c, 1.0 / 2.4) - 0.055;
}

Vec3 Linear(Rgb8 c) { return {SrgbToLinear(c[0] / 255.0), SrgbToLinear(c[1] / 255.0), SrgbToLinear(c[2] / 255.0)}; }

double RelativeLuminance(Rgb8 c) {
  const Vec3 l = Linear(c);
  return 0.2126 * l[0] + 0.7152 * l[1] + 0.0722 * l[2];
}

double ContrastRatio(Rgb8 a, Rgb8 b) {
  double la = RelativeLuminance(a), lb = RelativeLuminance(b);
  if (la < lb) std::swap(la, lb);
  return (la + 0.05) / (lb + 0.05);
}

Rgb8 SimulateCvd(Rgb8 c, Dichromacy kind) {
  // Machado et al. 2009, severity 1.0 (rows act on linear R, G, B); the
  // coefficients as reproduced by open-source colour libraries, not checked
  // against the paper's own table. Each row sums to 1 (neutrals stay neutral).
  static constexpr double kProtan[3][3] = {
      {0.152286, 1.052583, -0.204868}, {0.114503, 0.786281, 0.099216}, {-0.003882, -0.048116, 1.051998}};
  static constexpr double kDeutan[3][3] = {
      {0.367322, 0.860646, -0.227968}, {0.280085, 0.672501, 0.047413}, {-0.011820, 0.042940, 0.968881}};
  static constexpr double kTritan[3][3] = {
      {1.255528, -0.076749, -0.178779}, {-0.078411, 0.930809, 0.147602}, {0.004733, 0.691367, 0.303900}};
  const double(*m)[3] = kind == Dichromacy::kProtanopia ? kProtan : kind == Dichromacy::kDeuteranopia ? kDeutan : kTritan;
  const Vec3 l = Linear(c);
  Rgb8 out;
  for (int r = 0; r < 3; ++r) {
    double v = m[r][0] * l[0] + m[r][1] * l[1] + m[r][2] * l[2];
    out[static_cast<size_t>(r)] = static_cast<int>(std::lround(LinearToSrgb(v) * 255.0));
  }
  return out;
}

Vec3 Lab(Rgb8 c) {
  // Linear sRGB to CIE XYZ (IEC 61966-2-1 primaries, D65), then CIE 1976 L*a*b*
  // (CIE 15) against the D65 white point.
  const Vec3 l = Linear(c);
  const double x = 0.4124 * l[0] + 0.3576 * l[1] + 0.1805 * l[2];
  const double y = 0.2126 * l[0] + 0.7152 * l[1] + 0.0722 * l[2];
  const double z = 0.0193 * l[0] + 0.1192 * l[1] + 0.9505 * l[2];
  auto f = [](double t) {
    constexpr double d = 6.0 / 29.0;
    return t > d * d * d ? std::cbrt(t) : t / (3.0 * d * d) + 4.0 / 29.0;
  };
  const double fx = f(x / 0.95047), fy = f(y / 1.0), fz = f(z / 1.08883);
  return {116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)};
}

double DeltaE76(Rgb8 a, Rgb8 b) {
  const Vec3 p = Lab(a), q = Lab(b);
  return std::sqrt((p[0] - q[0]) * (p[0] - q[0]) + (p[1] - q[1]) * (p[1] - q[1]) + (p[2] - q[2]) * (p[2] - q[2]));
}

}  // namespace kp::ui
