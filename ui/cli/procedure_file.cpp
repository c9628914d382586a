#include "ui/cli/procedure_file.h"

#include <fmt/format.h>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "drivers/text_limits.h"
#include "procedures/procedure_parser.h"

namespace kp::cli {

Result<std::string> ReadProcedureText(const std::string& path) {
  std::error_code ec;
  if (!std::filesystem::is_regular_file(path, ec)) return NotFound(fmt::format("{}: no such procedure file", path));
  auto size = std::filesystem::file_size(path, ec);
  if (ec) return IoError(fmt::format("{}: cannot read its size", path));
  if (size > kMaxTextFileBytes)
    return InvalidInput(fmt::format("{}:1:1: not a procedure file ({} bytes; the limit is {} bytes)", path, size, kMaxTextFileBytes));
  std::ifstream in(path, std::ios::binary);
  if (!in) return IoError(fmt::format("{}: cannot open", path));
  std::ostringstream ss;
  ss << in.rdbuf();
  std::string text = ss.str();
  if (text.find('\0') != std::string::npos) return InvalidInput(fmt::format("{}: not a text file", path));
  return text;
}

Result<Plan> LoadProcedure(const std::string& path, const RigLimits& rig) {
  KP_ASSIGN_OR_RETURN(std::string text, ReadProcedureText(path));
  return CompileProcedure(text, path, rig);
}

}  // namespace kp::cli
