// A multi-channel rig file for the simulated bench (drivers/sim/multi_bench.h)
// and the batch jobs that run on it, shared by the channel tests, the Bench
// tab's test and the channel benchmarks. Header only (no GoogleTest), so the
// benchmark programs use it too. Connect the instruments in process with
// ConnectToSimBench (rig/channel_bench.h), or serve them with SimServer and
// pass its client addresses here.
#pragma once

#include <string>
#include <vector>

#include <fmt/format.h>

#include "procedures/plan.h"
#include "rig/bench_run.h"

namespace kp::testing {

struct SimChannelRig {
  std::string bench_name = "test bench";
  std::string dialect = "kneepoint-sim-select";  // or "kneepoint-sim-chlist"
  int channels = 4;
  std::string slot_prefix = "A";  // slots A1, A2, ...
  double clock_speed = 1.0;
  double max_voltage_v = 0.0;     // 0: the key is left out
  // mload, scanner, tlog (the addresses do not matter with ConnectToSimBench).
  std::vector<std::string> addresses = {"tcp:127.0.0.1:5025", "tcp:127.0.0.1:5026", "tcp:127.0.0.1:5027"};
  double timeout_s = 1.0;          // on every instrument
  bool confirm_load_writes = false;
  bool enclosure = false;          // the thermometer's channel 0, limit enclosure_max_c
  double enclosure_max_c = 45.0;
};

// Instruments mload (load), scanner (meter) and tlog (thermometer); channel k
// binds mload#k, scanner#k and tlog#k.
inline std::string SimChannelRigText(const SimChannelRig& r) {
  std::string t = fmt::format("[bench]\nname = \"{}\"\nclock_speed = {:.3f}\nmax_current_a = 5.0\n", r.bench_name, r.clock_speed);
  if (r.max_voltage_v > 0) t += fmt::format("max_voltage_v = {:.3f}\n", r.max_voltage_v);
  const char* names[] = {"mload", "scanner", "tlog"};
  const char* roles[] = {"load", "meter", "thermometer"};
  for (size_t i = 0; i < 3; ++i) {
    t += fmt::format("\n[[instrument]]\nname = \"{}\"\naddress = \"{}\"\nprofile = \"{}\"\nroles = [\"{}\"]\ntimeout_s = {:.3f}\n", names[i],
                     r.addresses.at(i), r.dialect, roles[i], r.timeout_s);
    if (i == 0 && r.confirm_load_writes) t += "confirm_writes = true\n";
  }
  for (int k = 1; k <= r.channels; ++k)
    t += fmt::format("\n[[channel]]\nslot = \"{}{}\"\nload = \"mload#{}\"\nsense = \"scanner#{}\"\ntemperature = \"tlog#{}\"\n", r.slot_prefix,
                     k, k, k, k);
  if (r.enclosure) t += fmt::format("\n[enclosure]\nsensor = \"tlog#0\"\nmax_c = {:.1f}\n", r.enclosure_max_c);
  return t;
}

// One job per channel 0..n-1 with `plan`: cells "cell-K", serials
// SERIAL_PREFIX-K, tagged slot=A<K> and, when `batch` is set, batch=BATCH.
inline std::vector<ChannelJob> BatchJobs(const Plan& plan, int n, const std::string& serial_prefix = "SN", const std::string& batch = "",
                                         const std::string& slot_prefix = "A") {
  std::vector<ChannelJob> jobs;
  for (int k = 0; k < n; ++k) {
    ChannelJob j;
    j.channel = k;
    j.plan = &plan;
    j.options.cell_name = fmt::format("cell-{}", k + 1);
    j.options.record.cell_serial = fmt::format("{}-{}", serial_prefix, k + 1);
    j.options.record.tags = {fmt::format("slot={}{}", slot_prefix, k + 1)};
    if (!batch.empty()) j.options.record.tags.push_back("batch=" + batch);
    j.options.link_grace_s = 0.0;
    jobs.push_back(std::move(j));
  }
  return jobs;
}

}  // namespace kp::testing
