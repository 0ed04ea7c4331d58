#include "daemon/store/database.hpp"

#include <sqlite3.h>

#include <utility>

#include "daemon/store/test_access.hpp"

namespace lphi::store {

std::string database_path(std::string_view data_dir) {
  std::string path(data_dir);
  if (!path.empty() && path.back() != '/') path += '/';
  return path + "lphi.db";
}

Database::~Database() {
  if (db_ != nullptr) sqlite3_close_v2(db_);
}

Database::Database(Database&& other) noexcept
    : db_(std::exchange(other.db_, nullptr)), path_(std::move(other.path_)) {}

Database& Database::operator=(Database&& other) noexcept {
  if (this != &other) {
    if (db_ != nullptr) sqlite3_close_v2(db_);
    db_ = std::exchange(other.db_, nullptr);
    path_ = std::move(other.path_);
  }
  return *this;
}

Status Database::open(const std::string& path, OpenMode mode, Database& out) {
  if (mode != OpenMode::read_only) {
    return Status::invalid_input("cannot open " + path +
                                 " for writing: only the store writer writes the database");
  }
  return open_connection(path, mode, out, Synchronous::normal);
}

Status Database::open_writer(const std::string& path, Database& out, Synchronous synchronous) {
  return open_connection(path, OpenMode::writer, out, synchronous);
}

Status open_writer_connection_for_tests(const std::string& path, Database& out) {
  return Database::open_writer(path, out, Synchronous::normal);
}

Status Database::open_connection(const std::string& path, OpenMode mode, Database& out,
                                 Synchronous synchronous) {
  Database db;
  db.path_ = path;
  const int flags = (mode == OpenMode::writer ? SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE
                                              : SQLITE_OPEN_READONLY) |
                    SQLITE_OPEN_NOMUTEX;
  const int rc = sqlite3_open_v2(path.c_str(), &db.db_, flags, nullptr);
  if (rc != SQLITE_OK) {
    std::string why = db.db_ != nullptr ? sqlite3_errmsg(db.db_) : sqlite3_errstr(rc);
    return Status::storage("cannot open the database " + path + ": " + why);
  }
  sqlite3_extended_result_codes(db.db_, 1);
  sqlite3_busy_timeout(db.db_, 10000);
  if (mode == OpenMode::writer) {
    // WAL lets readers run beside the writer. Checkpoints are run by the
    // store's checkpointer, not inside a commit on the ingest path.
    if (auto s = db.exec("PRAGMA journal_mode=WAL; PRAGMA wal_autocheckpoint=0;"); !s) return s;
    if (auto s = db.exec(synchronous == Synchronous::full ? "PRAGMA synchronous=FULL;"
                                                          : "PRAGMA synchronous=NORMAL;");
        !s) {
      return s;
    }
  }
  out = std::move(db);
  return Status::success();
}

Status Database::exec(std::string_view sql) {
  const std::string text(sql);
  char* message = nullptr;
  const int rc = sqlite3_exec(db_, text.c_str(), nullptr, nullptr, &message);
  if (rc != SQLITE_OK) {
    std::string why = message != nullptr ? message : sqlite3_errstr(rc);
    sqlite3_free(message);
    std::string shown = text.size() > 80 ? text.substr(0, 80) + "..." : text;
    return Status::storage(path_ + ": " + why + " (in: " + shown + ")");
  }
  return Status::success();
}

Status Database::error(std::string_view doing) const {
  return Status::storage(path_ + ": " + std::string(doing) + ": " + sqlite3_errmsg(db_));
}

Statement::~Statement() {
  if (stmt_ != nullptr) sqlite3_finalize(stmt_);
}

Statement::Statement(Statement&& other) noexcept : stmt_(std::exchange(other.stmt_, nullptr)) {}

Statement& Statement::operator=(Statement&& other) noexcept {
  if (this != &other) {
    if (stmt_ != nullptr) sqlite3_finalize(stmt_);
    stmt_ = std::exchange(other.stmt_, nullptr);
  }
  return *this;
}

Status Statement::prepare(const Database& db, std::string_view sql, Statement& out) {
  Statement s;
  const int rc = sqlite3_prepare_v3(db.handle(), sql.data(), static_cast<int>(sql.size()),
                                    SQLITE_PREPARE_PERSISTENT, &s.stmt_, nullptr);
  if (rc != SQLITE_OK) {
    return Status::storage(db.path() + ": cannot prepare \"" + std::string(sql) +
                           "\": " + sqlite3_errmsg(db.handle()));
  }
  out = std::move(s);
  return Status::success();
}

void Statement::bind(int index, double value) { sqlite3_bind_double(stmt_, index, value); }
void Statement::bind(int index, std::int64_t value) {
  sqlite3_bind_int64(stmt_, index, static_cast<sqlite3_int64>(value));
}
void Statement::bind(int index, std::string_view value) {
  sqlite3_bind_text(stmt_, index, value.data(), static_cast<int>(value.size()), SQLITE_TRANSIENT);
}
void Statement::bind_null(int index) { sqlite3_bind_null(stmt_, index); }

int Statement::step() { return sqlite3_step(stmt_); }
void Statement::reset() {
  sqlite3_reset(stmt_);
  sqlite3_clear_bindings(stmt_);
}

bool Statement::column_is_null(int column) const {
  return sqlite3_column_type(stmt_, column) == SQLITE_NULL;
}
double Statement::column_double(int column) const { return sqlite3_column_double(stmt_, column); }
std::int64_t Statement::column_int(int column) const {
  return static_cast<std::int64_t>(sqlite3_column_int64(stmt_, column));
}
std::string Statement::column_text(int column) const {
  const auto* text = sqlite3_column_text(stmt_, column);
  if (text == nullptr) return {};
  return std::string(reinterpret_cast<const char*>(text),
                     static_cast<std::size_t>(sqlite3_column_bytes(stmt_, column)));
}

}  // namespace lphi::store
