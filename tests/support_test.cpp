// Tests of the shared nouns: errors, channel selection, atomic output, number formatting.
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <thread>
#include <vector>

#include "core/capture.hpp"
#include "core/error.hpp"
#include "core/number_format.hpp"
#include "io/output_file.hpp"
#include "io/scratch_file.hpp"
#include "core/table.hpp"
#include "support/cli_runner.hpp"

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
  c.source = "bench.csv";
  c.channels = {{"v_in", "V", {}}, {"v_out", "V", {}}};
  CHECK(c.channel_index("v_out") == 1);
  CHECK(c.channel_index("V_IN") == 0);
  CHECK(c.channel_index("1") == 1);   // digits naming no channel: the 0-based position
  CHECK(c.channel_index("#1") == 1);
  CHECK(c.channel_index("#0") == 0);
  CHECK(c.channel_selector_warning("1").empty());
  CHECK_THROWS_WITH_AS(c.channel_index("v_ot"),
                       "unknown channel \"v_ot\" in bench.csv (did you mean \"v_out\"? channels: v_in, v_out)",
                       UnknownNameError);
  CHECK_THROWS_WITH_AS(c.channel_index("2"), "unknown channel \"2\" in bench.csv (channels: v_in, v_out)",
                       UnknownNameError);
  CHECK_THROWS_WITH_AS(c.channel_index("#2"), "unknown channel \"#2\" in bench.csv (channels: #0 v_in, #1 v_out)",
                       UnknownNameError);
  CHECK_THROWS_AS(c.channel_index("#"), UnknownNameError);
  CHECK_THROWS_AS(c.channel_index("#-1"), UnknownNameError);
}

TEST_CASE("capture: channels named with digits: a name wins, #N is the position, and a collision warns") {
  // A scope that names its columns 1 and 2 (issue 13): "1" is the channel named 1, at #0.
  Capture c;
  c.source = "scope.csv";
  c.channels = {{"1", "V", {}}, {"2", "V", {}}};
  CHECK(c.channel_index("1") == 0);
  CHECK(c.channel_index("2") == 1);
  CHECK(c.channel_index("#0") == 0);
  CHECK(c.channel_index("#1") == 1);
  CHECK(c.channel_index("0") == 0);  // names no channel: position 0
  CHECK(c.channel_selector_warning("1") ==
        "channel \"1\" in scope.csv is the channel named 1 (#0); for the channel at position 1 (\"2\") write #1");
  CHECK(c.channel_selector_warning("2").empty());   // position 2 does not exist: no ambiguity
  CHECK(c.channel_selector_warning("#1").empty());
  CHECK(c.channel_selector_warning("0").empty());
}

TEST_CASE("number format: shortest text reads back to the same double") {
  for (double v : {0.1, 1.0 / 3.0, 6.02214076e23, -1e-300, 5e-324}) {
    const std::string s = format_shortest(v);
    CHECK(std::strtod(s.c_str(), nullptr) == v);  // strtod: subnormals read back too
  }
  CHECK(format_shortest(0.1) == "0.1");
}

TEST_CASE("number format: value and u rounded as GUM 7.2.6, the GUM 7.2.2 example") {
  // JCGM 100:2008 §7.2.2: m_s = 100.021 47 g with u_c = 0.35 mg (u in the value's unit here).
  const ValueText t = format_value_u(100.02147, 0.00035);
  CHECK(t.value == "100.02147");
  CHECK(t.u == "0.00035");
  CHECK(format_with_u(100.02147, 0.00035, "g") == "100.02147 g, u = 0.00035 g");
  // §7.2.6: u to two significant digits, the value to the same decimal place.
  CHECK(format_with_u(0.99608182, 2.8e-05) == "0.996082, u = 2.8e-05");  // u < 1e-4: e-notation
  CHECK(format_with_u(1.00000113205, 3.3e-10) == "1.00000113205, u = 3.3e-10");
  CHECK(format_with_u(1000.01234, 0.0153, "Hz") == "1000.012 Hz, u = 0.015 Hz");
  // Rounding u can carry into a new digit: 0.0996 → 0.10, and the value follows to 0.01.
  CHECK(format_with_u(2.34567, 0.0996) == "2.35, u = 0.10");
  // u above 10: the value is rounded to tens, no invented decimals.
  CHECK(format_with_u(12345.6, 347) == "12350, u = 350");
  // Last digit beyond the thousands: e-notation, so no zero poses as a digit.
  CHECK(format_with_u(12345678.9, 345678) == "1.235e+07, u = 3.5e+05");
}

