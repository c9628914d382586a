// Rig files: a TOML description of the real (or simulator-over-TCP) bench.
//
//   [bench]
//   name = "bench 2"
//   clock_speed = 1.0        # run-clock seconds per wall second: 1 on hardware,
//                            # K against `kneepoint sim --speed K`
//   trace = "scpi.log"       # optional SCPI trace file (relative to the rig file)
//   max_current_a = 10.0     # absolute rig limits (0 or absent: none)
//   max_voltage_v = 5.0
//   load_rating_w = 150.0
//   chamber_min_c = -20.0    # set points the chamber may be given (absent: any)
//   chamber_max_c = 60.0
//
//   [[instrument]]
//   name = "load"
//   address = "tcp:192.168.0.20:5025"      # see drivers/address.h
//   profile = "generic-scpi-load"          # name or path of a .kpd dialect (drivers/profile.h)
//   roles = ["load"]                       # load, meter, thermometer, supply, chamber
//   channel = "101"                        # replaces {ch} in the profile
//   timeout_s = 2.0, retries = 2, confirm_writes = false, remote_sense = false,
//   stuck_after = 0                        # meter: N identical readings = stuck
//   late_reply_s = timeout_s               # after a timeout, wait this long to discard a late reply
//   voltage_offset_v / voltage_gain, current_offset_a / current_gain,
//   temperature_offset_c / temperature_gain  (reading * gain + offset)
//   temperature_tolerance_c = 0.5          # thermometer: its accuracy (±), stored with each run;
//                                          # verdicts judge the start temperature with it
//   calibrated_on = 2026-03-14             # date of the calibration above (stored with each run)
//   unguarded = ["watchdog"]               # load: its own protections the profile lacks
//                                          # (undervoltage, overcurrent, overpower, watchdog)
//
// Multi-channel benches add one [[channel]] table per cell position (see
// rig/rig_channels.h for the keys):
//
//   [[channel]]
//   slot = "A1"                    # the cell position, unique on the bench
//   load = "mload#1"               # instrument name # its channel
//   sense = "scanner#1"            # optional: cell voltage from a meter; else the load's reading
//   temperature = "scanner#101"    # the cell's thermocouple
//   supply = "psu#1"               # optional: for charge steps
//
//   [enclosure]                    # optional: a bench-level temperature limit
//   sensor = "scanner#0"           # a thermometer channel in the enclosure's air
//   max_c = 45                     # above this, every channel is switched off
//
// With [[channel]] tables a role may be held by several instruments (eight
// single-channel loads), and instruments used by channels take no `channel` key.
//
// A load whose profile has no command for one of its protections
// (`guard-NAME = none`) is refused unless the rig file lists NAME in the
// load's `unguarded`: running without a hardware backstop is a decision the
// rig's owner writes down. `run` then warns at start and records it on the run.
//
// Every error names the file, the line and the key. Unknown keys are errors
// (a misspelt limit must not be silently ignored).
#pragma once

#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "drivers/profile.h"
#include "drivers/roles.h"
#include "rig/rig.h"

namespace kp {

struct InstrumentSpec {
  std::string name;
  std::string address;
  std::string profile_ref;
  InstrumentProfile profile;  // resolved and loaded, {ch} applied
  std::vector<std::string> roles;
  std::string channel;
  double timeout_s = 2.0;
  int retries = 2;
  bool confirm_writes = false;
  bool remote_sense = false;
  double late_reply_s = -1.0;  // < 0: same as timeout_s
  int stuck_after = 0;  // meter: identical readings in a row that mean "stuck" (0: off)
  std::vector<std::string> unguarded;  // load: protections acknowledged as missing (LoadGuardName)
  double temperature_tolerance_c = 0.5;  // thermometer: accuracy (±), for the start-temperature condition
  Calibration voltage, current, temperature;
  std::string calibrated_on;  // YYYY-MM-DD, empty when not given
  int line = 0;  // where the [[instrument]] table starts
};

// Where one role of a channel is wired: an instrument and its channel.
struct ChannelBinding {
  int instrument = -1;   // index into RigFileSpec::instruments; -1: not bound
  std::string channel;   // the instrument's channel ("3", "101"); empty: a one-channel instrument
  int line = 0, col = 0;  // where it is written
  bool bound() const { return instrument >= 0; }
};

// One [[channel]] table: a cell position and its wiring.
struct ChannelSpec {
  std::string slot;
  ChannelBinding load, sense, temperature, supply;
  int line = 0, col = 0;
};

struct EnclosureSpec {
  ChannelBinding sensor;  // not bound: no enclosure limit
  double max_c = 0.0;
};

struct RigFileSpec {
  std::string path;
  std::string text;  // the file as read: stored with every run made on it
  std::string name;
  double clock_speed = 1.0;
  std::string trace;  // resolved path, empty for none
  BenchLimits limits;
  std::vector<InstrumentSpec> instruments;
  std::vector<ChannelSpec> channels;  // empty: a one-cell rig
  EnclosureSpec enclosure;
};

// Parses rig-file text; `path` names it in messages and anchors relative
// paths (profiles, trace).
Result<RigFileSpec> ParseRigFile(std::string_view text, const std::string& path);
Result<RigFileSpec> LoadRigFile(const std::string& path);

// Opens every instrument of a rig file: transports, SCPI sessions (with the
// trace), *IDN? checked against each profile, role drivers with calibration and
// limits, the load switched off. Used by OpenRig for a path.
Result<std::unique_ptr<Rig>> OpenFileRig(const RigFileSpec& spec, const RigOpenOptions& options);

}  // namespace kp
