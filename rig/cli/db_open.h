// Helpers shared by the database-reading commands.
#pragma once

#include <memory>
#include <string>

#include "drivers/clock.h"
#include "rig/store.h"

namespace kp::cli {

// Opens an existing database (kNotFound when the file is missing) and marks
// runs whose runner process is gone as interrupted.
Result<std::unique_ptr<Store>> OpenExistingDb(const std::string& path, Clock& wall);

}  // namespace kp::cli