TEST_CASE("number format: value and u edge cases (u = 0, u not finite, zero, u above the value, negative)") {
  CHECK(format_with_u(1.23456789, 0, "V") == "1.23457 V, u = 0 V");   // exact: 6 significant digits
  CHECK(format_with_u(1.23456789, std::nan(""), "V") == "1.23457 V, u = n/a");
  CHECK(format_with_u(1.5, HUGE_VAL) == "1.5, u = inf");
  CHECK(format_with_u(0.0, 0.035) == "0.000, u = 0.035");
  CHECK(format_with_u(0.012, 0.35) == "0.01, u = 0.35");
  CHECK(format_with_u(-0.001, 0.35) == "0.00, u = 0.35");     // rounds to zero: no "-0.00"
  CHECK(format_with_u(-3, 120) == "0, u = 120");
  CHECK(format_with_u(-100.02147, 0.00035) == "-100.02147, u = 0.00035");
  CHECK(format_with_u(std::nan(""), 0.1) == "nan, u = 0.10");
  // Outside 1e-9 … 1e6 for the last digit: e-notation for both.
  CHECK(format_with_u(1.23456e-9, 3.4e-12) == "1.2346e-09, u = 3.4e-12");
  CHECK(format_with_u(6.02214076e23, 1.2e17) == "6.0221408e+23, u = 1.2e+17");
}

