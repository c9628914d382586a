// A shipped text file compiled into the program (see kp_embed_texts in
// CMakeLists.txt): the generated headers list these for the cell presets
// (drivers/sim/cell_presets.h) and the demo procedures (ui/cli/demo_procedures.h).
#pragma once

#include <string_view>

namespace kp::embedded {

struct EmbeddedText {
  std::string_view file;  // file name without its folder, e.g. "li_ion.toml"
  std::string_view text;
};

}  // namespace kp::embedded
