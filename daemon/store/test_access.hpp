// The store's entry point for tests and benchmarks that need a raw write
// connection to a database (to build a schema by hand, to corrupt a row, to
// measure SQLite alone). lphid's own code never includes this header: in the
// daemon every write goes through the StoreWriter's thread
// (deploy/check-layering refuses an include of it from daemon/, drivers/ or
// schema/ outside daemon/store/).
//
// Thread safety: the connection is used by one thread at a time, like any
// Database.
#pragma once

#include <string>

#include "daemon/store/database.hpp"

namespace lphi::store {

// Opens (creating if missing) path read-write, as the store writer does (WAL,
// synchronous NORMAL), without applying migrations.
Status open_writer_connection_for_tests(const std::string& path, Database& out);

}  // namespace lphi::store
