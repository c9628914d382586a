// What a run was made with: one record per instrument (its *IDN? reply split
// into its fields, the profile that drove it, the calibration applied to its
// readings and when that calibration was made), stored with the run (schema
// v5, table `instruments`) and shown in every report.
#pragma once

#include <string>
#include <string_view>

namespace kp {

struct InstrumentRecord {
  std::string name;      // the rig file's instrument name ("load", "dmm")
  std::string roles;     // comma list: "load", "meter,thermometer"
  std::string address;   // "tcp:192.168.0.20:5025", "built-in"
  std::string profile;   // the profile as the rig file names it (or "simulated")
  std::string identity;  // the *IDN? reply, verbatim
  // Its four comma-separated fields (IEEE 488.2 clause 10.14: manufacturer,
  // model, serial number, firmware level; from memory). Empty when absent.
  std::string manufacturer, model, serial, firmware;
  // Calibration applied to the readings: reading * gain + offset.
  double voltage_gain = 1.0, voltage_offset_v = 0.0;
  double current_gain = 1.0, current_offset_a = 0.0;
  double temperature_gain = 1.0, temperature_offset_c = 0.0;
  std::string calibrated_on;  // date of that calibration (rig file `calibrated_on`), empty when not given
};

// Fills manufacturer, model, serial and firmware from `identity` (fields
// trimmed; a reply with fewer than four fields leaves the rest empty, extra
// commas stay in the firmware field).
void SplitIdentity(InstrumentRecord& r);

}  // namespace kp
