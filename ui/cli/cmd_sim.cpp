// `sim`: serve the simulated bench over TCP or pseudo-terminals until stopped.
#include <iostream>
#include <thread>

#include <fmt/format.h>

#include "drivers/address.h"
#include "drivers/sim/cell_file.h"
#include "drivers/sim/multi_bench.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/sim/sim_server.h"
#include "ui/cli/cli.h"

namespace kp::cli {
namespace {

struct SimCmdOptions {
  std::string listen = "tcp:127.0.0.1:5025";
  bool pty = false;
  double speed = 1.0;
  double capacity_mah = 2560.0;
  double runaway_at_s = -1.0;
  double delay_s = 0.0;
  bool verbose = false;
  int channels = 0;          // > 0: multi-channel instruments (drivers/sim/multi_bench.h)
  uint64_t batch_seed = 0;   // the batch the channels' cells are drawn from (0: nominal cells)
  sim::FaultOptions faults;
};

bool IsLoopback(const std::string& host) { return host == "127.0.0.1" || host == "localhost" || host == "::1"; }

int RunSim(SimCmdOptions o) {
  auto listen = ParseAddress(o.pty ? "pty" : o.listen);
  if (!listen.ok()) return Fail(listen.status());
  if (o.speed <= 0) return Fail(InvalidInput("--speed must be above 0"));
  o.faults.delay_s = o.delay_s;
  SteadyClock clock(o.speed);
  sim::SimOptions so;
  so.runaway_start_s = o.runaway_at_s;
  sim::SimBench bench(sim::DemoLiIonCell(o.capacity_mah / 1000.0), clock, so);
  std::vector<sim::ServedDevice> devices{{"load", &bench.load()}, {"meter", &bench.meter()}, {"thermometer", &bench.thermometer()},
                                         {"supply", &bench.supply()}};
  std::unique_ptr<sim::SimMultiBench> multi;
  if (o.channels > 0) {
    // A different cell behind each channel: one batch of the li-ion preset's spread.
    auto preset = sim::BuiltInCell("li-ion");
    if (!preset.ok()) return Fail(preset.status());
    sim::CellParams nominal = sim::DemoLiIonCell(o.capacity_mah / 1000.0);
    multi = std::make_unique<sim::SimMultiBench>(sim::BatchCells(nominal, preset->spread, o.channels, o.batch_seed), clock, so);
    devices = {{"load", &multi->load()}, {"meter", &multi->meter()}, {"thermometer", &multi->thermometer()}, {"supply", &multi->supply()}};
  }
  auto note = o.verbose ? std::function<void(std::string_view)>([](std::string_view m) { std::cerr << "sim: " << m << "\n"; }) : nullptr;
  auto server = sim::SimServer::Start(*listen, devices, o.faults, note);
  if (!server.ok()) return Fail(server.status());
  if (listen->kind == Address::Kind::kTcp) {
    if (IsLoopback(listen->host)) std::cout << "Listening on loopback only (" << listen->host << "); other machines cannot connect.\n";
    else std::cout << "WARNING: listening on " << listen->host << ": reachable from the network, with no authentication.\n";
  }
  std::cout << fmt::format("Simulated bench ({:.2f} Ah cell) at {} simulated seconds per wall second.\n", o.capacity_mah / 1000.0, o.speed);
  const auto& addrs = (*server)->client_addresses();
  for (size_t i = 0; i < devices.size(); ++i) std::cout << fmt::format("  {:<12} {}\n", devices[i].name, addrs[i]);
  if (multi)
    std::cout << fmt::format("{} channels (cells of batch seed {}); in the rig file set clock_speed = {}, these addresses and profile "
                             "\"kneepoint-sim-select\" or \"kneepoint-sim-chlist\"; thermometer channel 0 is the enclosure.\n",
                             o.channels, o.batch_seed, o.speed);
  else
    std::cout << fmt::format("In the rig file set clock_speed = {} and these addresses (profile \"kneepoint-sim\").\n", o.speed);
  if (o.faults.any()) std::cout << "Fault injection is on.\n";
  std::cout << "Ctrl-C stops.\n" << std::flush;
  const std::atomic<bool>* stop = InstallStopSignals();
  while (!stop->load()) std::this_thread::sleep_for(std::chrono::milliseconds(100));
  int faults = (*server)->faults_injected();
  long lines = (*server)->lines_handled();
  (*server)->Stop();
  bool on = bench.load_input_on();
  for (int c = 1; multi && c <= multi->channels(); ++c) on = on || multi->channel(c).load_input_on();
  std::cout << fmt::format("\nStopped after {} lines, {} faults injected; load input{} {}.\n", lines, faults, multi ? "s were" : " was",
                           on ? "ON" : "off");
  return kExitOk;
}

}  // namespace

void RegisterSim(CliRegistry& r) {
  static SimCmdOptions opt;
  CLI::App* c = r.Add("sim", "Serve the simulated load, meter and thermometer over TCP or pseudo-terminals", [] { return RunSim(opt); });
  c->add_option("--listen", opt.listen, "tcp:HOST:PORT (load on PORT, meter PORT+1, thermometer PORT+2; port 0 picks free ports)")
      ->capture_default_str();
  c->add_flag("--pty", opt.pty, "Serve on three new pseudo-terminals instead and print their paths");
  c->add_option("--speed", opt.speed, "Simulated seconds per wall second")->capture_default_str();
  AddQuantityOption(c, "--capacity", opt.capacity_mah, Dimension::kCharge, "Capacity of the simulated cell", 1.0, 1e7);
  c->add_option("--drop-every", opt.faults.drop_every, "Fault: no reply to every N-th query");
  c->add_option("--corrupt-every", opt.faults.corrupt_every, "Fault: garble every N-th reply");
  c->add_option("--delay-every", opt.faults.delay_every, "Fault: hold back every N-th reply by --delay");
  AddQuantityOption(c, "--delay", opt.delay_s, Dimension::kTime, "Delay for --delay-every, wall time", 0.0, 600.0);
  c->add_option("--disconnect-at", opt.faults.disconnect_at, "Fault: close the link after the N-th query (once)");
  c->add_option("--error-every", opt.faults.error_every, "Fault: every N-th query answers 9.91E37 and queues an SCPI error");
  c->add_option("--stick-at", opt.faults.stick_at, "Fault: readings freeze from the N-th query on");
  c->add_option("--refuse-setting", opt.faults.refuse_setting_at,
                "Fault: the N-th command with a number (a setpoint) is refused with -222 in the error queue");
  AddQuantityOption(c, "--runaway-at", opt.runaway_at_s, Dimension::kTime, "Fault: thermal runaway from this simulated time on")
      ->default_str("");
  c->add_flag("--verbose", opt.verbose, "Log every injected fault");
  c->add_option("--channels", opt.channels, "Serve multi-channel instruments with this many channels, a cell on each")
      ->check(CLI::Range(1, 64));
  c->add_option("--batch-seed", opt.batch_seed, "With --channels: draw the cells from the preset's batch spread with this seed (0: nominal)");
}

}  // namespace kp::cli
