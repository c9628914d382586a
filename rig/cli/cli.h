// The `kneepoint` command line. Each command lives in its own cmd_*.cpp and
// registers itself with a CliRegistry; main.cpp adds commands from libraries
// above rig (the panel's `view`).
//
// Exit status: 0 success, 2 bad input (message on stderr), 1 other failures.
#pragma once

#include <CLI/CLI.hpp>

#include <atomic>
#include <functional>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "drivers/status.h"
#include "procedures/units.h"

namespace kp::cli {

inline constexpr int kExitOk = 0;
inline constexpr int kExitFailure = 1;
inline constexpr int kExitBadInput = 2;

class CliRegistry {
 public:
  explicit CliRegistry(CLI::App& app) : app_(app) {}
  CLI::App& app() { return app_; }
  // Adds a subcommand whose `run` is called when it was chosen.
  CLI::App* Add(const std::string& name, const std::string& description, std::function<int()> run);
  // Runs the chosen subcommand (after parsing); kExitBadInput when none.
  int Dispatch();

 private:
  CLI::App& app_;
  std::vector<std::pair<CLI::App*, std::function<int()>>> commands_;
};

using Registrar = void (*)(CliRegistry&);

int RunCli(int argc, char** argv, std::span<const Registrar> extra = {});

// "unknown command 'reprot': did you mean 'report'?" (or an option of the
// chosen command), for a command line CLI11 refused; "" when nothing is close.
std::string SuggestForCommandLine(CLI::App& app, const std::vector<std::string>& args);

// Prints "kneepoint: <message>" to stderr and returns the exit status for it.
int Fail(const Status& status);
int ExitCodeFor(const Status& status);

// The usual cautions for lithium cells; printed by run-type commands at start.
const char* SafetyCautions();

// SIGINT, SIGTERM, SIGHUP and SIGQUIT set the returned flag: the run takes
// its safe-off path (load off, then the record). SIGPIPE is ignored, so a
// closed stdout (`run ... | head`) only stops the printing. Installed once,
// idempotent. Fatal signals are left to the guardian (rig/guardian.h).
const std::atomic<bool>* InstallStopSignals();
// The signal that set the stop flag (0: none yet).
int StopSignal();
// Sets the stop flag from the program itself (no signal).
void RequestStop();
// "stopped by SIGHUP (...)": what a run stopped by a signal records.
std::string StopSignalReason(int signo);

// Built-in command groups.
void RegisterDemo(CliRegistry& r);
void RegisterRuns(CliRegistry& r);
void RegisterReport(CliRegistry& r);
void RegisterExport(CliRegistry& r);
void RegisterPorts(CliRegistry& r);
void RegisterProbe(CliRegistry& r);
void RegisterSim(CliRegistry& r);
void RegisterCheck(CliRegistry& r);
void RegisterRun(CliRegistry& r);
void RegisterCompare(CliRegistry& r);
void RegisterLife(CliRegistry& r);
void RegisterControl(CliRegistry& r);  // abort / pause / continue
void RegisterResume(CliRegistry& r);
void RegisterNote(CliRegistry& r);

// An option taking a physical value with its unit, read by the one unit
// parser (procedures/units.h) while the command line is parsed: a bare number
// or a wrong unit is refused with the fix ("'3' has no unit: did you mean
// 3V?"). `lo`..`hi` bound the value in the dimension's base unit (A, V, s,
// mAh, degC, fraction). The default shown in --help is the current value.
CLI::Option* AddQuantityOption(CLI::App* app, const std::string& name, double& out, Dimension dim, const std::string& help,
                               double lo = 0.0, double hi = 1e300);
CLI::Option* AddQuantityOption(CLI::App* app, const std::string& name, std::optional<double>& out, Dimension dim,
                               const std::string& help, double lo = 0.0, double hi = 1e300);

// "5:02:13" for a duration in seconds.
std::string FormatDuration(double seconds);

}  // namespace kp::cli
