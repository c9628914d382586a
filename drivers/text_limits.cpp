#include "drivers/text_limits.h"

#include <fmt/format.h>

#include <filesystem>
#include <fstream>
#include <sstream>

namespace kp {

Status CheckTextLimits(std::string_view text, std::string_view file) {
  if (text.size() > kMaxTextFileBytes)
    return InvalidInput(fmt::format("{}:1:1: file is {} bytes; the limit is {} bytes (is this the right file?)", file,
                                    text.size(), kMaxTextFileBytes));
  size_t pos = 0;
  int line = 1;
  while (pos <= text.size()) {
    size_t nl = text.find('\n', pos);
    size_t end = nl == std::string_view::npos ? text.size() : nl;
    if (end - pos > kMaxTextLineBytes)
      return InvalidInput(fmt::format("{}:{}:{}: line is {} bytes long; the limit is {} bytes", file, line,
                                      kMaxTextLineBytes + 1, end - pos, kMaxTextLineBytes));
    if (nl == std::string_view::npos) break;
    pos = nl + 1;
    ++line;
  }
  return Status::Ok();
}

Result<std::string> ReadLimitedTextFile(const std::string& path, std::string_view what) {
  std::error_code ec;
  auto size = std::filesystem::file_size(path, ec);
  if (ec) return NotFound(fmt::format("cannot read {} '{}'", what, path));
  if (size > kMaxTextFileBytes)
    return InvalidInput(fmt::format("{}:1:1: {} is {} bytes; the limit is {} bytes (is this the right file?)", path,
                                    what, size, kMaxTextFileBytes));
  std::ifstream f(path, std::ios::binary);
  if (!f) return NotFound(fmt::format("cannot read {} '{}'", what, path));
  std::stringstream ss;
  ss << f.rdbuf();
  std::string text = ss.str();
  KP_RETURN_IF_ERROR(CheckTextLimits(text, path));
  return text;
}

}  // namespace kp
