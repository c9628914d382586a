#include "analysis/pulse.h"

#include <gtest/gtest.h>

#include <vector>

namespace kp {
namespace {

// Synthetic pulsed discharge: open-circuit voltage falls linearly with charge,
// terminal voltage = ocv - I·R (R = 0.1 Ω); 1 A pulses of 2 s every 20 s over
// a 0.01 A base, sampled every 0.5 s.
struct PulseRun {
  std::vector<Sample> s;
  std::vector<CommandedSegment> segs;
  std::vector<double> ocv_at_pulse_start, q_mah_at_pulse_start;
};

PulseRun MakeRun(int pulses) {
  PulseRun r;
  double q_as = 0, t = 0;
  const double R = 0.1;
  auto ocv = [](double q_as) { return 4.0 - q_as / 3600.0; };  // 1 V per A·h
  Sample prev{};
  bool first = true;
  auto add = [&](double current) {
    double v = ocv(q_as) - current * R;
    Sample x{t, v, current, 25, 0};
    if (!first) q_as += 0.5 * (prev.current_a + current) * (t - prev.t_s);
    x.voltage_v = ocv(q_as) - current * R;
    r.s.push_back(x);
    prev = x;
    first = false;
  };
  for (int p = 0; p < pulses; ++p) {
    r.segs.push_back({t, t + 18, 0.01});
    for (int k = 0; k < 36; ++k, t += 0.5) add(0.01);
    r.segs.push_back({t, t + 2, 1.0});
    for (int k = 0; k < 4; ++k, t += 0.5) add(1.0);
  }
  add(0.01);
  return r;
}

TEST(Pulse, MinimumVoltageRecoveryAndBrownout) {
  PulseRun r = MakeRun(50);
  auto pulses = AnalysePulses(r.s, r.segs);
  ASSERT_EQ(pulses.size(), 50u);
  for (const PulseFigures& p : pulses) {
    EXPECT_DOUBLE_EQ(p.current_a, 1.0);
    EXPECT_EQ(p.samples, 4u);
    // Sag of exactly I·R plus the small drop of the charge taken meanwhile.
    EXPECT_NEAR(p.rest_voltage_before_v - p.min_voltage_v, (1.0 - 0.01) * 0.1, 2e-3);
    EXPECT_GT(p.recovery_v, 0.09);
    EXPECT_LT(p.recovery_v, 0.1);
  }
  // Independent scan: the first pulse sample below 3.97 V.
  const double brownout_v = 3.97;
  double expected_t = -1, expected_q_as = 0;
  for (size_t i = 0; i < r.s.size(); ++i) {
    if (r.s[i].current_a > 0.5 && r.s[i].voltage_v < brownout_v) {
      for (const CommandedSegment& g : r.segs)
        if (g.current_a > 0.5 && g.t_start_s <= r.s[i].t_s && r.s[i].t_s <= g.t_end_s) expected_t = g.t_start_s;
      break;
    }
  }
  ASSERT_GT(expected_t, 0);
  for (size_t i = 1; i < r.s.size() && r.s[i].t_s < expected_t; ++i)
    expected_q_as += 0.5 * (r.s[i].current_a + r.s[i - 1].current_a) * (r.s[i].t_s - r.s[i - 1].t_s);
  auto b = FirstBrownout(pulses, brownout_v);
  ASSERT_TRUE(b.has_value());
  EXPECT_DOUBLE_EQ(b->t_s, expected_t);
  EXPECT_NEAR(b->delivered_mah, expected_q_as / 3.6, 1e-9);
  EXPECT_LT(b->min_voltage_v, brownout_v);
  EXPECT_FALSE(FirstBrownout(pulses, 3.0).has_value());
}

TEST(Pulse, SegmentsReconstructedFromSamples) {
  PulseRun r = MakeRun(3);
  auto segs = SegmentsFromSamples(r.s, 0.005);
  ASSERT_EQ(segs.size(), 7u);
  EXPECT_DOUBLE_EQ(segs[1].t_start_s, 18.0);
  EXPECT_DOUBLE_EQ(segs[1].t_end_s, 20.0);
  EXPECT_DOUBLE_EQ(segs[1].current_a, 1.0);
  EXPECT_EQ(AnalysePulses(r.s, segs).size(), 3u);
  // A constant-current record has no pulses.
  std::vector<Sample> cc = {{0, 3.7, 0.5, 25, 0}, {1, 3.7, 0.5, 25, 0}};
  EXPECT_TRUE(AnalysePulses(cc, SegmentsFromSamples(cc, 0.005)).empty());
}

}  // namespace
}  // namespace kp
