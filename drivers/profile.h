// Instrument profiles: the SCPI dialect of one kind of instrument, read from a
// small text file so that adding an instrument needs no recompile.
//
// Format (".kpp", see drivers/profiles/*.kpp and DEVELOPERS.md):
//   # comment                     blank lines and '#' comments are ignored
//   roles    = load               first key; comma list of load, meter, thermometer, supply
//   identity = *LOAD*             glob (* and ?) the *IDN? reply must match, case-insensitive
//   cc-select = FUNC CURR         one `key = SCPI text` per line
// In command text `{}` stands for the number and `{ch}` for the rig file's
// channel; the value `none` says the instrument cannot do it. Errors name
// file:line (and the key).
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "drivers/roles.h"
#include "drivers/status.h"
#include "drivers/supply.h"

namespace kp {

struct InstrumentProfile {
  std::string file;         // where it was read from
  std::string description;  // the `description` key, free text
  std::vector<std::string> roles;
  std::string identity = "*";
  LoadCommands load;
  MeterCommands meter;
  ThermometerCommands thermometer;
  SupplyCommands supply;
  bool HasRole(std::string_view role) const;
};

// Parses profile text; `file` is used in messages only.
Result<InstrumentProfile> ParseProfile(std::string_view text, const std::string& file);
// Reads and parses a profile file.
Result<InstrumentProfile> LoadProfileFile(const std::string& path);

// Resolves a profile reference from a rig file: a path (contains '/' or ends
// in .kpp, relative to `base_dir`) or a bare name looked up as NAME.kpp in
// `base_dir`/profiles, each directory of $KNEEPOINT_PROFILES (':'-separated)
// and the profiles shipped with the sources, in that order.
Result<std::string> FindProfile(const std::string& ref, const std::string& base_dir);

// Replaces {ch} in every command of `p` with `channel`.
void ApplyChannel(InstrumentProfile& p, const std::string& channel);

// Glob match ('*' any run, '?' one character), case-insensitive.
bool IdentityMatches(std::string_view pattern, std::string_view idn);

}  // namespace kp
