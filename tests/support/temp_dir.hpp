// TempDir: a fresh private directory under the system's temporary directory
// for one test, removed with its contents when the object goes away. The one
// temporary-directory type of lphi's tests.
//
// Not copyable (the directory has one owner). Construction throws
// std::system_error when no directory can be made: a test cannot run then.
#pragma once

#include <string>

namespace lphi::testing {

class TempDir {
 public:
  TempDir();
  ~TempDir();
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;

  const std::string& path() const { return path_; }
  // The full path of `name` inside the directory (nothing is created).
  std::string file(const std::string& name) const { return path_ + "/" + name; }
  // Writes text to `name` inside the directory and returns its full path;
  // throws std::runtime_error when it cannot.
  std::string write(const std::string& name, const std::string& text) const;

 private:
  std::string path_;
};

}  // namespace lphi::testing
