// The flag table (core/flags.hpp): every flag the analyses raise has a severity and a sentence,
// the default set that fails a batch file is exactly the `invalidates` flags, and a batch row's
// "channel: code" form maps back to its code.
#include <doctest/doctest.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <regex>
#include <set>
#include <sstream>
#include <string>

#include "core/flags.hpp"
#include "support/test_paths.hpp"
#include "support/code_table.hpp"

using namespace periodfit;
namespace fs = std::filesystem;

TEST_CASE("flags: every flag code the sources raise is in the table, with a sentence") {
  // The sources raise flags as `flags.push_back({Flag::name, …})` (analyze's channel flags, with
  // their message), or as `flags.push_back(Flag::name)` (frf, steady-state), whose
  // code is the name with '-' for '_'; a new flag without a table row would reach a batch
  // verdict with no severity.
  const std::regex raise(R"(flags\.push_back\(\s*\{?\s*(?:"([a-z0-9-]+)\"|Flag::([a-z0-9_]+)))");
  std::set<std::string> raised;
  for (const auto& e : fs::recursive_directory_iterator(fs::path(PERIODFIT_SOURCE_DIR) / "src")) {
    if (e.path().extension() != ".cpp") continue;
    std::ifstream in(e.path());
    std::stringstream text;
    text << in.rdbuf();
    const std::string s = text.str();
    for (std::sregex_iterator it(s.begin(), s.end(), raise), end; it != end; ++it) {
      std::string code = (*it)[1].matched ? (*it)[1].str() : (*it)[2].str();
      std::replace(code.begin(), code.end(), '_', '-');
      raised.insert(code);
    }
  }
  // From `grep -rn "flags.push_back" src/` at the time of writing: the analyze, identify and
  // predict flags.
  CHECK(raised.size() >= 15);
  for (const auto& code : raised) {
    CAPTURE(code);
    const FlagInfo* info = find_flag(code);
    REQUIRE(info != nullptr);
    CHECK(!info->meaning.empty());
    CHECK(!info->raised_by.empty());
  }
  CHECK(raised.size() == flag_catalogue().size());  // no row for a flag nothing raises
}

TEST_CASE("flags: the default failing set is the invalidates flags, clipped and aliasing-risk among them") {
  const std::vector<std::string> expected = {"clipped",      "aliasing-risk", "not-converged",      "dc-only",
                                             "not-periodic", "forced-f0-off", "model-not-converged"};
  CHECK(invalidating_flags() == expected);
  CHECK(find_flag("few-periods")->severity == FlagSeverity::caution);
  CHECK(find_flag("numerical-floor")->severity == FlagSeverity::info);
  CHECK(std::string(severity_name(FlagSeverity::invalidates)) == "invalidates");
  CHECK(find_flag("no-such-flag") == nullptr);
}

TEST_CASE("flags: every Flag has its row, in the enum's order, and statuses take their flag's code") {
  // flag_info indexes the table by the enum's value, so row i must be Flag i.
  const auto& table = flag_catalogue();
  for (std::size_t i = 0; i < table.size(); ++i) {
    CAPTURE(table[i].code);
    CHECK(static_cast<std::size_t>(table[i].flag) == i);
    CHECK(&flag_info(table[i].flag) == &table[i]);
  }
  CHECK(table.size() == static_cast<std::size_t>(Flag::no_fundamental) + 1);
  CHECK(code(Status::ok) == "ok");
  CHECK(code(Status::model_inadequate) == "model-inadequate");
  CHECK(code(Status::model_not_converged) == "model-not-converged");
  CHECK(code(Status::truncation_visible) == "truncation-visible");
  CHECK(codes({Flag::nonlinear, Flag::gibbs}) == std::vector<std::string>{"nonlinear", "gibbs"});
}

TEST_CASE("flags: a batch row's channel prefix is stripped to the code") {
  CHECK(flag_code("v_out: clipped") == "clipped");
  CHECK(flag_code("a: b: drift") == "drift");  // a channel name may hold ": "
  CHECK(flag_code("nonlinear") == "nonlinear");
}

TEST_CASE("flags: the severity table in docs/batch-config.md is the library's table") {
  std::ifstream in(fs::path(PERIODFIT_SOURCE_DIR) / "docs" / "batch-config.md");
  const std::regex row(R"(^\| `([a-z0-9-]+)` \| (invalidates|caution|info) \| )");
  std::vector<std::pair<std::string, std::string>> documented;
  for (std::string line; std::getline(in, line);) {
    std::smatch m;
    if (std::regex_search(line, m, row)) documented.emplace_back(m[1], m[2]);
  }
  std::vector<std::pair<std::string, std::string>> library;
  for (const auto& f : flag_catalogue()) library.emplace_back(std::string(f.code), severity_name(f.severity));
  CHECK(documented == library);
}

TEST_CASE("flags: every Status has its own code, a flag's, and not-converged is analyze's documented status") {
  const auto c = test::codes_of(Status::truncation_visible, [](Status s) { return code(s); });
  CHECK(test::distinct(c));
  for (std::size_t i = 1; i < c.size(); ++i) {
    CAPTURE(c[i]);
    CHECK(find_flag(c[i]) != nullptr);
  }
  CHECK(code(Status::not_converged) == code(Flag::not_converged));
  test::check_documented({"ok", "not-converged"}, "analyze-json.md", "| `status` |", "\"", "\"");
  test::check_documented({"ok"}, "excite.md", "| `status` |", "\"", "\"");
}
