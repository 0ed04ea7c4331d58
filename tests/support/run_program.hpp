// Runs a program as a child process with stdin, stdout and stderr redirected
// to files in a private temporary directory, and waits for it.
#pragma once

#include <filesystem>
#include <string>
#include <vector>

namespace lphi::testing {

// A fresh directory under the system's temporary directory, removed with its
// contents when the object goes away.
class TempDir {
 public:
  TempDir();
  ~TempDir();
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;

  const std::filesystem::path& path() const { return path_; }
  // Writes text to a file in the directory and returns its full path.
  std::string write(const std::string& name, const std::string& text) const;

 private:
  std::filesystem::path path_;
};

struct ProgramResult {
  int exit_code = -1;  // -1: did not exit normally (killed by a signal)
  std::string out;
  std::string err;
};

// Runs `program args...` with stdin_text as its standard input.
ProgramResult run_program(const std::string& program, const std::vector<std::string>& args,
                          const std::string& stdin_text = "");

}  // namespace lphi::testing
