// libFuzzer entry point for the procedure parser: any bytes must give either a
// plan or diagnostics with positions inside the text — never a crash, hang or
// sanitizer report. Built as `procedure_fuzz` with clang; the corpus replay
// (procedure_fuzz_replay.cpp) runs the same function on every build.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string_view>

#include "procedures/engine.h"
#include "procedures/estimate.h"
#include "procedures/procedure_parser.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  std::string_view text(reinterpret_cast<const char*>(data), size);
  kp::ParseOutput out = kp::ParseProcedure(text, "fuzz");
  int lines = 1;
  for (char c : text) lines += c == '\n';
  for (const kp::Diagnostic& d : out.errors) {
    if (d.line < 1 || d.line > lines || d.col < 1 || d.message.empty()) std::abort();
  }
  if (out.ok()) {
    // A valid plan must also estimate and describe without trouble.
    kp::PlanEstimate e = kp::EstimatePlan(out.plan);
    if (kp::DescribePlan(out.plan, e).empty()) std::abort();
    // And drive the engine a while with a falling voltage: time must move on,
    // and a snapshot must restore.
    kp::StepEngine engine(out.plan);
    (void)engine.Start(0.0);
    double v = out.plan.cell.max_v > 0 ? out.plan.cell.max_v : 4.0;
    for (int i = 0; i < 500 && !engine.finished(); ++i) {
      double t = engine.NextWakeup();
      kp::Reading r{t, v, 0.5, 25.0};
      v -= 0.002;
      (void)engine.OnReading(r);
      if (!engine.finished() && !(engine.NextWakeup() > t)) std::abort();
      if (i == 250) {
        kp::StepEngine other(out.plan);
        if (!other.Restore(engine.Snapshot(t), t + 100.0).ok()) std::abort();
      }
    }
  }
  (void)kp::FormatDiagnostics("fuzz", out.errors);
  return 0;
}
