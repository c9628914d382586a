// kneepoint: wires the libraries into one executable. Nothing depends on this file.
#include <array>

#include "ui/cli/cli.h"
#include "ui/view_command.h"

int main(int argc, char** argv) {
  std::array<kp::cli::Registrar, 1> extra{&kp::ui::RegisterView};
  return kp::cli::RunCli(argc, argv, extra);
}
