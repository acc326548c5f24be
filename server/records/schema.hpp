#pragma once
// The records file's schema and its versions (PRAGMA user_version). Version 1
// was the first, smaller schema: runs, seats, actions, alarms, notes. Version 2
// adds trainees and scores. A new file is built as version 1 and migrated, so
// the one migration path is the one always run.
#include <string>

#include "sqlite_db.hpp"

namespace droopline::records {

/// The schema version this build writes.
inline constexpr int kSchemaVersion = 2;

/// Brings `db` to kSchemaVersion: creates version 1 in an empty file, then runs
/// each migration step in a transaction of its own. A version newer than known
/// is refused (false, `error` says which and what to do); nothing is changed
/// then.
bool prepare_schema(Db& db, std::string& error);

}  // namespace droopline::records
