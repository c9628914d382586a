// The user's configuration file: values a technician sets once per bench
// instead of typing them on every command. Command-line options override it.
//
// Found at $KNEEPOINT_CONFIG when set, else $XDG_CONFIG_HOME/kneepoint/config.toml,
// else ~/.config/kneepoint/config.toml (XDG Base Directory Specification 0.8:
// $XDG_CONFIG_HOME defaults to $HOME/.config). A missing file is no error; a
// malformed one is, with file:line:col. TOML, for example:
//
//   bench = "bench-3"                      # this bench's name, stored with every run
//   operator = "R. Okafor"                 # who runs the tests
//   database = "/srv/lab/bench-3.db"       # default --db of every command
//   rig = "/etc/kneepoint/bench-3.toml"    # default --rig of `run`
//   dialect_path = ["/srv/lab/dialects"]   # searched for instrument dialects before the shipped ones
#pragma once

#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "drivers/status.h"

namespace kp {

// The database every command uses when neither --db nor the configuration
// names one: kneepoint.db in the working folder.
inline constexpr const char* kDefaultDatabase = "kneepoint.db";

struct UserConfig {
  std::filesystem::path file;  // where it was read from; empty when there was none
  std::optional<std::string> bench;
  std::optional<std::string> operator_name;
  std::optional<std::string> database;
  std::optional<std::string> rig;
  std::vector<std::string> dialect_path;
};

// Where the configuration file is looked for (it may not exist).
std::filesystem::path ConfigPath();

// Parses configuration text; `file` names it in errors. Unknown keys are
// errors (a misspelt key would otherwise be silently ignored).
Result<UserConfig> ParseUserConfig(std::string_view text, const std::string& file);

// Reads ConfigPath(); an empty configuration when the file does not exist.
Result<UserConfig> LoadUserConfig();

// The database to use: the option when given, else the configuration's, else
// kDefaultDatabase.
std::string ChooseDatabase(const std::string& option, const UserConfig& config);

}  // namespace kp
