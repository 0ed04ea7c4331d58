// The one place that opens lphi's SQLite database, and thin owners of the
// SQLite handles. A Database or Statement is used by one thread at a time.
//
// One writer: anyone may open a read-only connection, but only the store
// layer can open the write connection (Database::open_writer is private to
// StoreWriter and to the store's test entry point, test_access.hpp). Every
// other write goes through the StoreWriter's thread as a WriteJob::task.
//
// Errors are values: every operation returns a Status whose message names
// what failed (the file, the statement, SQLite's own explanation).
//
// This header does not include <sqlite3.h> (the handles are forward
// declared), so code that only names a Database -- the sockets, through
// writer.hpp -- does not see SQLite; code that steps statements includes
// <sqlite3.h> itself for the result codes.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <type_traits>

#include "schema/status.hpp"

struct sqlite3;
struct sqlite3_stmt;

namespace lphi::store {

enum class OpenMode {
  writer,     // read-write, created if missing, WAL: Database::open_writer, store layer only
  read_only,  // every reader opens its own
};

enum class Synchronous { normal, full };

// The database file inside a data directory.
std::string database_path(std::string_view data_dir);

class Database {
 public:
  Database() = default;
  ~Database();
  Database(const Database&) = delete;
  Database& operator=(const Database&) = delete;
  Database(Database&& other) noexcept;
  Database& operator=(Database&& other) noexcept;

  // Opens path read-only with a busy timeout. Any mode but
  // OpenMode::read_only is refused with Status::invalid_input: the write
  // connection is the store writer's (open_writer).
  static Status open(const std::string& path, OpenMode mode, Database& out);

  sqlite3* handle() const { return db_; }
  bool is_open() const { return db_ != nullptr; }
  const std::string& path() const { return path_; }

  // Runs one or more statements that return no rows.
  Status exec(std::string_view sql);
  // The current SQLite error, prefixed with what was being done.
  Status error(std::string_view doing) const;

 private:
  sqlite3* db_ = nullptr;
  std::string path_;

  // Opens (creating if missing) the read-write connection: WAL, synchronous,
  // no automatic checkpoints. Does not apply migrations (see migrations.hpp).
  static Status open_writer(const std::string& path, Database& out, Synchronous synchronous);
  static Status open_connection(const std::string& path, OpenMode mode, Database& out,
                                Synchronous synchronous);
  friend class StoreWriter;
  friend Status open_writer_connection_for_tests(const std::string& path, Database& out);
};

class Statement {
 public:
  Statement() = default;
  ~Statement();
  Statement(const Statement&) = delete;
  Statement& operator=(const Statement&) = delete;
  Statement(Statement&& other) noexcept;
  Statement& operator=(Statement&& other) noexcept;

  static Status prepare(const Database& db, std::string_view sql, Statement& out);

  void bind(int index, double value);
  void bind(int index, std::int64_t value);
  void bind(int index, std::string_view value);
  void bind_null(int index);
  template <class T>
  void bind_optional(int index, const T& value) {
    if (value) {
      bind_value(index, *value);
    } else {
      bind_null(index);
    }
  }
  // Binds `values` to ?1, ?2, ... in order (bind_all_from: from ?first on).
  // An empty std::optional binds NULL, a bool binds 0 or 1, an unsigned count
  // binds as a 64-bit integer.
  template <class... T>
  void bind_all(const T&... values) {
    bind_all_from(1, values...);
  }
  template <class... T>
  void bind_all_from(int first, const T&... values) {
    int index = first;
    (bind_value(index++, values), ...);
  }

  // SQLITE_ROW, SQLITE_DONE or an error code.
  int step();
  void reset();

  bool column_is_null(int column) const;
  double column_double(int column) const;
  std::int64_t column_int(int column) const;
  std::string column_text(int column) const;

  sqlite3_stmt* handle() const { return stmt_; }

 private:
  template <class T>
  void bind_value(int index, const T& value) {
    if constexpr (std::is_same_v<T, bool>) {
      bind(index, std::int64_t{value ? 1 : 0});
    } else if constexpr (std::is_same_v<T, std::size_t>) {
      bind(index, static_cast<std::int64_t>(value));
    } else if constexpr (requires { value.has_value(); }) {
      bind_optional(index, value);
    } else {
      bind(index, value);
    }
  }

  sqlite3_stmt* stmt_ = nullptr;
};

}  // namespace lphi::store
