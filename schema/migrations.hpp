// The shape of lphi's database at rest: the numbered migrations in
// schema/NNNN_name.sql, embedded into the binary at build time. Applying them
// is the store's job (daemon/store/migrations.hpp); this header only says what
// they are, so that every program agrees on one list and one latest version.
#pragma once

#include <span>

namespace lphi::schema {

struct Migration {
  int version;       // the file's number; versions increase from 1 without holes
  const char* name;  // the file's name without .sql
  const char* sql;
};

// The migrations compiled into this binary, in increasing version.
std::span<const Migration> embedded_migrations();

// The highest version in `migrations`, 0 for none.
int latest_version(std::span<const Migration> migrations);

}  // namespace lphi::schema
