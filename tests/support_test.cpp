// Tests of the shared nouns: errors, channel selection, atomic output, number formatting.
#include <doctest/doctest.h>

#include <cstdlib>
#include <filesystem>

#include "core/capture.hpp"
#include "core/error.hpp"
#include "io/number_format.hpp"
#include "io/output_file.hpp"
#include "report/table.hpp"

using namespace periodfit;

TEST_CASE("error: input error reads path:line:column: message") {
  const InputError e("scope_07.csv", 17, 9, "expected a number in column \"v_out\", found \"1.2.3\"");
  CHECK(std::string(e.what()) ==
        "scope_07.csv:17:9: expected a number in column \"v_out\", found \"1.2.3\"");
  CHECK(std::string(InputError("a.wav", 0, 0, "truncated").what()) == "a.wav: truncated");
}

TEST_CASE("error: option error names field, value and constraint") {
  CHECK(std::string(OptionError("max_harmonic", "0", "must be >= 1").what()) ==
        "invalid option: max_harmonic = 0 (must be >= 1)");
}

TEST_CASE("capture: channels are selected by name, case-insensitively, or by index") {
  Capture c;
  c.channels = {{"v_in", "V", {}}, {"v_out", "V", {}}};
  CHECK(c.channel_index("v_out") == 1);
  CHECK(c.channel_index("V_IN") == 0);
  CHECK(c.channel_index("1") == 1);
  CHECK_THROWS_WITH_AS(c.channel_index("v_ot"),
                       "unknown channel \"v_ot\" (did you mean \"v_out\"? channels: v_in, v_out)",
                       UnknownNameError);
  CHECK_THROWS_AS(c.channel_index("2"), UnknownNameError);
}

TEST_CASE("number format: shortest text reads back to the same double") {
  for (double v : {0.1, 1.0 / 3.0, 6.02214076e23, -1e-300, 5e-324}) {
    const std::string s = io::format_shortest(v);
    CHECK(std::strtod(s.c_str(), nullptr) == v);  // strtod: subnormals read back too
  }
  CHECK(io::format_shortest(0.1) == "0.1");
}

TEST_CASE("output file: written atomically, no temporary left, missing folder is an IoError") {
  const auto dir = std::filesystem::temp_directory_path() / "periodfit_support_test";
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  const auto path = (dir / "out.json").string();
  io::write_file_atomic(path, "{\"a\":1}\n");
  CHECK(io::read_file(path) == "{\"a\":1}\n");
  CHECK(std::distance(std::filesystem::directory_iterator(dir), {}) == 1);
  CHECK_THROWS_AS(io::write_file_atomic((dir / "missing" / "x.json").string(), "x"), IoError);
  CHECK_THROWS_AS(io::read_file(dir.string()), IoError);
  std::filesystem::remove_all(dir);
}

TEST_CASE("table: columns align, numbers to the right") {
  report::Table t({{"n", report::Table::Align::right}, {"name", report::Table::Align::left}});
  t.add_row({"1", "fundamental"});
  t.add_row({"10", "x"});
  CHECK(t.render() == " n  name\n--  -----------\n 1  fundamental\n10  x\n");
}
