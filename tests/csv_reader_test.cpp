// CSV import: every shape the importer recognises without flags, and every bad input with its
// whole message. The parser takes text, so most cases feed strings; read_csv is exercised on
// files for the OS errors and on the testdata/csv shapes.
#include "support/test_paths.hpp"
#include <doctest/doctest.h>

#include <sys/stat.h>

#include <cmath>
#include <filesystem>
#include <string>

#include "core/error.hpp"
#include "io/csv_reader.hpp"
#include "support/cli_runner.hpp"

using namespace periodfit;
using io::parse_csv;

namespace {

/// Values typed in the CSV are read back by std::from_chars, which rounds correctly
/// (C++17 [charconv.from.chars]); derived quantities (rate = (N-1)/(t_last - t_0)) carry a
/// few roundings of the subtraction and division.
constexpr double kDerivedTolerance = 1e-12;

bool near(double a, double b, double rel = kDerivedTolerance) {
  return std::fabs(a - b) <= rel * std::max(std::fabs(a), std::fabs(b));
}

std::string message_of(const std::string& text, const io::CsvOptions& options = {}) {
  try {
    parse_csv(text, "in.csv", options);
  } catch (const Error& e) {
    return e.what();
  }
  return "(no error)";
}

}  // namespace

TEST_CASE("csv: comma, header with the three unit styles, time column gives rate and t0") {
  const Capture c = parse_csv(
      "t (s),v_in [V],i_out/mA\n"
      "-0.002,1.5,10\n"
      "-0.001,2.5,20\n"
      "0,-3.25e-1,+30\n"
      "0.001,.5,4E1\n",
      "scope.csv");
  CHECK(c.source == "scope.csv");
  CHECK(c.format == "csv");
  REQUIRE(c.channels.size() == 2);
  CHECK(c.channels[0].name == "v_in");
  CHECK(c.channels[0].unit == "V");
  CHECK(c.channels[1].name == "i_out");
  CHECK(c.channels[1].unit == "mA");
  CHECK(c.channels[0].samples == std::vector<double>{1.5, 2.5, -0.325, 0.5});
  CHECK(c.channels[1].samples == std::vector<double>{10, 20, 30, 40});
  // rate = (N-1)/(t_last - t_0) = 3/0.003 s; t0 = the first time value (t = 0 is the column's zero)
  CHECK(near(c.sample_rate_hz, 1000.0));
  CHECK(c.t0_s == -0.002);
  CHECK(c.metadata.empty());
}

TEST_CASE("csv: semicolon with decimal comma, UTF-8 BOM and CRLF line ends") {
  const Capture c = parse_csv(
      "\xEF\xBB\xBFZeit (ms);U1 (V);U2 (V)\r\n"
      "0,0;1,25;-0,5\r\n"
      "0,5;1,5;-0,25\r\n"
      "1,0;1,75;0\r\n",
      "logger.csv");
  REQUIRE(c.channels.size() == 2);
  CHECK(c.channels[0].name == "U1");
  CHECK(c.channels[0].samples == std::vector<double>{1.25, 1.5, 1.75});
  CHECK(c.channels[1].samples == std::vector<double>{-0.5, -0.25, 0});
  // "Zeit (ms)": a column with a time unit is the time column; 0.5 ms steps → 2 kHz
  CHECK(near(c.sample_rate_hz, 2000.0));
}

TEST_CASE("csv: tab with decimal comma") {
  const Capture c = parse_csv("time\tch A\tch B\n0\t1,5\t2\n0,1\t2,5\t3\n0,2\t3,5\t4\n", "tab.txt");
  REQUIRE(c.channels.size() == 2);
  CHECK(c.channels[0].name == "ch A");
  CHECK(c.channels[0].samples == std::vector<double>{1.5, 2.5, 3.5});
  CHECK(near(c.sample_rate_hz, 10.0));
}

