// Opening an existing bench database: shared by the commands that read one
// and by the panel.
#pragma once

#include <memory>
#include <string>
#include <vector>

#include "drivers/clock.h"
#include "rig/store.h"

namespace kp {

// Opens an existing database (kNotFound when the file is missing) and marks
// runs whose runner process is gone as interrupted. A database written by a
// newer kneepoint is refused (it could not be written safely).
Result<std::unique_ptr<Store>> OpenExistingDb(const std::string& path, Clock& wall);
// The same for commands that only read (runs, report, export, compare): a
// database with a newer schema is opened read-only, with a note on stderr.
// A lab database (`postgresql://...`, rig/lab/lab_mirror.h) is read into an
// in-memory copy with every run listed; the overload with `runs` (numbers or
// UUIDs) also brings those runs' full records in. Nothing is written there.
Result<std::unique_ptr<Store>> OpenDbForReading(const std::string& path, Clock& wall);
Result<std::unique_ptr<Store>> OpenDbForReading(const std::string& path, Clock& wall, const std::vector<std::string>& runs);

}  // namespace kp
