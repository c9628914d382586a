// Simulator speed: the cell model alone, and whole discharges through the full
// instrument stack (SimRig: SCPI sessions over in-process transports, role
// drivers, RunController with the control channel, Store in a temporary
// directory) in virtual time.
// The counter sim_per_wall is simulated seconds per wall second (target for
// the 20-hour run at 1 s sampling: at least 100,000).
#include <benchmark/benchmark.h>

#include <filesystem>

#include "drivers/sim/cell_file.h"
#include "rig/control_channel.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "rig/store.h"

namespace {

void BM_CellModelAdvanceOneSecond(benchmark::State& state) {
  kp::sim::CellModel m(kp::sim::DemoLiIonCell(2.56));
  double i = 0.5;
  for (auto _ : state) {
    m.Advance(1.0, i);
    if (m.soc() < 0.05) m = kp::sim::CellModel(kp::sim::DemoLiIonCell(2.56));
    benchmark::DoNotOptimize(m.Equivalent());
  }
  state.counters["sim_per_wall"] = benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
}
BENCHMARK(BM_CellModelAdvanceOneSecond);

kp::CellSpec Cell2500() {
  kp::CellSpec c;
  c.rated_mah = 2500;
  c.nominal_v = 3.65;
  c.max_v = 4.2;
  c.cutoff_v = 2.75;
  return c;
}

// One discharge per iteration at `c_rate` (0.2: the rated-capacity check,
// about 5 h; 0.05: about 20 h), sampled every second.
void FullStackDischarge(benchmark::State& state, double c_rate) {
  auto dir = std::filesystem::temp_directory_path() / "kneepoint-bench-cellsim";
  std::filesystem::create_directories(dir);
  std::string path = (dir / "bench.db").string();
  for (const char* s : {"", "-wal", "-shm"}) std::filesystem::remove(path + s);
  kp::SteadyClock wall;
  auto store = kp::Store::Open(path, wall);
  if (!store.ok()) {
    state.SkipWithError(store.status().ToString().c_str());
    return;
  }
  kp::Plan plan = kp::RatedCapacityPlan(Cell2500());
  plan.steps[0].current_a = Cell2500().CRateToAmps(c_rate);
  plan.limits.max_total_s = 1.5 / c_rate * 3600.0;
  plan.steps[0].end.time_s = plan.limits.max_total_s;
  double simulated_s = 0;
  int64_t samples = 0;
  for (auto _ : state) {
    kp::VirtualClock clock;
    kp::SimRig rig(clock, kp::sim::DemoLiIonCell(2.56));
    kp::RunController rc(**store, clock, rig.roles());
    kp::ControlChannel control(**store, wall);  // polled as `kneepoint run` polls it
    kp::RunOptions o;
    o.control = &control;
    o.on_sample = [&](const kp::Reading&, double) { ++samples; };
    auto r = rc.Execute(plan, o);
    if (!r.ok() || r->outcome != kp::Outcome::kCompleted) {
      state.SkipWithError(r.ok() ? r->reason.c_str() : r.status().ToString().c_str());
      break;
    }
    simulated_s += clock.Now().count();
  }
  state.counters["sim_per_wall"] = benchmark::Counter(simulated_s, benchmark::Counter::kIsRate);
  state.counters["simulated_h"] = benchmark::Counter(simulated_s / 3600.0, benchmark::Counter::kAvgIterations);
  state.counters["samples"] = benchmark::Counter(static_cast<double>(samples), benchmark::Counter::kAvgIterations);
  store->reset();
  std::filesystem::remove_all(dir);
}

void BM_FullStackDischarge_0_2C(benchmark::State& state) { FullStackDischarge(state, 0.2); }
void BM_FullStackDischarge_20h(benchmark::State& state) { FullStackDischarge(state, 0.05); }
BENCHMARK(BM_FullStackDischarge_0_2C)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(BM_FullStackDischarge_20h)->Unit(benchmark::kMillisecond)->UseRealTime();

// The instruments alone: SimRig's SCPI sessions and role drivers read once a
// second (voltage, current, temperature) for 20 simulated hours at C/20,
// without the run controller and the store.
void BM_SimRigSessions_20h(benchmark::State& state) {
  double simulated_s = 0;
  for (auto _ : state) {
    kp::VirtualClock clock;
    kp::SimRig rig(clock, kp::sim::DemoLiIonCell(2.56));
    kp::RigRoles roles = rig.roles();
    if (!roles.load->SetLevel(kp::LoadMode::kCurrent, 0.125).ok() || !roles.load->SetInput(true).ok()) {
      state.SkipWithError("load refused the setpoint");
      break;
    }
    for (int t = 0; t < 20 * 3600; ++t) {
      clock.Advance(kp::Seconds(1));
      auto v = roles.meter->MeasureVoltage();
      auto i = roles.load->MeasureCurrent();
      auto temp = roles.thermometer->MeasureTemperature();
      if (!v.ok() || !i.ok() || !temp.ok()) {
        state.SkipWithError("reading failed");
        break;
      }
      benchmark::DoNotOptimize(*v + *i + *temp);
    }
    simulated_s += clock.Now().count();
  }
  state.counters["sim_per_wall"] = benchmark::Counter(simulated_s, benchmark::Counter::kIsRate);
}
BENCHMARK(BM_SimRigSessions_20h)->Unit(benchmark::kMillisecond)->UseRealTime();

}  // namespace
