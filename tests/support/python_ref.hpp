#pragma once
// Runs a reference computation in Debian's python3 (numpy/scipy) for outside-source checks.
// Returns nullopt when /usr/bin/python3 or the module is missing: callers MESSAGE and skip.
#include "support/test_paths.hpp"
#include <array>
#include <cstdio>
#include <memory>
#include <optional>
#include <string>

namespace periodfit::test {

inline constexpr const char* kPython = "/usr/bin/python3";

/// True when /usr/bin/python3 can import every module in `modules` (e.g. "numpy, scipy").
inline bool python_has(const std::string& modules) {
  const std::string cmd = std::string(kPython) + " -c 'import " + modules + "' >/dev/null 2>&1";
  return std::system(cmd.c_str()) == 0;
}

/// Runs `/usr/bin/python3 <script> <args>` (script relative to tests/python/), returns stdout,
/// or nullopt if python is unavailable or the script failed.
inline std::optional<std::string> run_python(const std::string& script, const std::string& args = "") {
  const std::string cmd = std::string(kPython) + " '" + PERIODFIT_SOURCE_DIR + "/tests/python/" +
                          script + "' " + args + " 2>/dev/null";
  std::unique_ptr<FILE, int (*)(FILE*)> pipe(::popen(cmd.c_str(), "r"), ::pclose);
  if (!pipe) return std::nullopt;
  std::string out;
  std::array<char, 4096> buf{};
  std::size_t n = 0;
  while ((n = std::fread(buf.data(), 1, buf.size(), pipe.get())) > 0) out.append(buf.data(), n);
  const int status = ::pclose(pipe.release());
  if (status != 0) return std::nullopt;
  return out;
}

}  // namespace periodfit::test
