// Instrument dialects (called profiles in the code and in rig files'
// `profile` key): the SCPI text of one kind of instrument, read from a small
// TOML file with the extension ".kpd", so that adding an instrument needs no
// recompile. See drivers/profiles/*.kpd and DEVELOPERS.md:
//
//   format = "kneepoint-dialect 1"   # optional; the format's version
//   roles = ["load"]                 # load, meter, thermometer, supply, chamber
//   description = "free text"
//   identity = "*,MY-LOAD*"          # glob (* and ?) the *IDN? reply must match, case-insensitive
//   channels = 8                     # optional: a multi-channel instrument's channel count (1..256)
//   channel-select = "INST:NSEL {ch}" # optional: the line that selects a channel, sent before
//                                    # every line of a channel's exchange (rig files' [[channel]])
//   [commands]
//   cc-select = "FUNC CURR"          # one key per command, the SCPI text in quotes
//
// In command text `{}` stands for the number and `{ch}` for the rig file's
// channel; "none" (or leaving the key out) says the instrument cannot do it.
// Top-level behaviour keys (all optional):
//   init = ["*CLS", "SYST:REM"]   # sent once the *IDN? reply matched, before anything else
//   teardown = ["SYST:LOC"]       # sent when the rig closes, after the load input went off
//   check-settings = true         # drain the error queue after every command; a queued error
//                                 # refuses the command (the run aborts with the load off)
//   error-query = "SYST:ERR?"     # the error-queue query, when the instrument spells it otherwise
//   strip-reply-units = true      # numeric replies may end in a base unit ("12.003 V")
//   mode-settle-s = 0.2           # seconds to wait after a load mode change, before the level
// init and teardown may not switch a load input or supply output on.
// Errors name file:line (and the key).
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "drivers/chamber.h"
#include "drivers/roles.h"
#include "drivers/status.h"
#include "drivers/supply.h"

namespace kp {

struct InstrumentProfile {
  std::string file;         // where it was read from
  std::string description;  // the `description` key, free text
  std::vector<std::string> roles;
  std::string identity = "*";
  // Multi-channel instruments: how many channels (0: not said) and the line
  // selecting one (`{ch}` = the channel's number; empty: channels are chosen
  // by `{ch}` inside the commands themselves, if at all).
  int channels = 0;
  std::string channel_select;
  // True when a channel can be addressed at all: a select line or `{ch}` in a command.
  bool SelectsChannels() const;
  LoadCommands load;
  MeterCommands meter;
  ThermometerCommands thermometer;
  SupplyCommands supply;
  ChamberCommands chamber;
  std::vector<std::string> init, teardown;
  bool check_settings = false;
  std::string error_query = "SYST:ERR?";
  bool strip_units = false;
  bool HasRole(std::string_view role) const;
};

// The extension of dialect files.
inline constexpr const char* kDialectExtension = ".kpd";
// True for a path ending in kDialectExtension.
bool IsDialectPath(std::string_view path);

// Parses dialect text; `file` is used in messages only.
Result<InstrumentProfile> ParseProfile(std::string_view text, const std::string& file);
// Reads and parses a profile file.
Result<InstrumentProfile> LoadProfileFile(const std::string& path);

// Resolves a dialect reference from a rig file: a path (contains '/' or ends
// in .kpd, relative to `base_dir`) or a bare name looked up as NAME.kpd in
// `base_dir`/profiles, each directory of $KNEEPOINT_PROFILES (':'-separated)
// and the dialects shipped with the program (profiles/ of its data folder,
// drivers/data_dir.h), in that order.
Result<std::string> FindProfile(const std::string& ref, const std::string& base_dir);

// Replaces {ch} in every command of `p` with `channel`.
void ApplyChannel(InstrumentProfile& p, const std::string& channel);

// Glob match ('*' any run, '?' one character), case-insensitive.
bool IdentityMatches(std::string_view pattern, std::string_view idn);

}  // namespace kp