TEST_CASE("number format: an expanded interval carries its level and coverage factor") {
  CHECK(format_interval(0.9959, 1.0061, 0.0022, 0.95, 2.306) == "95 %: 0.9959 \xE2\x80\xA6 1.0061, k = 2.31");
  CHECK(format_interval(-3.1, -2.9, 0.05, 0.95, 1.96, "dB") == "95 %: -3.100 \xE2\x80\xA6 -2.900 dB, k = 1.96");
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

namespace {

/// Names in `dir`, sorted.
std::vector<std::string> names_in(const std::filesystem::path& dir) {
  std::vector<std::string> names;
  for (const auto& e : std::filesystem::directory_iterator(dir)) names.push_back(e.path().filename().string());
  std::sort(names.begin(), names.end());
  return names;
}

/// `n` bytes of a pattern that shows where a piece landed if pieces get swapped or cut.
std::string pattern_bytes(std::size_t n, char seed) {
  std::string s(n, '\0');
  for (std::size_t i = 0; i < n; ++i) s[i] = static_cast<char>(seed + static_cast<char>(i % 61));
  return s;
}

/// AtomicFile's write buffer (io/output_file.cpp, kBufferBytes): pieces below, at and above
/// it take the three paths of write().
constexpr std::size_t kWriterBuffer = 1 << 16;

}  // namespace

TEST_CASE("output file: AtomicFile written in pieces appears whole on commit, not before") {
  periodfit::test::TempDir dir("atomic_file_chunks");
  const std::string path = dir.file("page.html");
  std::string expected;
  {
    io::AtomicFile out(path);
    // Small pieces that fill the buffer, one that overflows it, one larger than the buffer.
    for (const std::size_t n : {std::size_t{10}, std::size_t{5000}, kWriterBuffer - 3, std::size_t{7},
                                3 * kWriterBuffer + 11, std::size_t{0}, std::size_t{1}}) {
      const std::string piece = pattern_bytes(n, static_cast<char>('A' + expected.size() % 7));
      out.write(piece);
      expected += piece;
    }
    // Before commit: only the temporary, named after the destination, exists.
    const auto before = names_in(dir.path);
    REQUIRE(before.size() == 1);
    CHECK(before[0].starts_with(".page.html.tmp-"));
    out.commit();
  }
  CHECK(io::read_file(path) == expected);
  CHECK(names_in(dir.path) == std::vector<std::string>{"page.html"});
}

TEST_CASE("output file: an AtomicFile destroyed without commit leaves neither destination nor temporary") {
  periodfit::test::TempDir dir("atomic_file_abandon");
  const std::string fresh = dir.file("new.json");
  {
    io::AtomicFile out(fresh);
    out.write(pattern_bytes(2 * kWriterBuffer, 'a'));  // some of it reached the disk
  }
  CHECK(names_in(dir.path).empty());
  // An existing destination keeps its old content.
  io::write_file_atomic(dir.file("old.json"), "old\n");
  {
    io::AtomicFile out(dir.file("old.json"));
    out.write("new\n");
  }
  CHECK(io::read_file(dir.file("old.json")) == "old\n");
  CHECK(names_in(dir.path) == std::vector<std::string>{"old.json"});
}

TEST_CASE("output file: a missing folder is an IoError naming the path and the reason") {
  periodfit::test::TempDir dir("atomic_file_missing");
  const std::string path = dir.file("missing/x.json");
  // strerror(ENOENT) on glibc.
  const std::string expected = path + ": cannot create: No such file or directory";
  CHECK_THROWS_WITH_AS(io::AtomicFile{path}, expected.c_str(), IoError);
  CHECK_THROWS_WITH_AS(io::write_file_atomic(path, "x"), expected.c_str(), IoError);
  try {
    io::AtomicFile out(path);
    FAIL("no IoError for a missing folder");
  } catch (const IoError& e) {
    CHECK(e.path() == path);
  }
  CHECK(names_in(dir.path).empty());
}

TEST_CASE("scratch file: parts appended from several threads read back by span, nothing left on disk") {
  periodfit::test::TempDir dir("scratch_file");
  std::vector<std::string> parts;
  for (std::size_t i = 0; i < 40; ++i)
    parts.push_back(pattern_bytes(i % 5 == 0 ? 70000 + i : 100 + 37 * i, static_cast<char>('a' + i % 20)));
  std::vector<io::ScratchFile::Span> spans(parts.size());
  {
    io::ScratchFile scratch(dir.path.string());
    // Two threads take alternate parts, as two batch workers finishing in any order would.
    const auto append_every_other = [&](std::size_t first) {
      for (std::size_t i = first; i < parts.size(); i += 2) spans[i] = scratch.append(parts[i]);
    };
    std::thread t1(append_every_other, 0), t2(append_every_other, 1);
    t1.join();
    t2.join();
    std::uint64_t total = 0;
    for (const auto& p : parts) total += p.size();
    CHECK(scratch.size() == total);
    // Unnamed from the start: the folder stays empty while the file is in use.
    CHECK(names_in(dir.path).empty());
    for (std::size_t i = parts.size(); i-- > 0;) {  // read back in reverse order
      std::string back;
      std::size_t largest_piece = 0;
      scratch.copy(spans[i], [&](std::string_view bytes) {
        back.append(bytes);
        largest_piece = std::max(largest_piece, bytes.size());
      });
      CAPTURE(i);
      CHECK(back == parts[i]);
      CHECK(largest_piece <= std::size_t{1 << 16});  // bounded read buffer (scratch_file.hpp)
    }
  }
  CHECK(names_in(dir.path).empty());
}

TEST_CASE("table: columns align, numbers to the right") {
  Table t({{"n", Table::Align::right}, {"name", Table::Align::left}});
  t.add_row({"1", "fundamental"});
  t.add_row({"10", "x"});
  CHECK(t.render() == " n  name\n--  -----------\n 1  fundamental\n10  x\n");
}