TEST_CASE("csv: runs of spaces, no header: a uniformly increasing first column is time") {
  const Capture c = parse_csv(
      "   0.000    1.0   -2.0\n"
      "   0.001    1.5   -2.5\n"
      "   0.002    2.0   -3.0\n",
      "columns.dat");
  REQUIRE(c.channels.size() == 2);
  CHECK(c.channels[0].name == "ch0");
  CHECK(c.channels[1].name == "ch1");
  CHECK(c.channels[1].samples == std::vector<double>{-2.0, -2.5, -3.0});
  CHECK(near(c.sample_rate_hz, 1000.0));
}

TEST_CASE("csv: without header or time column every column is data; rate from key: value") {
  const Capture c = parse_csv("Sample rate: 48 kHz\n0.5,1\n-0.5,2\n0.25,3\n", "raw.csv");
  REQUIRE(c.channels.size() == 2);
  CHECK(c.channels[0].name == "ch0");
  CHECK(c.channels[0].samples == std::vector<double>{0.5, -0.5, 0.25});
  CHECK(c.sample_rate_hz == 48000.0);
  CHECK(c.t0_s == 0);
  REQUIRE(c.metadata.size() == 1);
  CHECK(c.metadata[0] == std::pair<std::string, std::string>{"Sample rate", "48 kHz"});
}

TEST_CASE("csv: comments, blank lines, quoted fields and trailing empty columns") {
  const Capture c = parse_csv(
      "# exported by a bench logger (invented)\n"
      "\n"
      "\"t\",\"probe \"\"A\"\" (V)\",\"b, c\",,\n"
      "\"0\",\"1.5\",2,,\n"
      "# a comment inside the data\n"
      "\n"
      "1,2.5,3,,\n"
      "2,3.5,4\n",
      "quoted.csv");
  REQUIRE(c.channels.size() == 2);
  CHECK(c.channels[0].name == "probe \"A\"");
  CHECK(c.channels[0].unit == "V");
  CHECK(c.channels[1].name == "b, c");
  CHECK(c.channels[0].samples == std::vector<double>{1.5, 2.5, 3.5});
  CHECK(near(c.sample_rate_hz, 1.0));
  REQUIRE(c.metadata.size() == 1);
  CHECK(c.metadata[0].first == "text");
  CHECK(c.metadata[0].second == "exported by a bench logger (invented)");
}

TEST_CASE("csv: preamble key,value pairs and free text are kept in order; interval gives rate") {
  const Capture c = parse_csv(
      "Bench 4 step response (invented)\n"
      "Model,DSO-0000\n"
      "Sample Interval,2,us\n"
      "Probe,10X\n"
      "v_in,v_out\n"
      "1,2\n"
      "3,4\n",
      "pre.csv");
  REQUIRE(c.metadata.size() == 4);
  CHECK(c.metadata[0] == std::pair<std::string, std::string>{"text", "Bench 4 step response (invented)"});
  CHECK(c.metadata[1] == std::pair<std::string, std::string>{"Model", "DSO-0000"});
  CHECK(c.metadata[2] == std::pair<std::string, std::string>{"Sample Interval", "2 us"});
  CHECK(c.metadata[3] == std::pair<std::string, std::string>{"Probe", "10X"});
  CHECK(c.channel_names() == std::vector<std::string>{"v_in", "v_out"});
  CHECK(near(c.sample_rate_hz, 500000.0));  // 1 / 2 us
}

namespace {
struct RateLine {
  const char* line;
  double rate_hz;  // 1/interval or the stated rate, unit prefixes by SI
};
}  // namespace

TEST_CASE("csv: preamble interval and rate keys with units") {
  const RateLine cases[] = {
      {"Sample Interval,1e-06", 1e6},   {"X Increment,5.0E-04,s", 2000},
      {"sample_interval = 10 ms", 100}, {"Fs,44100", 44100},
      {"Sample Rate,2.5 MSa/s", 2.5e6}, {"SampleRate: 96 kHz", 96000},
      {"interval,250 ns", 4e6},         {"rate,1 kS/s", 1000},
  };
  for (const auto& k : cases) {
    CAPTURE(k.line);
    const Capture c = parse_csv(std::string(k.line) + "\nv\n1\n2\n", "k.csv");
    CHECK(near(c.sample_rate_hz, k.rate_hz));
  }
}

