// kneepoint: wires the libraries into one executable. Nothing depends on this file.
#include <array>

#include "rig/cli/cli.h"

int main(int argc, char** argv) {
  std::array<kp::cli::Registrar, 0> extra{};
  return kp::cli::RunCli(argc, argv, extra);
}
