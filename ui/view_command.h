// `kneepoint view`: the live panel. Registered from rig/main.cpp (rig does not
// depend on ui). Headless use: `--screenshot OUT.png` renders a few frames,
// writes the picture and exits.
#pragma once

#include "rig/cli/cli.h"

namespace kp::ui {

void RegisterView(cli::CliRegistry& registry);

}  // namespace kp::ui
