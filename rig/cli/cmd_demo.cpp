// `demo`: the simulated campaign, in virtual time, into kneepoint-demo.db.
#include <filesystem>
#include <iostream>

#include <fmt/format.h>

#include "drivers/sim/cell_model.h"
#include "procedures/plan.h"
#include "rig/cli/cli.h"
#include "rig/run_controller.h"
#include "rig/run_report.h"
#include "rig/sim_rig.h"
#include "rig/store.h"

namespace kp::cli {
namespace {

struct DemoOptions {
  std::string db = "kneepoint-demo.db";
};

// The demo owns its database file: a previous demo database is replaced, any
// other file is left alone.
Status PrepareDemoDb(const std::string& path) {
  std::error_code ec;
  if (!std::filesystem::exists(path, ec)) return Status::Ok();
  {
    SteadyClock wall;
    Store::Options o;
    o.create = false;
    auto store = Store::Open(path, wall, o);
    if (!store.ok()) return InvalidInput(fmt::format("'{}' exists and is not a kneepoint database; choose another --db", path));
  }
  for (const char* suffix : {"", "-wal", "-shm"}) std::filesystem::remove(path + suffix, ec);
  return Status::Ok();
}

void ProgressBar(double fraction, const std::string& label) {
  int width = 30;
  int filled = static_cast<int>(fraction * width + 0.5);
  std::cout << fmt::format("\r  [{}{}] {:3.0f}%  {}", std::string(static_cast<size_t>(filled), '#'),
                           std::string(static_cast<size_t>(width - filled), '.'), fraction * 100.0, label)
            << std::flush;
}

int RunDemo(const DemoOptions& opt) {
  std::cout << "Kneepoint demo: a simulated bench in virtual time (no hardware touched).\n\n" << SafetyCautions() << "\n";
  if (Status st = PrepareDemoDb(opt.db); !st.ok()) return Fail(st);
  SteadyClock wall;
  auto store = Store::Open(opt.db, wall);
  if (!store.ok()) return Fail(store.status());

  // Scenario (invented): a 2,500 mAh cylindrical Li-ion cell on its
  // datasheet's rated-capacity check.
  CellSpec cell;
  cell.chemistry = "li-ion";
  cell.rated_mah = 2500.0;
  cell.nominal_v = 3.6;
  cell.max_v = 4.2;
  cell.cutoff_v = 2.75;
  cell.max_temp_c = 60.0;
  Plan plan = RatedCapacityPlan(cell);

  VirtualClock clock;
  SimRig rig(clock, sim::DemoLiIonCell(2.56));
  RunController controller(**store, clock, rig.roles());
  RunOptions ro;
  ro.cell_name = "demo-cell-A1";
  ro.stop = InstallStopSignals();
  double expected_s = 5.0 * 3600.0;
  ro.on_sample = [&](const Reading& r, double mah) {
    if (static_cast<long>(r.t_s) % 600 == 0)
      ProgressBar(std::min(1.0, r.t_s / expected_s), fmt::format("{:.3f} V  {:.0f} mAh   ", r.voltage_v, mah));
  };
  std::cout << fmt::format("1/1 rated-capacity check of {} ({:.0f} mAh rated), {}\n", ro.cell_name, cell.rated_mah, plan.steps[0].label);
  auto result = controller.Execute(plan, ro);
  ProgressBar(1.0, "done                    ");
  std::cout << "\n\n";
  if (!result.ok()) return Fail(result.status());
  auto rep = BuildRunReport(**store, result->run_id);
  if (!rep.ok()) return Fail(rep.status());
  std::cout << RunReportText(*rep) << "\n";
  std::cout << fmt::format("Samples are in {}. Next:\n", opt.db);
  std::cout << fmt::format("  kneepoint runs --db {}\n", opt.db);
  std::cout << fmt::format("  kneepoint report {} --db {} --json\n", result->run_id, opt.db);
  std::cout << fmt::format("  kneepoint export {} --db {} --csv run{}.csv\n", result->run_id, opt.db, result->run_id);
  return result->outcome == Outcome::kCompleted ? kExitOk : kExitFailure;
}

}  // namespace

void RegisterDemo(CliRegistry& r) {
  static DemoOptions opt;
  CLI::App* demo = r.Add("demo", "Run the simulated demo campaign (virtual time, seconds)", [] { return RunDemo(opt); });
  demo->add_option("--db", opt.db, "Database to write (a previous demo database is replaced)")->capture_default_str();
}

}  // namespace kp::cli