TEST_CASE("csv: a units row after the header, and a time column in milliseconds") {
  const Capture c = parse_csv("x-axis,1,2\nsecond,Volt,Volt\n0,1,2\n1e-3,3,4\n2e-3,5,6\n", "units.csv");
  CHECK(c.channel_names() == std::vector<std::string>{"1", "2"});
  CHECK(c.channels[0].unit == "V");
  CHECK(near(c.sample_rate_hz, 1000.0));
  const Capture ms = parse_csv("time (ms),v\n10,1\n10.5,2\n11,3\n", "ms.csv");
  CHECK(near(ms.sample_rate_hz, 2000.0));
  CHECK(near(ms.t0_s, 0.010));
}

TEST_CASE("csv: a preamble row of vertical units sets the channel units") {
  // Per data channel, per column (the time column's unit skipped), in brackets; the header's
  // own unit stays; a horizontal-units row belongs to the time axis and sets no channel unit.
  const Capture per_channel = parse_csv("Vertical Units,V,mV\nTIME,CH1,CH2\n0,1,2\n1e-3,3,4\n", "v.csv");
  CHECK(per_channel.channels[0].unit == "V");
  CHECK(per_channel.channels[1].unit == "mV");
  const Capture per_column = parse_csv("Units,s,(A),(V)\nTime,i,v\n0,1,2\n1e-3,3,4\n", "u.csv");
  CHECK(per_column.channels[0].unit == "A");
  CHECK(per_column.channels[1].unit == "V");
  const Capture header_wins = parse_csv("Vertical Units,V,V\nTIME,CH1 (mV),CH2\n0,1,2\n1e-3,3,4\n", "h.csv");
  CHECK(header_wins.channels[0].unit == "mV");
  CHECK(header_wins.channels[1].unit == "V");
  const Capture horizontal = parse_csv("Horizontal Units,s\nTIME,CH1\n0,1\n1e-3,3\n", "x.csv");
  CHECK(horizontal.channels[0].unit.empty());
  // A value that is no unit word: the row is metadata only.
  const Capture not_units = parse_csv("Units,metric,stuff\nTIME,CH1,CH2\n0,1,2\n1e-3,3,4\n", "n.csv");
  CHECK(not_units.channels[0].unit.empty());
  CHECK(not_units.metadata.front() == std::pair<std::string, std::string>{"Units", "metric stuff"});
}

TEST_CASE("csv: preamble rates read the instrument case of prefixes (MHz, mhz, MS/s, ms)") {
  // The shared quantity reader (io/quantity.hpp) with the instrument rule: m and M are mega
  // before a frequency unit, milli before a time unit; a bare prefix reads as SI.
  const RateLine cases[] = {{"Sample Rate,1 mhz", 1e6}, {"Sample Rate,1MHZ", 1e6}, {"Sample Rate,2 ms/s", 2e6},
                        {"Sample Interval,2 MS", 500}, {"Sample Rate,48k", 48000}};
  for (const auto& k : cases) {
    CAPTURE(k.line);
    const Capture c = parse_csv(std::string(k.line) + "\nv\n1\n2\n", "k.csv");
    CHECK(near(c.sample_rate_hz, k.rate_hz));
  }
}

TEST_CASE("csv: --rate overrides the time column, which then only gives t0") {
  io::CsvOptions options;
  options.rate_hz = 250;
  // The time column is irregular; with a given rate it is not checked.
  const Capture c = parse_csv("t,v\n1,1\n2,2\n4,3\n", "r.csv", options);
  CHECK(c.sample_rate_hz == 250.0);
  CHECK(c.t0_s == 1.0);
  CHECK(c.channels.size() == 1);
}

