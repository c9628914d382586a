#include "rig/cli/cli.h"

#include <atomic>
#include <cmath>
#include <csignal>
#include <cstdio>
#include <iostream>

#include <fmt/format.h>

#include "rig/version.h"

namespace kp::cli {
namespace {

std::atomic<bool> g_stop{false};
std::atomic<int> g_stop_signal{0};

extern "C" void OnStopSignal(int signo) {
  g_stop_signal.store(signo);
  g_stop.store(true);
}

}  // namespace

CLI::App* CliRegistry::Add(const std::string& name, const std::string& description, std::function<int()> run) {
  CLI::App* sub = app_.add_subcommand(name, description);
  commands_.emplace_back(sub, std::move(run));
  return sub;
}

int CliRegistry::Dispatch() {
  for (auto& [sub, run] : commands_) {
    if (sub->parsed()) return run();
  }
  std::cerr << app_.help();
  return kExitBadInput;
}

int ExitCodeFor(const Status& status) {
  if (status.ok()) return kExitOk;
  switch (status.code()) {
    case StatusCode::kInvalidInput:
    case StatusCode::kNotFound:
      return kExitBadInput;
    default:
      return kExitFailure;
  }
}

int Fail(const Status& status) {
  std::fprintf(stderr, "kneepoint: %s\n", status.message().c_str());
  return ExitCodeFor(status);
}

const char* SafetyCautions() {
  return "SAFETY: lithium cells can vent, catch fire or explode when abused.\n"
         "  - Fuse the leads close to the cell and use wiring rated for the test current.\n"
         "  - Tape the thermal probe to the cell body; keep the over-temperature limit set.\n"
         "  - Test inside a fire-safe container, away from flammables, with a way to cut power.\n"
         "  - Never leave a test unattended without limits that stop it safely.\n"
         "  - Follow your local codes and your lab's safety rules; they take precedence.\n";
}

const std::atomic<bool>* InstallStopSignals() {
  static bool installed = false;
  if (!installed) {
    struct sigaction sa {};
    sa.sa_handler = OnStopSignal;
    sigemptyset(&sa.sa_mask);
    for (int sig : {SIGINT, SIGTERM, SIGHUP, SIGQUIT}) sigaction(sig, &sa, nullptr);
    // A reader that went away (a closed pipe, a dropped terminal) must not end
    // the run: writes then fail with EPIPE and the streams stop printing.
    struct sigaction ign {};
    ign.sa_handler = SIG_IGN;
    sigemptyset(&ign.sa_mask);
    sigaction(SIGPIPE, &ign, nullptr);
    installed = true;
  }
  return &g_stop;
}

int StopSignal() { return g_stop_signal.load(); }

void RequestStop() { g_stop.store(true); }

std::string StopSignalReason(int signo) {
  switch (signo) {
    case SIGINT: return "stopped by SIGINT (Ctrl-C)";
    case SIGTERM: return "stopped by SIGTERM";
    case SIGHUP: return "stopped by SIGHUP (the terminal or session went away)";
    case SIGQUIT: return "stopped by SIGQUIT";
    default: return fmt::format("stopped by signal {}", signo);
  }
}

std::string FormatDuration(double seconds) {
  long s = std::lround(seconds);
  return fmt::format("{}:{:02}:{:02}", s / 3600, (s / 60) % 60, s % 60);
}

int RunCli(int argc, char** argv, std::span<const Registrar> extra) {
  CLI::App app{"kneepoint: bench controller and data logger for battery discharge tests"};
  app.require_subcommand(1);
  app.set_version_flag("--version", VersionLine());
  CliRegistry registry(app);
  RegisterDemo(registry);
  RegisterRuns(registry);
  RegisterReport(registry);
  RegisterExport(registry);
  RegisterPorts(registry);
  RegisterProbe(registry);
  RegisterSim(registry);
  RegisterCheck(registry);
  RegisterRun(registry);
  RegisterCompare(registry);
  RegisterLife(registry);
  RegisterControl(registry);
  RegisterResume(registry);
  RegisterNote(registry);
  for (Registrar r : extra) r(registry);
  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForAllHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForVersion& e) {
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    app.exit(e);
    return kExitBadInput;
  }
  try {
    return registry.Dispatch();
  } catch (const std::exception& e) {
    std::fprintf(stderr, "kneepoint: internal error: %s\n", e.what());
    return kExitFailure;
  }
}

}  // namespace kp::cli
