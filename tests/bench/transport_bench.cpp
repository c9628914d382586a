// SCPI round trips over real links against the simulator server: TCP
// loopback and a pseudo-terminal. Reported beside the serial line rate: a
// 19-byte exchange (query + reply with terminators) at 115200 baud 8N1 is 190
// bit times = 1.649 ms, about 606 exchanges per second (10 bits per byte:
// start + 8 data + stop, common practice, no source). Target: the transport
// adds under 10 % to that line time, i.e. median round trip < 165 us.
#include <benchmark/benchmark.h>

#include <algorithm>
#include <chrono>
#include <vector>

#include "drivers/scpi_session.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/sim/sim_server.h"
#include "drivers/stream_transport.h"

namespace {

constexpr double kLineRateExchangeUs = 19.0 * 10.0 / 115200.0 * 1e6;

void QueryBench(benchmark::State& state, const char* listen) {
  kp::VirtualClock clock;
  kp::sim::SimBench bench(kp::sim::DemoLiIonCell(2.56), clock);
  auto addr = kp::ParseAddress(listen);
  auto server = kp::sim::SimServer::Start(*addr, {{"meter", &bench.meter()}});
  if (!server.ok()) {
    state.SkipWithError(server.status().ToString().c_str());
    return;
  }
  auto t = kp::OpenTransport((*server)->client_addresses()[0]);
  if (!t.ok()) {
    state.SkipWithError(t.status().ToString().c_str());
    return;
  }
  kp::ScpiSession session(std::move(*t), clock);
  std::vector<double> rtt_us;
  rtt_us.reserve(1 << 16);
  for (auto _ : state) {
    auto t0 = std::chrono::steady_clock::now();
    // "MEAS:VOLT:DC?\n" + "+3.71200E+00\n" is 27 bytes; the query is the one a run makes every sample.
    auto v = session.QueryNumber("MEAS:VOLT:DC?");
    auto t1 = std::chrono::steady_clock::now();
    if (!v.ok()) {
      state.SkipWithError(v.status().ToString().c_str());
      break;
    }
    if (rtt_us.size() < rtt_us.capacity()) rtt_us.push_back(std::chrono::duration<double, std::micro>(t1 - t0).count());
  }
  state.SetItemsProcessed(state.iterations());
  if (rtt_us.empty()) return;
  std::sort(rtt_us.begin(), rtt_us.end());
  double median = rtt_us[rtt_us.size() / 2];
  double p99 = rtt_us[std::min(rtt_us.size() - 1, rtt_us.size() * 99 / 100)];
  state.counters["median_us"] = median;
  state.counters["p99_us"] = p99;
  state.counters["line_rate_us"] = kLineRateExchangeUs;
  state.counters["line_rate_per_s"] = 1e6 / kLineRateExchangeUs;
  state.counters["added_pct"] = 100.0 * median / kLineRateExchangeUs;
}

void BM_ScpiQueryTcpLoopback(benchmark::State& state) { QueryBench(state, "tcp:127.0.0.1:0"); }
void BM_ScpiQueryPty(benchmark::State& state) { QueryBench(state, "pty"); }

BENCHMARK(BM_ScpiQueryTcpLoopback)->UseRealTime();
BENCHMARK(BM_ScpiQueryPty)->UseRealTime();

}  // namespace
