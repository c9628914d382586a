#include "analysis/integrate.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_interp.h>
#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <vector>

#include "analysis/metrics.h"

namespace kp {
namespace {

// Uneven sample times with a printed seed.
std::vector<Sample> UnevenSmooth(unsigned seed) {
  std::mt19937 rng(seed);
  std::uniform_real_distribution<double> dt(0.05, 7.0);
  std::vector<Sample> s;
  double t = 0;
  while (t < 3600) {
    double i = 1.0 + 0.4 * std::sin(t / 300.0) + 0.1 * std::cos(t / 17.0);
    double v = 3.9 - 0.2 * t / 3600.0;
    s.push_back({t, v, i, 25.0, t < 1800 ? 0 : 1});
    t += dt(rng);
  }
  return s;
}

// Independent reference: GSL's piecewise-linear interpolant integrated with
// gsl_interp_eval_integ (GNU Scientific Library) — the exact integral of the
// linear interpolant, which the trapezoid rule must reproduce on any spacing.
double GslLinearIntegral(const std::vector<double>& x, const std::vector<double>& y) {
  gsl_interp* in = gsl_interp_alloc(gsl_interp_linear, x.size());
  gsl_interp_init(in, x.data(), y.data(), x.size());
  gsl_interp_accel* acc = gsl_interp_accel_alloc();
  double r = gsl_interp_eval_integ(in, x.data(), y.data(), x.front(), x.back(), acc);
  gsl_interp_accel_free(acc);
  gsl_interp_free(in);
  return r;
}

TEST(Integrate, ChargeAndEnergyMatchGslOnUnevenSpacing) {
  const unsigned seed = 20261201;
  SCOPED_TRACE(::testing::Message() << "seed " << seed);
  auto s = UnevenSmooth(seed);
  std::vector<double> x, i, p;
  for (const Sample& v : s) x.push_back(v.t_s), i.push_back(v.current_a), p.push_back(v.current_a * v.voltage_v);
  double ref_mah = GslLinearIntegral(x, i) / 3.6;
  double ref_wh = GslLinearIntegral(x, p) / 3600.0;
  EXPECT_NEAR(DeliveredChargeMah(s), ref_mah, 1e-9 * ref_mah);
  EXPECT_NEAR(DeliveredEnergyWh(s), ref_wh, 1e-9 * ref_wh);
  // Per-step sums add up to the same integral.
  auto steps = FiguresPerStep(s);
  ASSERT_EQ(steps.size(), 2u);
  EXPECT_NEAR(steps[0].charge_mah + steps[1].charge_mah, ref_mah, 1e-9 * ref_mah);
  EXPECT_NEAR(steps[0].energy_wh + steps[1].energy_wh, ref_wh, 1e-9 * ref_wh);
}

// Against GSL's cubic-spline integral of the same smooth data: the trapezoid
// differs from a higher-order rule only by its O(h²) error (GSL reference,
// tolerance from the data's curvature).
TEST(Integrate, TrapezoidAgreesWithGslSplineToSecondOrder) {
  auto s = UnevenSmooth(7);
  std::vector<double> x, i;
  for (const Sample& v : s) x.push_back(v.t_s), i.push_back(v.current_a);
  gsl_interp* in = gsl_interp_alloc(gsl_interp_cspline, x.size());
  gsl_interp_init(in, x.data(), i.data(), x.size());
  gsl_interp_accel* acc = gsl_interp_accel_alloc();
  double spline_as = gsl_interp_eval_integ(in, x.data(), i.data(), x.front(), x.back(), acc);
  gsl_interp_accel_free(acc);
  gsl_interp_free(in);
  EXPECT_NEAR(DeliveredChargeMah(s), spline_as / 3.6, 1e-4 * spline_as / 3.6);
}

// A constant 1.8 A for 1 h is 1,800 mAh (Q = I·t, common practice, no source).
TEST(Integrate, ConstantCurrentPerStep) {
  std::vector<Sample> s;
  for (int k = 0; k <= 60; ++k) s.push_back({k * 10.0, 3.7, 0.0, 25, 0});
  for (int k = 1; k <= 3600; ++k) s.push_back({600.0 + k, 3.6, 1.8, 25, 1});
  // The first interval of step 1 ramps from 0 A (rest) to 1.8 A; count it out.
  auto steps = FiguresPerStep(s);
  ASSERT_EQ(steps.size(), 2u);
  EXPECT_EQ(steps[0].charge_mah, 0.0);
  EXPECT_FALSE(steps[0].discharging());
  EXPECT_NEAR(steps[1].charge_mah, 1800.0 - 0.5 * 1.8 / 3.6, 1e-9);
  EXPECT_NEAR(steps[1].mean_current_a, (1800.0 - 0.5 * 1.8 / 3.6) * 3.6 / 3600.0, 1e-12);
  EXPECT_EQ(steps[1].samples, 3600u);
  EXPECT_DOUBLE_EQ(steps[1].t_start_s, 601.0);
}

TEST(Integrate, GapsAreFlaggedOnlyWhereSpacingJumps) {
  std::vector<Sample> s;
  for (int k = 0; k < 100; ++k) s.push_back({k * 1.0, 3.7, 0.5, 25, 0});
  for (int k = 0; k < 100; ++k) s.push_back({700.0 + k, 3.7, 0.5, 25, 0});
  auto gaps = FindGaps(s);
  ASSERT_EQ(gaps.size(), 1u);
  EXPECT_DOUBLE_EQ(gaps[0].t_start_s, 99.0);
  EXPECT_DOUBLE_EQ(gaps[0].t_end_s, 700.0);
  s.resize(100);
  EXPECT_TRUE(FindGaps(s).empty());
  // A step sampled every 60 s is not a gap just because another step used 1 s.
  for (int k = 1; k <= 50; ++k) s.push_back({99.0 + 60.0 * k, 3.6, 0.0, 25, 1});
  EXPECT_TRUE(FindGaps(s).empty());
}

// A 10 % duty 1 A pulse train sampled once per period, always inside the
// pulse: a sample trapezoid reads 1 A against a true 0.1 A average (aliasing
// of a commensurate sampling rate; derived). Per-segment
// integration uses the commanded segments and gets it right.
TEST(Integrate, PerSegmentIntegrationHandlesSparseSamples) {
  std::vector<CommandedSegment> segs;
  std::vector<Sample> s;
  for (int k = 0; k < 360; ++k) {
    double t0 = 10.0 * k;
    segs.push_back({t0, t0 + 1.0, 1.0});
    segs.push_back({t0 + 1.0, t0 + 10.0, 0.0});
    s.push_back({t0 + 0.5, 3.7, 1.0, 25, 0});
  }
  EXPECT_EQ(ChooseIntegrationMethod(s, segs), IntegrationMethod::kPerSegment);
  EXPECT_NEAR(DeliveredChargeMah(s), 1.0 * (3590.0) / 3.6, 1e-9);  // the aliasing error
  SegmentIntegration r = IntegrateBySegments(s, segs);
  EXPECT_NEAR(r.charge_mah, 0.1 * 3600.0 / 3.6, 1e-9);  // 100 mAh: Q = I·t
  EXPECT_NEAR(r.energy_wh, 0.1 * 3600.0 * 3.7 / 3600.0, 1e-9);
  EXPECT_EQ(r.segments, 720u);
  EXPECT_EQ(r.segments_without_samples, 360u);
  // Densely sampled, the trapezoid is chosen.
  std::vector<Sample> dense;
  for (int k = 0; k <= 36000; ++k) dense.push_back({k * 0.1, 3.7, (k % 100) < 10 ? 1.0 : 0.0, 25, 0});
  EXPECT_EQ(ChooseIntegrationMethod(dense, segs), IntegrationMethod::kSampleTrapezoid);
  EXPECT_STREQ(IntegrationMethodName(IntegrationMethod::kPerSegment), "per-commanded-segment");
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// Regression: the engine reads exactly on each edge before the new setpoint
// goes out, so an edge reading belongs to the segment that ends there. 2 A for
// 1 s then 4 s off is 2 A·s (Q = I·t, common practice, no source).
TEST(IntegrateBySegments, EdgeReadingsBelongToTheEndingSegment) {
  std::vector<Sample> s = {{0.0, 3.9, 0.0, 25, 0}, {0.05, 3.8, 2.0, 25, 0}, {1.0, 3.8, 2.0, 25, 0},
                           {1.05, 3.9, 0.0, 25, 0}, {5.0, 3.9, 0.0, 25, 0}};
  std::vector<CommandedSegment> segs = {{0.0, 1.0, 2.0}, {1.0, 5.0, 0.0}};
  SegmentIntegration r = IntegrateBySegments(s, segs);
  EXPECT_NEAR(r.charge_mah, 2.0 / 3.6, 1e-12);
  EXPECT_EQ(r.segments_without_samples, 0);
}

}  // namespace
}  // namespace kp
