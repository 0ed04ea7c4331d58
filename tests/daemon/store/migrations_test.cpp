// The schema migrations, checked through SQLite's own catalogue (sqlite_master)
// on a separate connection.
#include <gtest/gtest.h>
#include <sqlite3.h>

#include "daemon/store/migrations.hpp"
#include "daemon/store/test_access.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::store {
namespace {

std::int64_t query_int(Database& db, const std::string& sql) {
  Statement s;
  EXPECT_TRUE(Statement::prepare(db, sql, s).ok()) << sql;
  EXPECT_EQ(s.step(), SQLITE_ROW) << sql;
  return s.column_int(0);
}

TEST(Migrations, EmbeddedOnesAreNumberedFromOne) {
  const auto m = embedded_migrations();
  ASSERT_FALSE(m.empty());
  for (std::size_t i = 0; i < m.size(); ++i) EXPECT_EQ(m[i].version, static_cast<int>(i) + 1);
  EXPECT_STREQ(m[0].name, "0001_initial");
  EXPECT_EQ(latest_version(m), static_cast<int>(m.size()));
}

TEST(Migrations, FreshDatabaseGetsTheSchemaAndTheVersion) {
  lphi::testing::TempDir dir;
  Database db;
  ASSERT_TRUE(open_writer_connection_for_tests(dir.file("lphi.db"), db).ok());
  int applied = -1;
  ASSERT_TRUE(apply_migrations(db, embedded_migrations(), &applied).ok());
  EXPECT_EQ(applied, latest_version(embedded_migrations()));
  int version = 0;
  ASSERT_TRUE(read_schema_version(db, version).ok());
  EXPECT_EQ(version, latest_version(embedded_migrations()));
  for (const char* table : {"sources", "samples", "lockin_readings", "thermometer_readings",
                            "field_readings", "gaps", "schema_version"}) {
    EXPECT_EQ(query_int(db, std::string("SELECT count(*) FROM sqlite_master WHERE type='table' AND name='") +
                                table + "'"),
              1)
        << table;
  }
  // The time-window index exists for every readings table.
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM sqlite_master WHERE type='index' AND name LIKE '%_readings_by_time'"), 3);
  // A second start applies nothing and keeps one row per migration.
  ASSERT_TRUE(apply_migrations(db, embedded_migrations(), &applied).ok());
  EXPECT_EQ(applied, 0);
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM schema_version"), latest_version(embedded_migrations()));
}

TEST(Migrations, NewerDatabaseIsRefusedWithTheVersions) {
  lphi::testing::TempDir dir;
  Database db;
  ASSERT_TRUE(open_writer_connection_for_tests(dir.file("lphi.db"), db).ok());
  ASSERT_TRUE(apply_migrations(db, embedded_migrations()).ok());
  ASSERT_TRUE(db.exec("INSERT INTO schema_version (version, name) VALUES (999, '0999_future')").ok());
  const Status s = apply_migrations(db, embedded_migrations());
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message().find("999"), std::string::npos) << s.message();
  EXPECT_NE(s.message().find("newer"), std::string::npos) << s.message();
}

TEST(Migrations, AFailingMigrationLeavesNothingBehind) {
  lphi::testing::TempDir dir;
  Database db;
  ASSERT_TRUE(open_writer_connection_for_tests(dir.file("lphi.db"), db).ok());
  const Migration broken[] = {{1, "0001_ok", "CREATE TABLE first_table (x INTEGER);"},
                              {2, "0002_broken", "CREATE TABLE second_table (x INTEGER); NOT SQL AT ALL;"}};
  const Status s = apply_migrations(db, broken);
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message().find("0002_broken"), std::string::npos) << s.message();
  // One transaction: the good first migration is rolled back with the bad one.
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM sqlite_master WHERE name IN ('first_table', 'second_table', 'schema_version')"), 0);
}

TEST(Migrations, HolesInTheNumberingAreRefused) {
  lphi::testing::TempDir dir;
  Database db;
  ASSERT_TRUE(open_writer_connection_for_tests(dir.file("lphi.db"), db).ok());
  const Migration holey[] = {{1, "0001_a", "CREATE TABLE a (x);"}, {3, "0003_c", "CREATE TABLE c (x);"}};
  const Status s = apply_migrations(db, holey);
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message().find("0003_c"), std::string::npos) << s.message();
}

}  // namespace
}  // namespace lphi::store
