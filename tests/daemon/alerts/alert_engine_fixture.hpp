// The fixture of the alert engine tests (alert_engine_test.cpp,
// alert_engine_lifecycle_test.cpp): a fresh database file in a temp dir, and
// a count of one alert's stored changes. Outside an anonymous namespace so
// that both files' TEST_F(Engine, ...) share one fixture class, as GoogleTest
// requires of one test suite. Each test has its own instance: no sharing
// between tests or threads.
#pragma once

#include <cstdint>
#include <string>

#include <gtest/gtest.h>

#include "tests/daemon/alerts/alert_test_support.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::alerts::testing {

class Engine : public ::testing::Test {
 protected:
  lphi::testing::TempDir dir;
  std::string db = dir.file("lphi.db");

  std::int64_t events(std::int64_t id, const std::string& change) {
    return query_int(db, "SELECT count(*) FROM alert_events WHERE alert_id = " + std::to_string(id) +
                             " AND change = '" + change + "'");
  }
};

}  // namespace lphi::alerts::testing
