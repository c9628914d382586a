// libFuzzer entry point for the simulator's command parser: the input is split
// into lines, the first byte of each picks the instrument (load, meter,
// thermometer, supply) and the rest is sent to it, with virtual time moving on
// between lines. No line may crash the bench, break its invariants (finite
// state of charge and temperature) or trip a sanitizer.
// The corpus replay (fuzz_replay.cpp) runs it on every build.
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string_view>

#include "drivers/clock.h"
#include "drivers/sim/cell_model.h"
#include "drivers/sim/sim_bench.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  std::string_view text(reinterpret_cast<const char*>(data), size);
  kp::VirtualClock clock;
  kp::sim::SimBench bench(kp::sim::DemoLiIonCell(), clock);
  int lines = 0;
  while (!text.empty() && lines < 200) {
    size_t nl = text.find('\n');
    std::string_view line = text.substr(0, nl);
    text = nl == std::string_view::npos ? std::string_view() : text.substr(nl + 1);
    ++lines;
    if (line.empty()) continue;
    kp::LineDevice* dev = nullptr;
    switch (static_cast<unsigned char>(line[0]) % 4) {
      case 0: dev = &bench.load(); break;
      case 1: dev = &bench.meter(); break;
      case 2: dev = &bench.thermometer(); break;
      default: dev = &bench.supply(); break;
    }
    (void)dev->HandleLine(line.substr(1));
    clock.Advance(kp::Seconds(1.0 + lines % 7));
    double soc = bench.cell_soc();
    double temp = bench.cell_temperature_c();
    if (!std::isfinite(soc) || !std::isfinite(temp) || !std::isfinite(bench.cell_current_a())) std::abort();
  }
  return 0;
}
