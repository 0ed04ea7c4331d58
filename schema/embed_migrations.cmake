# Turns the numbered .sql migrations into a C++ source file (run with cmake -P).
# Inputs: OUTPUT (the .cpp to write), MIGRATIONS (a ;-separated list of .sql files).
set(body "")
set(count 0)
list(SORT MIGRATIONS)
foreach(path IN LISTS MIGRATIONS)
  get_filename_component(name "${path}" NAME_WE)
  string(REGEX MATCH "^[0-9]+" number "${name}")
  if(number STREQUAL "")
    message(FATAL_ERROR "migration file '${path}' must start with its number, e.g. 0002_add_fits.sql")
  endif()
  math(EXPR version "${number}")
  file(READ "${path}" sql)
  string(FIND "${sql}" ")lphisql\"" clash)
  if(NOT clash EQUAL -1)
    message(FATAL_ERROR "migration '${path}' contains the raw-string delimiter )lphisql\"")
  endif()
  string(APPEND body "  {${version}, \"${name}\", R\"lphisql(${sql})lphisql\"},\n")
  math(EXPR count "${count} + 1")
endforeach()
set(content "// Generated from schema/*.sql by schema/embed_migrations.cmake. Do not edit.
#include \"schema/migrations.hpp\"

namespace lphi::schema {

namespace {
const Migration embedded[] = {
${body}};
}  // namespace

std::span<const Migration> embedded_migrations() { return embedded; }

int latest_version(std::span<const Migration> migrations) {
  int latest = 0;
  for (const auto& m : migrations) latest = m.version > latest ? m.version : latest;
  return latest;
}

}  // namespace lphi::schema
")
file(WRITE "${OUTPUT}.tmp" "${content}")
file(COPY_FILE "${OUTPUT}.tmp" "${OUTPUT}" ONLY_IF_DIFFERENT)
file(REMOVE "${OUTPUT}.tmp")
