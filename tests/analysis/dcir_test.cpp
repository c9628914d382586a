#include "analysis/dcir.h"

#include <gtest/gtest.h>

#include <vector>

namespace kp {
namespace {

// IEC 61960-3 clause 7.7 two-current method (secondary source): I1 = 0.2 It
// for 10 s, U1 at its end; I2 = 1.0 It for 1 s, U2 at its end;
// R_dc = (U1 - U2) / (I2 - I1).
TEST(Dcir, TwoCurrentStepGivesTheStandardsFormulaExactly) {
  const double it = 2.5;  // A, for a 2,500 mAh cell
  const double i1 = 0.2 * it, i2 = 1.0 * it, u1 = 3.7125, u2 = 3.6431;
  std::vector<Sample> s;
  // I1 sampled up to 9.5 s; the current steps at 10 s; I2 sampled from 10 s.
  for (int k = 0; k < 10; ++k) s.push_back({k * 1.0, u1, i1, 25, 0});
  s.push_back({9.5, u1, i1, 25, 0});
  for (int k = 0; k <= 4; ++k) s.push_back({10.0 + 0.25 * k, u2 + (k == 4 ? 0.0 : 0.01), i2, 25, 1});
  std::vector<double> edges = {10.0};
  DcirOptions o;
  o.delay_s = 1.0;
  auto pts = MeasureDcir(s, edges, o, 2500.0);
  ASSERT_EQ(pts.size(), 1u);
  EXPECT_DOUBLE_EQ(pts[0].resistance_ohm, (u1 - u2) / (i2 - i1));
  EXPECT_DOUBLE_EQ(pts[0].u1_v, u1);
  EXPECT_DOUBLE_EQ(pts[0].u2_v, u2);
  // Charge up to the last sample before the edge: 0.5 A for 9.5 s (Q = I·t).
  EXPECT_NEAR(pts[0].delivered_mah, 0.5 * 9.5 / 3.6, 1e-12);
  EXPECT_NEAR(pts[0].depth_of_discharge, 0.5 * 9.5 / 3.6 / 2500.0, 1e-15);
  // A shorter delay reads an earlier sample, so a different (larger) U2.
  o.delay_s = 0.2;
  auto early = MeasureDcir(s, edges, o, 2500.0);
  ASSERT_EQ(early.size(), 1u);
  EXPECT_DOUBLE_EQ(early[0].u2_v, u2 + 0.01);
}

// A 1 s I2 pulse sampled every 100 ms and followed at once by another level:
// the default 1 s delay meets the falling edge, where the first sample belongs
// to the next level. U2 must come from the pulse's last sample (0.9 s), the
// end of t2 where IEC 61960-3 clause 7.7 reads it (secondary source).
TEST(Dcir, DelayThatMeetsTheNextEdgeReadsTheEndOfThePulse) {
  const double i1 = 0.5, i2 = 2.5, i3 = 1.25;
  const double u1 = 3.80, u2_end = 3.60, u_next = 3.70;
  std::vector<Sample> s;
  for (int k = 0; k < 100; ++k) s.push_back({k * 0.1, u1, i1, 25, 0});          // I1 for 10 s
  for (int k = 0; k < 10; ++k) s.push_back({10.0 + k * 0.1, u2_end + 0.01 * (9 - k), i2, 25, 1});  // I2 for 1 s
  for (int k = 0; k < 50; ++k) s.push_back({11.0 + k * 0.1, u_next, i3, 25, 2});  // next step
  std::vector<CommandedSegment> segs = {{0.0, 10.0, i1}, {10.0, 11.0, i2}, {11.0, 16.0, i3}};
  DcirOptions o;  // default delay
  std::vector<double> edges = EdgesFromSegments(segs, o.min_step_a);
  ASSERT_EQ(edges.size(), 2u);
  auto pts = MeasureDcir(s, edges, o, 2500.0);
  ASSERT_EQ(pts.size(), 2u);
  EXPECT_NEAR(pts[0].t_u2_s, 10.9, 1e-9);
  EXPECT_DOUBLE_EQ(pts[0].u2_v, u2_end);
  EXPECT_DOUBLE_EQ(pts[0].i2_a, i2);
  EXPECT_NEAR(pts[0].resistance_ohm, (u1 - u2_end) / (i2 - i1), 1e-12);
  // A delay inside the pulse still reads the first sample at or after it.
  o.delay_s = 0.45;
  auto early = MeasureDcir(s, edges, o, 2500.0);
  ASSERT_EQ(early.size(), 2u);
  EXPECT_NEAR(early[0].t_u2_s, 10.5, 1e-9);
  EXPECT_NEAR(early[0].u2_v, u2_end + 0.04, 1e-12);
  // A record that ends inside t2 gives no point for that edge.
  std::vector<Sample> cut(s.begin(), s.begin() + 105);  // up to 10.4 s
  o.delay_s = 1.0;
  EXPECT_TRUE(MeasureDcir(cut, std::vector<double>{10.0}, o, 2500.0).empty());
}

// R versus depth of discharge: pulses on a cell whose resistance grows as it
// empties; each point recovers the resistance used to make it.
TEST(Dcir, ResistanceVersusDepthOfDischarge) {
  std::vector<Sample> s;
  std::vector<CommandedSegment> segs;
  double t = 0, q_as = 0;
  const double cap_mah = 1000.0;
  std::vector<double> r_used;
  for (int p = 0; p < 5; ++p) {
    double r = 0.05 + 0.01 * p;
    r_used.push_back(r);
    double ocv = 4.0 - 0.1 * p;
    // 30 s at 0.2 A, then 2 s at 2.0 A, sampled every 0.5 s.
    segs.push_back({t, t + 30, 0.2});
    for (double k = 0; k < 30; k += 0.5) s.push_back({t + k, ocv - 0.2 * r, 0.2, 25, 0});
    t += 30;
    segs.push_back({t, t + 2, 2.0});
    for (double k = 0; k < 2; k += 0.5) s.push_back({t + k, ocv - 2.0 * r, 2.0, 25, 0});
    t += 2;
  }
  for (size_t i = 1; i < s.size(); ++i) q_as += 0.5 * (s[i].current_a + s[i - 1].current_a) * (s[i].t_s - s[i - 1].t_s);
  DcirOptions o;
  o.delay_s = 1.0;
  auto edges = EdgesFromSegments(segs, o.min_step_a);
  ASSERT_EQ(edges.size(), 9u);  // up and down edges
  auto pts = MeasureDcir(s, edges, o, cap_mah);
  ASSERT_EQ(pts.size(), 9u);
  for (int p = 0; p < 5; ++p) EXPECT_NEAR(pts[2 * p].resistance_ohm, r_used[p], 1e-12) << "pulse " << p;
  for (size_t i = 1; i < pts.size(); ++i) EXPECT_GT(pts[i].depth_of_discharge, pts[i - 1].depth_of_discharge);
  EXPECT_LT(pts.back().delivered_mah, q_as / 3.6);
  // Edges found in the samples match the commanded ones.
  EXPECT_EQ(EdgesFromSamples(s, o.min_step_a), edges);
}

// A record that starts with a charge: depth of discharge counts from the end
// of the charge (the fullest point), not from the record's start (Q = I·t).
TEST(Dcir, DepthCountsFromTheEndOfAPrecedingCharge) {
  std::vector<Sample> s;
  for (int k = 0; k <= 100; ++k) s.push_back({k * 36.0, 4.1, -1.0, 25, 0});        // 1 A into the cell for 1 h
  for (int k = 1; k <= 100; ++k) s.push_back({3600.0 + k * 18.0, 3.8, 0.5, 25, 1});  // 0.5 A out for 0.5 h
  s.push_back({5410.0, 3.7, 2.5, 25, 2});
  s.push_back({5411.0, 3.7, 2.5, 25, 2});
  std::vector<double> edges = {5410.0};
  auto pts = MeasureDcir(s, edges, DcirOptions{}, 2500.0);
  ASSERT_EQ(pts.size(), 1u);
  // The interval from 3600 s (-1 A) to 3618 s (+0.5 A) nets charge into the
  // cell, so the fullest point is at 3618 s; from there to the last sample
  // before the edge (5400 s): 0.5 A x 1782 s = 247.5 mAh.
  EXPECT_NEAR(pts[0].delivered_mah, 0.5 * 1782.0 / 3.6, 1e-9);
  EXPECT_NEAR(pts[0].depth_of_discharge, 0.5 * 1782.0 / 3.6 / 2500.0, 1e-12);
}

TEST(Dcir, EdgesWithoutSamplesAroundThemAreSkipped) {
  std::vector<Sample> s = {{0, 3.7, 0.1, 25, 0}, {1, 3.6, 1.0, 25, 0}};
  std::vector<double> edges = {0.0, 1.0, 5.0};
  EXPECT_TRUE(MeasureDcir(s, edges, DcirOptions{}, 1000).empty());
}

}  // namespace
}  // namespace kp