TEST_CASE("csv: the time column can be named or switched off") {
  io::CsvOptions none;
  none.time_column = "none";
  none.rate_hz = 10;
  const Capture all = parse_csv("t,v\n0,1\n1,2\n", "n.csv", none);
  CHECK(all.channel_names() == std::vector<std::string>{"t", "v"});
  io::CsvOptions named;
  named.time_column = "stamp";
  const Capture c = parse_csv("v,stamp\n1,0\n2,0.5\n3,1\n", "s.csv", named);
  CHECK(c.channel_names() == std::vector<std::string>{"v"});
  CHECK(near(c.sample_rate_hz, 2.0));
  named.time_column = "stmp";
  CHECK(message_of("v,stamp\n1,0\n2,0.5\n", named) ==
        "in.csv: time column: unknown column \"stmp\" (did you mean \"stamp\"? columns: v, stamp)");
}

TEST_CASE("csv: rounded printed times are uniform; a missing sample is not") {
  // 5 significant digits, as some scopes print: t = k * 3e-7 s rounded, the rounding (up to
  // 5e-11 s at t ~ 1e-5) is 1.7e-4 of the step, more than 1e-4, and must be allowed for.
  std::string text = "t,v\n";
  char buffer[64];
  for (int k = 0; k < 60; ++k) {
    std::snprintf(buffer, sizeof buffer, "%.4e,%d\n", (k + 100) * 3e-7, k);
    text += buffer;
  }
  const Capture c = parse_csv(text, "round.csv");
  CHECK(near(c.sample_rate_hz, 1 / 3e-7, 1e-4));
  // Drop row 30 (file line 32): the step there is two sample intervals.
  std::string gap = "t,v\n";
  for (int k = 0; k < 60; ++k) {
    if (k == 30) continue;
    std::snprintf(buffer, sizeof buffer, "%.4e,%d\n", (k + 100) * 3e-7, k);
    gap += buffer;
  }
  CHECK(message_of(gap) ==
        "in.csv:32:1: time is not uniform: \"3.9300e-05\" comes 6e-07 s after the previous row, "
        "expected 3e-07 s (within 1e-4 relative); give --rate HZ to ignore the time column");
}

TEST_CASE("csv: read_csv reads the testdata shapes") {
  const std::string dir = std::string(PERIODFIT_TESTDATA_DIR) + "/csv/";
  SUBCASE("scope export with a key,value preamble") {
    const Capture c = io::read_csv(dir + "scope_preamble.csv");
    CHECK(c.channel_names() == std::vector<std::string>{"CH1", "CH2"});
    CHECK(c.channels[0].unit == "V");
    CHECK(near(c.sample_rate_hz, 1e6));  // "Sample Interval,1.000000e-06,s"
    CHECK(c.t0_s == -2e-5);              // first TIME value
    CHECK(c.sample_count() == 40);
  }
  SUBCASE("European logger: BOM, CRLF, semicolons, decimal comma") {
    const Capture c = io::read_csv(dir + "logger_decimal_comma.csv");
    CHECK(c.channel_names() == std::vector<std::string>{"U_ein", "U_aus"});
    CHECK(near(c.sample_rate_hz, 1000.0));
    CHECK(c.channels[1].samples.front() == -0.125);
  }
  SUBCASE("whitespace columns without header, rate in a comment") {
    const Capture c = io::read_csv(dir + "columns_no_header.txt");
    CHECK(c.channel_names() == std::vector<std::string>{"ch0", "ch1"});
    CHECK(c.sample_rate_hz == 8000.0);
  }
  SUBCASE("header followed by a units row") {
    const Capture c = io::read_csv(dir + "units_row.csv");
    CHECK(c.channel_names() == std::vector<std::string>{"1", "2"});
    CHECK(c.channels[0].unit == "V");
    CHECK(near(c.sample_rate_hz, 5e5));
  }
}

