#pragma once
/// The results database schema, versioned and migrated forward by periodfit
/// (docs/results-db.md documents every table and column as a contract).
///
/// Version 1: run, capture (path, size, content hash, verdict), capture_metadata, result
/// (every measured quantity with u, k and its 95 % interval), verdict (every limit outcome with
/// its margin), flag, run_capture (which runs saw which capture).
/// Version 2: who and what — serial, lot, fixture, station and operator on each capture, station
/// and operator on each run, and indexes for the production queries.
///
/// migrate() brings any older database up to kSchemaVersion inside one transaction (PostgreSQL:
/// under an advisory lock, so stations starting together migrate once); a database written by a
/// newer periodfit is refused with a DatabaseError rather than written with an older layout.
#include "store/database.hpp"

namespace periodfit::store {

inline constexpr int kSchemaVersion = 3;

/// The schema version of `db` (0 = empty database, no periodfit tables).
int schema_version(Connection& db);

/// Migrates `db` forward to `target` (default: the current version). Returns the version found
/// before. Throws DatabaseError when the database is newer than `target`.
int migrate(Connection& db, int target = kSchemaVersion);

}  // namespace periodfit::store
