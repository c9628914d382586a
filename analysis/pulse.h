// Pulse metrics for pulsed and duty-cycle runs: the sag a device's brown-out
// detector sees, the recovery between pulses, and the charge delivered when
// the first pulse breaches a brown-out voltage. Pure functions, no I/O.
#pragma once

#include <optional>
#include <span>
#include <vector>

#include "analysis/integrate.h"
#include "analysis/sample.h"

namespace kp {

struct PulseFigures {
  int index = 0;  // 0-based pulse number
  double t_start_s = 0.0, t_end_s = 0.0;
  double current_a = 0.0;              // commanded pulse current
  double rest_voltage_before_v = 0.0;  // last sample before the pulse
  double min_voltage_v = 0.0;          // lowest sample inside the pulse
  double recovered_voltage_v = 0.0;    // last sample before the next pulse (or end of record)
  double recovery_v = 0.0;             // recovered - min
  double delivered_mah_at_start = 0.0;
  size_t samples = 0;  // samples inside the pulse
};

// A sample belongs to a pulse when t_start <= t < t_end.
// Pulses are the commanded segments whose current is above threshold_a; with
// no threshold, the midpoint between the lowest and highest commanded
// current. Pulses with no sample inside are skipped.
std::vector<PulseFigures> AnalysePulses(SampleSpan samples, std::span<const CommandedSegment> segments,
                                        std::optional<double> threshold_a = std::nullopt);

// Segments reconstructed from the samples when the commanded ones are not
// known: consecutive samples whose current stays within tolerance_a of the
// segment's first sample. A segment starts at its first sample and ends at
// the next segment's first sample (the edge lies somewhere between).
std::vector<CommandedSegment> SegmentsFromSamples(SampleSpan samples, double tolerance_a);

struct Brownout {
  int pulse_index = 0;
  double t_s = 0.0;
  double min_voltage_v = 0.0;
  double delivered_mah = 0.0;  // at the start of the breaching pulse
};
// The first pulse whose minimum voltage is below brownout_v.
std::optional<Brownout> FirstBrownout(std::span<const PulseFigures> pulses, double brownout_v);

}  // namespace kp
