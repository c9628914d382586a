// `check FILE`: validates a procedure without a rig and prints the expanded
// plan with estimated duration and charge per step. Exit 2 on errors, each as
// "file:line:col: message".
#include <iostream>

#include "procedures/estimate.h"
#include "rig/cli/cli.h"
#include "rig/cli/procedure_file.h"

namespace kp::cli {
namespace {

struct CheckOptions {
  std::string file;
  double min_sample_s = 0.05;
};

int RunCheck(const CheckOptions& opt) {
  RigLimits rig;
  rig.min_sample_period_s = opt.min_sample_s;
  auto plan = LoadProcedure(opt.file, rig);
  if (!plan.ok()) {
    std::cerr << plan.status().message() << "\n";
    return ExitCodeFor(plan.status());
  }
  std::cout << DescribePlan(*plan, EstimatePlan(*plan));
  std::cout << opt.file << ": ok\n";
  return kExitOk;
}

}  // namespace

void RegisterCheck(CliRegistry& r) {
  static CheckOptions opt;
  CLI::App* c =
      r.Add("check", "Validate a procedure file and print the expanded plan with estimates", [] { return RunCheck(opt); });
  c->add_option("file", opt.file, "Procedure file")->required();
  c->add_option("--min-sample", opt.min_sample_s, "Fastest full reading of the intended rig, in seconds")->capture_default_str();
}

}  // namespace kp::cli