TEST_CASE("csv: bad content gives file:line:column and quotes the text") {
  CHECK(message_of("") == "in.csv: the file is empty");
  CHECK(message_of("\xEF\xBB\xBF \r\n\n") == "in.csv: the file is empty");
  CHECK(message_of("# only\n# comments\n") == "in.csv: no data rows (the file holds only comments)");
  CHECK(message_of("t,v_out (V)\n") == "in.csv: no data rows below the header on line 1");
  CHECK(message_of("Model,X\nt,v\n") ==
        "in.csv: no data rows: no line holds only numbers separated by commas, semicolons, tabs "
        "or spaces (the last line, 2, reads \"t,v\")");
  CHECK(message_of("t,v_out\n0,1\n1,1.2.3\n2,3\n") ==
        "in.csv:3:3: expected a number in column \"v_out\", found \"1.2.3\"");
  CHECK(message_of("t,v_out\n0,1\n1, 2 V\n2,3\n") ==
        "in.csv:3:4: expected a number in column \"v_out\", found \"2 V\"");
  CHECK(message_of("t,a,b\n0,1,2\n1,,2\n2,3,4\n") ==
        "in.csv:3:3: empty cell in column \"a\" (expected a number)");
  CHECK(message_of("t,a,b\n0,1,2\n1,2,\n") == "in.csv:3:5: empty cell in column \"b\" (expected a number)");
  CHECK(message_of("t,v\n0,1\n1,NaN\n2,3\n") == "in.csv:3:3: expected a finite number in column \"v\", found \"NaN\"");
  CHECK(message_of("t,v\n0,1\n1,-inf\n2,3\n") == "in.csv:3:3: expected a finite number in column \"v\", found \"-inf\"");
  CHECK(message_of("t,v\n0,1\n1,1e999\n2,3\n") ==
        "in.csv:3:3: number out of the range of a double in column \"v\": \"1e999\"");
  CHECK(message_of("t,a,b\n0,1,2\n1,2\n2,3,4\n") == "in.csv:3: row has 2 fields, expected 3 as in the header on line 1");
  CHECK(message_of("t,a,b\n0,1,2\n1,2,3,4\n2,3,4\n") ==
        "in.csv:3:7: row has 4 fields, expected 3 as in the header on line 1");
  CHECK(message_of("0,1,2\n1,2,3\n2,3\n", {}) ==
        "in.csv:3: row has 2 fields, expected 3 as in the first data row on line 1");
  CHECK(message_of("t,v\n0,1\n\"1,2\n") == "in.csv:3: a quoted field is not closed, or text follows its closing quote");
  CHECK(message_of("t,v,v\n0,1,2\n1,2,3\n") == "in.csv:1:5: column name \"v\" appears twice");
}

TEST_CASE("csv: time column errors name the first bad row") {
  CHECK(message_of("t,v\n0,1\n0.001,2\n0.002,3\n0.004,4\n0.005,5\n") ==
        "in.csv:5:1: time is not uniform: \"0.004\" comes 0.002 s after the previous row, expected "
        "0.001 s (within 1e-4 relative); give --rate HZ to ignore the time column");
  CHECK(message_of("t,v\n0,1\n0.001,2\n0.001,3\n") ==
        "in.csv:4:1: time does not increase: \"0.001\" follows 0.001 in column \"t\" (give --rate HZ "
        "to ignore the time column)");
}

TEST_CASE("csv: missing or contradictory rate says how to give it") {
  CHECK(message_of("v_in,v_out\n1,2\n3,4\n") ==
        "in.csv: no sample rate: no time column and no sample interval or rate in the preamble; "
        "give it with --rate HZ");
  CHECK(message_of("t,v\n0,1\n") == "in.csv: no sample rate: the time column has a single row; give it with --rate HZ");
  CHECK(message_of("Sample Interval,1e-3\nt,v\n0,1\n0.002,2\n0.004,3\n") ==
        "in.csv:1: the stated sample rate \"1e-3\" (1000 Hz) disagrees with the time column (500 Hz); "
        "give --rate HZ to choose");
  CHECK(message_of("Sample Interval,0\nv\n1\n2\n") == "in.csv:1: a sample interval must be > 0, found \"0\"");
  io::CsvOptions bad;
  bad.rate_hz = -1;
  CHECK(message_of("v\n1\n", bad) == "invalid option: rate_hz = -1 (must be > 0, or 0 to take the rate from the file)");
}

