#include "ui/cli/cli.h"

#include "drivers/text_hygiene.h"

#include <atomic>
#include <cmath>
#include <csignal>
#include <cstdlib>
#include <cstdio>
#include <algorithm>
#include <iostream>

#include <fmt/format.h>

#include "drivers/spelling.h"
#include "rig/config.h"
#include "rig/version.h"

namespace kp::cli {

void RegisterBatch(CliRegistry& r);  // batch report (cmd_batch.cpp)
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
  // Messages quote instrument replies and user text: no control characters reach the terminal.
  std::fprintf(stderr, "kneepoint: %s\n", TerminalSafe(status.message()).c_str());
  return ExitCodeFor(status);
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

namespace {

double ParseOptionQuantity(const std::string& name, const std::string& text, Dimension dim, double lo, double hi) {
  ParsedQuantity q = ParseQuantityText(text, dim, name);
  if (!q.value) throw CLI::ValidationError(name, q.error);
  if (*q.value < lo || *q.value > hi)
    throw CLI::ValidationError(name, fmt::format("'{}' is outside {} .. {}", text, FormatQuantity(lo, dim),
                                                 FormatQuantity(hi, dim)));
  return *q.value;
}

}  // namespace

CLI::Option* AddQuantityOption(CLI::App* app, const std::string& name, double& out, Dimension dim, const std::string& help,
                               double lo, double hi) {
  CLI::Option* o = app->add_option_function<std::string>(
      name, [&out, name, dim, lo, hi](const std::string& text) { out = ParseOptionQuantity(name, text, dim, lo, hi); },
      fmt::format("{} ({})", help, UnitsOf(dim)));
  o->default_str(FormatQuantity(out, dim));
  return o;
}

CLI::Option* AddQuantityOption(CLI::App* app, const std::string& name, std::optional<double>& out, Dimension dim,
                               const std::string& help, double lo, double hi) {
  return app->add_option_function<std::string>(
      name, [&out, name, dim, lo, hi](const std::string& text) { out = ParseOptionQuantity(name, text, dim, lo, hi); },
      fmt::format("{} ({})", help, UnitsOf(dim)));
}

std::string SuggestForCommandLine(CLI::App& app, const std::vector<std::string>& args) {
  if (args.empty()) return "";
  std::vector<std::string> commands;
  for (const CLI::App* sub : app.get_subcommands({})) commands.push_back(sub->get_name());
  size_t first = 0;
  while (first < args.size() && args[first].starts_with("-")) ++first;
  if (first == args.size()) return "";
  CLI::App* sub = nullptr;
  for (CLI::App* s : app.get_subcommands({}))
    if (s->get_name() == args[first]) sub = s;
  if (sub == nullptr) {
    std::optional<std::string> w = ClosestWord(args[first], commands);
    return w ? fmt::format("unknown command '{}': did you mean '{}'?", args[first], *w) : "";
  }
  std::vector<std::string> options;
  for (const CLI::Option* o : sub->get_options())
    for (const std::string& n : o->get_lnames()) options.push_back("--" + n);
  for (size_t i = first + 1; i < args.size(); ++i) {
    const std::string& a = args[i];
    if (!a.starts_with("--") || a == "--") continue;
    std::string name = a.substr(0, a.find('='));
    if (sub->get_option_no_throw(name) != nullptr) continue;
    std::optional<std::string> w = ClosestWord(name, options);
    if (w) return fmt::format("unknown option '{}' of '{}': did you mean '{}'?", name, sub->get_name(), *w);
  }
  return "";
}

namespace {

// The configuration file's values become the defaults of the options they
// stand for (README "Configuration"); an option given on the command line
// still wins. `demo` keeps its own database.
void ApplyConfigDefaults(CLI::App& app, const UserConfig& cfg) {
  for (CLI::App* sub : app.get_subcommands({})) {
    auto set = [&](const char* name, const std::optional<std::string>& value) {
      CLI::Option* o = sub->get_option_no_throw(name);
      if (o == nullptr || !value) return;
      o->default_val(*value);
      o->required(false);
    };
    if (sub->get_name() != "demo") {
      if (CLI::Option* db = sub->get_option_no_throw("--db")) {
        db->default_val(ChooseDatabase("", cfg));
        db->required(false);
      }
    }
    set("--rig", cfg.rig);
    // The record of a new run; elsewhere (`runs`) these names are filters.
    if (sub->get_name() == "run") {
      set("--bench", cfg.bench);
      set("--operator", cfg.operator_name);
    }
  }
  // Dialect folders: searched like $KNEEPOINT_PROFILES, before it.
  if (!cfg.dialect_path.empty()) {
    std::string dirs;
    for (const std::string& d : cfg.dialect_path) dirs += (dirs.empty() ? "" : ":") + d;
    if (const char* env = std::getenv("KNEEPOINT_PROFILES"); env != nullptr && *env != '\0') dirs += std::string(":") + env;
    setenv("KNEEPOINT_PROFILES", dirs.c_str(), 1);
  }
}

}  // namespace

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
  RegisterDiscover(registry);
  RegisterProbe(registry);
  RegisterSim(registry);
  RegisterCheck(registry);
  RegisterRun(registry);
  RegisterCompare(registry);
  RegisterLife(registry);
  RegisterControl(registry);
  RegisterResume(registry);
  RegisterNote(registry);
  RegisterSync(registry);
  RegisterServe(registry);
  RegisterBatch(registry);
  for (Registrar r : extra) r(registry);
  Result<UserConfig> config = LoadUserConfig();
  if (!config.ok()) return Fail(config.status());
  ApplyConfigDefaults(app, *config);
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
    std::string hint = SuggestForCommandLine(app, std::vector<std::string>(argv + std::min(argc, 1), argv + argc));
    if (!hint.empty()) std::fprintf(stderr, "kneepoint: %s\n", hint.c_str());
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
