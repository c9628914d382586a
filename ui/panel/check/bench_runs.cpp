// Writes runs of the simulated bench (rig/sim_rig.h, virtual time) into a
// database for the panel's headless screenshot test and the README pictures:
// each run is a real execution of a procedure by the RunController.
//   kp_panel_bench_runs DB completed|slow|aborted|cycling   run to its end and exit
//   kp_panel_bench_runs DB paused|running                   stop part way, commit,
//       print "ready" and stay alive (the run's runner) until killed or 300 s
// "paused" asks for a pause through the database as the panel would, and
// waits until the runner has the load off; "running" stops mid-discharge.
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cstdio>
#include <iostream>
#include <string>
#include <thread>

#include "drivers/clock.h"
#include "drivers/sim/cell_model.h"
#include "procedures/procedure_parser.h"
#include "rig/control_channel.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "rig/store.h"

namespace {

constexpr const char* kHead =
    "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
    "safety max-temp=55degC max-time=20h\n";

std::string Procedure(const std::string& mode) {
  if (mode == "cycling")
    return std::string("name \"bench check: three cycles at 1 It\"\n") + kHead +
           "repeat 3\n"
           "  charge 1C to 4.2V until current<=0.05C or time>=3h every=10s\n"
           "  rest 15min every=10s log-change=2mV\n"
           "  discharge 1C until voltage<=2.75V every=5s\n"
           "end\n";
  if (mode == "slow")
    return std::string("name \"bench check: capacity at 0.5 It\"\n") + kHead +
           "rest 20min every=10s log-change=2mV\n"
           "discharge 0.5C until voltage<=2.75V every=2s\n";
  if (mode == "aborted")
    return std::string("name \"bench check: peak load 2 A\"\n") + kHead +
           "rest 10min every=10s log-change=2mV\n"
           "discharge 2A until voltage<=2.75V every=1s\n";
  return std::string("name \"bench check: capacity at 1 It\"\n") + kHead +
         "rest 20min every=10s log-change=2mV\n"
         "discharge 1C until voltage<=2.75V every=2s\n";
}

[[noreturn]] void StayAlive() {
  std::cout << "ready" << std::endl;
  for (int i = 0; i < 300; ++i) std::this_thread::sleep_for(std::chrono::seconds(1));
  _exit(0);
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 3) {
    std::cerr << "usage: kp_panel_bench_runs DB completed|slow|aborted|cycling|paused|running\n";
    return 2;
  }
  const std::string db = argv[1], mode = argv[2];
  kp::SteadyClock wall;
  kp::VirtualClock clock;
  auto store = kp::Store::Open(db, wall);
  if (!store.ok()) {
    std::cerr << store.status().ToString() << "\n";
    return 1;
  }
  kp::Store& st = **store;
  auto plan = kp::CompileProcedure(Procedure(mode), mode + ".kpp");
  if (!plan.ok()) {
    std::cerr << plan.status().ToString() << "\n";
    return 1;
  }
  kp::SimRig rig(clock, kp::sim::DemoLiIonCell(2.5));
  kp::RunController rc(st, clock, rig.roles());
  kp::ControlChannel control(st, wall, 0.0);
  std::atomic<bool> stop{false};
  kp::RunOptions o;
  o.cell_name = mode == "completed" ? "LN-2500 #1"
                : mode == "aborted" ? "LN-2500 #2"
                : mode == "cycling" ? "LN-2500 #3"
                : mode == "slow"    ? "LN-2500 #4"
                : mode == "paused"  ? "LN-2500 #5"
                                    : "LN-2500 #6";
  o.control = &control;
  o.stop = &stop;
  o.stop_reason = "aborted by bench check: cell holder came loose";
  // Where the run stands, from inside it (the runner's own thread).
  bool asked = false;
  int off_readings = 0;
  o.on_sample = [&](const kp::Reading& r, double) {
    if (mode == "aborted" && r.t_s > 10 * 60 + 25 * 60) stop = true;
    if (mode == "running" && r.t_s > 20 * 60 + 30 * 60) {
      if (!st.Commit().ok()) _exit(1);
      StayAlive();
    }
    if (mode == "paused") {
      if (!asked && r.t_s > 20 * 60 + 25 * 60) {
        auto runs = st.ListRuns();
        if (!runs.ok() || runs->empty()) _exit(1);
        int64_t id = 0;
        for (const kp::RunRow& row : *runs)
          if (row.outcome == kp::Outcome::kRunning && row.id > id) id = row.id;
        if (!st.AddRequest(id, "pause", "bench check").ok()) _exit(1);
        asked = true;
      } else if (asked && r.current_a < 0.01 && ++off_readings >= 30) {
        if (!st.Commit().ok()) _exit(1);
        StayAlive();
      }
    }
  };
  auto result = rc.Execute(*plan, o);
  if (!result.ok()) {
    std::cerr << result.status().ToString() << "\n";
    return 1;
  }
  std::cout << "run " << result->run_id << ": " << kp::OutcomeName(result->outcome) << " (" << result->reason << ")\n";
  return result->outcome == kp::Outcome::kRunning ? 1 : 0;
}
