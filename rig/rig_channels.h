// The multi-channel part of rig files: [[channel]] tables (one per cell
// position) and the optional [enclosure] table. Read after the instruments,
// into RigFileSpec::channels / ::enclosure (rig/rig_file.h).
//
//   [[channel]]
//   slot = "A1"            # required, unique: the cell position as the bench labels it
//   load = "NAME#CH"       # required: an instrument with the load role, and its channel
//   temperature = "NAME#CH"  # required: a thermometer channel on this cell
//   sense = "NAME#CH"      # optional: a meter channel on this cell's sense leads
//   supply = "NAME#CH"     # optional: a supply channel (charge steps)
//
// "NAME" alone names a one-channel instrument (its dialect addresses no
// channels). "#CH" is required for an instrument whose dialect addresses
// channels (a `channel-select` line or `{ch}` in its commands) and refused for
// one that cannot; CH must be within the dialect's `channels` when it says how
// many (a numeric CH). The same instrument channel may not serve two cell
// positions in one role, and an instrument used by [[channel]] tables takes no
// `channel` key of its own.
//
//   [enclosure]
//   sensor = "NAME#CH"     # a thermometer channel in the enclosure
//   max_c = 45             # above this every channel of the bench is switched off
//
// Errors name file:line:col and the key, and say what is expected.
#pragma once

#include <toml++/toml.h>

#include "drivers/profile.h"
#include "rig/rig_file.h"

namespace kp {

Status ParseChannelTables(const toml::table& root, RigFileSpec& spec);

// The dialect of a bound role with its channel filled in ({ch}).
InstrumentProfile BoundProfile(const RigFileSpec& spec, const ChannelBinding& b);

// "instrument#channel" (or the name alone), for messages and lock keys.
std::string BindingText(const RigFileSpec& spec, const ChannelBinding& b);

}  // namespace kp
