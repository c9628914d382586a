// `kneepoint view`: the live panel as a command. It is the glue between the
// panel and the command line (neither knows the other), built into the
// `kneepoint` executable with ui/main.cpp, which registers it (rig does not
// depend on ui). Headless use: `--screenshot OUT.png` renders a few frames,
// writes the picture and exits.
#pragma once

#include "ui/cli/cli.h"

namespace kp::ui {

void RegisterView(cli::CliRegistry& registry);

}  // namespace kp::ui
