// The schema's numbered migrations (schema/NNNN_name.sql, embedded into the
// binary at build time) and the one place that knows the schema version.
//
// Applying is all or nothing: every pending migration and its row in
// schema_version commit in one transaction, or none does. A database whose
// version is newer than the newest migration this binary holds is refused, so
// an old lphid never writes into a schema it does not understand.
#pragma once

#include <span>

#include "daemon/store/database.hpp"
#include "schema/migrations.hpp"

namespace lphi::store {

using schema::embedded_migrations;
using schema::latest_version;
using schema::Migration;

// The database's version: the highest recorded in schema_version, 0 for a
// database without that table.
Status read_schema_version(const Database& db, int& version);

// Brings db up to the newest of `migrations`; `applied` (optional) receives how
// many were applied now.
Status apply_migrations(Database& db, std::span<const Migration> migrations,
                        int* applied = nullptr);

}  // namespace lphi::store
