#pragma once
// Runs the built periodfit binary for CLI contract tests: captures exit code, stdout, stderr.
#include "support/test_paths.hpp"
#include <sys/wait.h>

#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <utility>
#include <vector>

namespace periodfit::test {

struct CliRun {
  int exit_code = -1;
  std::string out;  ///< standard output
  std::string err;  ///< standard error
};

inline std::string slurp(const std::filesystem::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

/// Runs `periodfit <args>` through /bin/sh (args are shell words: quote as needed).
inline CliRun run_cli(const std::string& args) {
  static int counter = 0;
  const auto dir = std::filesystem::temp_directory_path();
  const auto tag = std::to_string(::getpid()) + "_" + std::to_string(counter++);
  const auto out = dir / ("pf_cli_out_" + tag);
  const auto err = dir / ("pf_cli_err_" + tag);
  const std::string cmd = std::string("'") + PERIODFIT_EXE + "' " + args + " >'" + out.string() +
                          "' 2>'" + err.string() + "' </dev/null";
  const int status = std::system(cmd.c_str());
  CliRun r;
  r.exit_code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  r.out = slurp(out);
  r.err = slurp(err);
  std::filesystem::remove(out);
  std::filesystem::remove(err);
  return r;
}

/// A fresh empty folder under the system temp dir, removed when the object dies.
struct TempDir {
  std::filesystem::path path;
  explicit TempDir(const std::string& name) {
    path = std::filesystem::temp_directory_path() / ("periodfit_" + name + "_" + std::to_string(::getpid()));
    std::filesystem::remove_all(path);
    std::filesystem::create_directories(path);
  }
  ~TempDir() { std::error_code ec; std::filesystem::remove_all(path, ec); }
  std::string file(const std::string& name) const { return (path / name).string(); }
};

inline void write_text(const std::string& path, const std::string& text) {
  std::ofstream(path, std::ios::binary) << text;
}

/// Every regular file below `dir` but those named `except` (relative paths), as (relative path,
/// bytes) sorted by path: two report folders compare equal when their outputs are the same bytes.
inline std::vector<std::pair<std::string, std::string>> folder_files(const std::filesystem::path& dir,
                                                                    const std::string& except = "") {
  std::vector<std::pair<std::string, std::string>> out;
  for (const auto& e : std::filesystem::recursive_directory_iterator(dir)) {
    const std::string rel = std::filesystem::relative(e.path(), dir).string();
    if (e.is_regular_file() && rel != except) out.emplace_back(rel, slurp(e.path()));
  }
  std::sort(out.begin(), out.end());
  return out;
}

}  // namespace periodfit::test
