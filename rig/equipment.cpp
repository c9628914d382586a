#include "rig/equipment.h"

#include <cctype>

namespace kp {
namespace {

std::string Trim(std::string_view s) {
  size_t b = 0, e = s.size();
  while (b < e && std::isspace(static_cast<unsigned char>(s[b]))) ++b;
  while (e > b && std::isspace(static_cast<unsigned char>(s[e - 1]))) --e;
  return std::string(s.substr(b, e - b));
}

}  // namespace

void SplitIdentity(InstrumentRecord& r) {
  std::string* fields[] = {&r.manufacturer, &r.model, &r.serial, &r.firmware};
  for (std::string* f : fields) f->clear();
  std::string_view rest = r.identity;
  for (size_t k = 0; k < 4 && !rest.empty(); ++k) {
    size_t comma = k < 3 ? rest.find(',') : std::string_view::npos;
    *fields[k] = Trim(rest.substr(0, comma));
    rest = comma == std::string_view::npos ? std::string_view() : rest.substr(comma + 1);
  }
}

}  // namespace kp
