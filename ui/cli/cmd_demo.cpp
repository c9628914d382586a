// `demo`: the simulated qualification campaign (ui/cli/demo_campaign.h), in
// virtual time, into kneepoint-demo.db and kneepoint-demo-report/.
#include <algorithm>
#include <cmath>
#include <iostream>

#include <fmt/format.h>
#include <unistd.h>

#include "rig/safety_monitor.h"
#include "ui/cli/cli.h"
#include "ui/cli/demo_campaign.h"

namespace kp::cli {
namespace {

struct DemoCliOptions {
  std::string db = "kneepoint-demo.db";
  std::string report_dir = "kneepoint-demo-report";
};

// Redraws one line on a terminal: "[#####.....]  42 %  2 duty cycle". Into a
// file or a pipe (CI logs, `| tee`) it writes one plain line per plan item instead.
class ProgressLine {
 public:
  void Update(double fraction, const std::string& label) {
    int percent = static_cast<int>(fraction * 100.0);
    if (percent == percent_ && label == label_) return;
    if (!tty_) {
      if (label != label_) std::cout << fmt::format("  {:3d} %  {}\n", percent, label) << std::flush;
      percent_ = percent;
      label_ = label;
      return;
    }
    percent_ = percent;
    label_ = label;
    constexpr int kWidth = 30;
    int filled = std::clamp(static_cast<int>(std::lround(fraction * kWidth)), 0, kWidth);
    std::cout << fmt::format("\r  [{}{}] {:3d} %  {:<20}", std::string(static_cast<size_t>(filled), '#'),
                             std::string(static_cast<size_t>(kWidth - filled), '.'), percent, label)
              << std::flush;
  }

  // Ends the redrawn line (a terminal only).
  void Finish() {
    if (tty_ && percent_ >= 0) std::cout << "\n";
  }

 private:
  bool tty_ = isatty(STDOUT_FILENO) == 1;
  int percent_ = -1;
  std::string label_;
};

int RunDemo(const DemoCliOptions& opt) {
  std::cout << "Kneepoint demo: qualification plan for LN-2500 Li-ion cells (an invented cell) on the simulated bench\n"
               "(virtual time, no hardware touched).\n\n"
            << SafetyCautions() << "\n";
  ProgressLine progress;
  DemoOptions o;
  o.db_path = opt.db;
  o.report_dir = opt.report_dir;
  o.stop = InstallStopSignals();
  o.on_progress = [&](double fraction, const std::string& label) { progress.Update(fraction, label); };
  auto figures = RunDemoCampaign(o);
  progress.Finish();
  std::cout << "\n";
  if (!figures.ok()) return Fail(figures.status());
  std::cout << DemoSummaryText(*figures) << "\n";
  std::cout << fmt::format("Samples: {}   Report: {}\n\nNext (from the repository root):\n", opt.db, figures->index_html);
  std::cout << fmt::format("  ./build/kneepoint view --db {}        # the panel on these runs\n", opt.db);
  std::cout << fmt::format("  ./build/kneepoint report {} --db {}    # one run's figures (--html, --json, --csv)\n", figures->duty_run,
                           opt.db);
  std::cout << "  ./build/kneepoint sim --listen tcp:127.0.0.1:5025 --speed 60 &   # a simulated bench over TCP, then:\n"
               "  ./build/kneepoint run procedures/library/continuous-2a-same-peak.kpp --rig rig/examples/sim-tcp.toml \\\n"
               "      --cell sim-1 --db lab.db\n"
               "  cp rig/examples/bench-generic.toml bench.toml   # real instruments: set their addresses and profiles,\n"
               "                                                  # then run with --rig bench.toml\n";
  bool as_expected = figures->failing_outcome == Outcome::kAborted && !figures->failing_load_on_after;
  for (const DemoRun& r : figures->runs)
    if (r.run_id != figures->failing_run && r.outcome != Outcome::kCompleted) as_expected = false;
  return as_expected ? kExitOk : kExitFailure;
}

}  // namespace

void RegisterDemo(CliRegistry& r) {
  static DemoCliOptions opt;
  opt = DemoCliOptions{};
  CLI::App* demo = r.Add("demo", "Run the simulated demo campaign (virtual time, seconds)", [] { return RunDemo(opt); });
  demo->add_option("--db", opt.db, "Database to write (a previous demo database is replaced)")->capture_default_str();
  demo->add_option("--report-dir", opt.report_dir, "Folder for the HTML report (index.html and one page per run)")
      ->capture_default_str();
}

}  // namespace kp::cli