TEST_CASE("csv: read_csv reports missing, directory and unreadable paths with the OS reason") {
  const test::TempDir dir("csv_reader");
  CHECK_THROWS_WITH_AS(io::read_csv(dir.file("missing.csv")),
                       (dir.file("missing.csv") + ": cannot open: No such file or directory").c_str(), IoError);
  CHECK_THROWS_WITH_AS(io::read_csv(dir.path.string()),
                       (dir.path.string() + ": cannot read: Is a directory").c_str(), IoError);
  test::write_text(dir.file("empty.csv"), "");
  CHECK_THROWS_WITH_AS(io::read_csv(dir.file("empty.csv")), (dir.file("empty.csv") + ": the file is empty").c_str(),
                       InputError);
  test::write_text(dir.file("locked.csv"), "t,v\n0,1\n1,2\n");
  ::chmod(dir.file("locked.csv").c_str(), 0);
  if (::geteuid() == 0) {
    MESSAGE("running as root: permission-denied is tested through the CLI as an unprivileged user");
  } else {
    CHECK_THROWS_WITH_AS(io::read_csv(dir.file("locked.csv")),
                         (dir.file("locked.csv") + ": cannot open: Permission denied").c_str(), IoError);
  }
}

TEST_CASE("csv: a large file streams with exact values and row count") {
  // 200 000 rows cross several release windows of the mapped reader.
  const test::TempDir dir("csv_large");
  std::string text = "t,a,b\n";
  text.reserve(200000 * 24);
  for (int k = 0; k < 200000; ++k)
    text += std::to_string(k) + "e-6," + std::to_string(k % 1000) + "," + std::to_string(-k) + "\n";
  test::write_text(dir.file("big.csv"), text);
  const Capture c = io::read_csv(dir.file("big.csv"));
  REQUIRE(c.sample_count() == 200000);
  CHECK(c.channels[0].samples[123456] == 456.0);
  CHECK(c.channels[1].samples[199999] == -199999.0);
  CHECK(near(c.sample_rate_hz, 1e6));
  // The rows are counted before parsing, so each channel is allocated once at its final size
  // (no doubling growth): capacity is the line count after the data start, plus one.
  CHECK(c.channels[0].samples.capacity() <= c.sample_count() + 1);
}

// ---- issue 11, class 10: messages that mislead -----------------------------------------------

TEST_CASE("csv: time headers in min and h are time, scaled to seconds") {
  // 1 min = 60 s, 1 h = 3600 s (SI brochure, 9th ed., Table 8: non-SI units accepted for use).
  const Capture m = parse_csv("time (min),v\n0,1\n0.5,2\n1,3\n", "m.csv");
  REQUIRE(m.channels.size() == 1);
  CHECK(near(m.sample_rate_hz, 1.0 / 30));
  const Capture h = parse_csv("t [h],v\n0,1\n0.25,2\n0.5,3\n", "h.csv");
  REQUIRE(h.channels.size() == 1);
  CHECK(near(h.sample_rate_hz, 1.0 / 900));
}

TEST_CASE("csv: a preamble beyond the detection limit is named as such, not as 'no data rows'") {
  std::string text;
  for (int i = 0; i < 2100; ++i) text += "note " + std::to_string(i) + " of a long preamble\n";
  text += "v\n1\n2\n3\n";
  CHECK(message_of(text) ==
        "in.csv: no data rows within the first 2000 lines, where the data are looked for: the preamble "
        "(header text above the data) exceeds that limit; shorten it");
}

TEST_CASE("csv: a NUL byte in a bad cell appears escaped in the message, which goes on after it") {
  const std::string text = std::string("v\n1\n2\nab") + '\0' + "cd\n4\n";
  const std::string what = message_of(text);
  CHECK_MESSAGE(what.find("ab\\x00cd") != std::string::npos, what);
  CHECK(what.find('\0') == std::string::npos);
}
