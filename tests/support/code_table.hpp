#pragma once
// Checks of an enum's code table (issue 15: results carry enums, written as their codes through
// one code() per enum): every value has a code of its own, and the doc page that documents the
// field lists each code. A code renamed in code() but not in the docs (or a new value nobody
// documented) fails here before a user reads a string the contract does not name.
//
// Usage:
//   const auto c = test::codes_of(dsp::F0Method::forced, [](dsp::F0Method m) { return code(m); });
//   CHECK(test::distinct(c));
//   test::check_documented(c, "analyze-json.md", "| `f0_method` |", "\"", "\"");
#include <doctest/doctest.h>

#include <filesystem>
#include <fstream>
#include <set>
#include <string>
#include <vector>

#include "support/test_paths.hpp"

namespace periodfit::test {

/// The codes of the enum's values 0…last, in order (the enums are dense from 0).
template <class E, class Code>
std::vector<std::string> codes_of(E last, Code code) {
  std::vector<std::string> out;
  for (int i = 0; i <= static_cast<int>(last); ++i) out.emplace_back(code(static_cast<E>(i)));
  return out;
}

/// Every code non-empty and none twice.
inline bool distinct(const std::vector<std::string>& codes) {
  const std::set<std::string> unique(codes.begin(), codes.end());
  return unique.size() == codes.size() && !unique.count("");
}

/// The first line of docs/`doc` holding `marker` (empty when none).
inline std::string doc_line(const std::string& doc, const std::string& marker) {
  std::ifstream in(std::filesystem::path(PERIODFIT_SOURCE_DIR) / "docs" / doc);
  for (std::string line; std::getline(in, line);)
    if (line.find(marker) != std::string::npos) return line;
  return {};
}

/// Each code appears as open + code + close on the line of docs/`doc` holding `marker`.
inline void check_documented(const std::vector<std::string>& codes, const std::string& doc, const std::string& marker,
                             const std::string& open, const std::string& close) {
  const std::string line = doc_line(doc, marker);
  CAPTURE(doc);
  CAPTURE(marker);
  REQUIRE(!line.empty());
  for (const auto& c : codes) {
    CAPTURE(c);
    CHECK(line.find(open + c + close) != std::string::npos);
  }
}

}  // namespace periodfit::test
