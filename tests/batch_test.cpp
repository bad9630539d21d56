// The batch runner as a library: file discovery, pass/fail/error classification, ERROR rows
// for unreadable or non-periodic captures, identical outputs for any number of jobs, and the
// exit-code mapping. The DUT is a textbook second-order low-pass (see batch_fixture.hpp), so
// which limit passes follows from its closed form.
#include <doctest/doctest.h>
#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <nlohmann/json.hpp>
#include <chrono>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "batch/config.hpp"
#include "batch/file_analysis.hpp"
#include "batch/runner.hpp"
#include "batch/shard.hpp"
#include "core/safe_text.hpp"
#include "core/table.hpp"
#include "batch_fixture.hpp"
#include "core/error.hpp"
#include "core/flags.hpp"
#include "core/number_format.hpp"
#include "support/cli_runner.hpp"

using namespace periodfit;
using namespace periodfit::batch;
namespace fs = std::filesystem;
using periodfit::test::slurp;

namespace {

struct Boards {
  periodfit::test::TempDir dir{"batch_boards"};
  Boards() {
    test::LowpassCapture good;
    test::write_lowpass_csv(dir.file("board_a.csv"), good);
    test::LowpassCapture wrong_corner = good;
    wrong_corner.fn_hz = 1200;  // 20 % high: outside 1000 ± 5 %
    wrong_corner.seed = 2;
    test::write_lowpass_csv(dir.file("board_b.csv"), wrong_corner);
    test::LowpassCapture good2 = good;
    good2.seed = 3;
    good2.zeta = 0.52;
    test::write_lowpass_csv(dir.file("board_c.csv"), good2);
    // A cell that is not a number: the importer's error becomes the row's message.
    test::write_text(dir.file("board_d.csv"), "time (s),v_in (V),v_out (V)\n0,1,2\n0.001,1.2.3,4\n");
    // Only noise on the input: no periodic component.
    test::LowpassCapture silent = good;
    silent.seed = 4;
    std::string text = "time (s),v_in (V),v_out (V)\n";
    std::mt19937 rng(9);
    std::normal_distribution<double> n(0, 1e-3);
    for (int k = 0; k < 4000; ++k)
      text += std::to_string(k * 2e-5) + "," + std::to_string(n(rng)) + "," + std::to_string(n(rng)) + "\n";
    test::write_text(dir.file("board_e.csv"), text);
    test::write_text(dir.file("notes.md"), "not a capture\n");
    test::write_text(dir.file(".hidden.csv"), "skipped\n");
  }
};

BatchOptions options_for(const Boards& boards, const std::string& out, int jobs) {
  BatchOptions o;
  o.inputs = {boards.dir.path.string()};
  o.report_dir = out + "/report";  // inside the TempDir, so its lock file goes with it
  o.jobs = jobs;
  o.config = parse_batch_config(test::lowpass_config(), "test.toml");
  return o;
}

}  // namespace

TEST_CASE("batch: files are found by extension or pattern, sorted, hidden files skipped") {
  Boards boards;
  fs::create_directories(boards.dir.path / "sub");
  test::write_text(boards.dir.file("sub/board_z.csv"), "x\n");
  const std::string d = boards.dir.path.string();
  FileSelection sel;
  CHECK(find_captures({d}, sel) ==
        std::vector<std::string>{d + "/board_a.csv", d + "/board_b.csv", d + "/board_c.csv",
                                 d + "/board_d.csv", d + "/board_e.csv"});
  sel.recursive = true;
  CHECK(find_captures({d}, sel).back() == d + "/sub/board_z.csv");
  sel.patterns = {"board_[ab].csv", "*.md"};
  sel.recursive = false;
  CHECK(find_captures({d}, sel) ==
        std::vector<std::string>{d + "/board_a.csv", d + "/board_b.csv", d + "/notes.md"});
  // A file given directly is taken whatever its name; duplicates collapse.
  CHECK(find_captures({d + "/notes.md", d + "/notes.md"}, FileSelection{}) ==
        std::vector<std::string>{d + "/notes.md"});
  CHECK_THROWS_WITH_AS(find_captures({d + "/missing"}, sel),
                       (d + "/missing: cannot open: No such file or directory").c_str(), IoError);
  sel.patterns = {"*.nothing"};
  CHECK_THROWS_WITH_AS(find_captures({d}, sel), ("no capture files found in " + d + " matching the patterns").c_str(),
                       InputError);
}

TEST_CASE("batch: pass, fail and error rows; errors never stop the batch") {
  Boards boards;
  periodfit::test::TempDir out("batch_out");
  const BatchResult r = run_batch(options_for(boards, out.path.string(), 2));
  REQUIRE(r.files.size() == 5);
  CHECK(r.passed == 2);
  CHECK(r.failed == 1);
  CHECK(r.errors == 2);
  CHECK(batch_exit_code(r) == ExitCode::error);
  CHECK(batch_totals_line(r) == "2 pass, 1 fail, 2 error");
  const auto& a = r.files[0];
  CHECK(a.status == report::FileStatus::pass);
  // The corner of board b: 1200 Hz is the textbook ωn of the synthesised section.
  const auto& b = r.files[1];
  CHECK(b.status == report::FileStatus::fail);
  REQUIRE(b.limits.size() == 3);
  CHECK(b.limits[0].passed);
  CHECK_FALSE(b.limits[1].passed);
  CHECK(b.limits[1].measured.value == doctest::Approx(1200).epsilon(0.01));
  CHECK(b.limits[1].verdict == "fail: outside the range");
  CHECK(b.limits[2].passed);
  const auto& d = r.files[3];
  CHECK(d.status == report::FileStatus::error);
  CHECK(d.error.find("board_d.csv:3:") != std::string::npos);
  CHECK(d.error.find("1.2.3") != std::string::npos);
  const auto& e = r.files[4];
  CHECK(e.status == report::FileStatus::error);
  CHECK(e.error.find("periodic") != std::string::npos);
  // Every output exists, with one JSON per file.
  for (const char* name : {"summary.csv", "summary.json", "report.html"})
    CHECK(fs::exists(out.path / "report" / name));
  for (const auto& f : r.files) CHECK(fs::exists(out.path / "report" / f.json_file));
  CHECK(r.files[0].json_file == "files/0001-board_a.csv.json");
  // No temporary file is left behind.
  for (const auto& [path, content] : periodfit::test::folder_files(out.path / "report")) CHECK(path.find(".tmp-") == std::string::npos);
}

TEST_CASE("batch: outputs are byte-identical for --jobs 1 and --jobs 2") {
  Boards boards;
  periodfit::test::TempDir one("batch_jobs1"), two("batch_jobs2");
  run_batch(options_for(boards, one.path.string(), 1));
  run_batch(options_for(boards, two.path.string(), 2));
  const auto a = periodfit::test::folder_files(one.path / "report"), b = periodfit::test::folder_files(two.path / "report");
  REQUIRE(a.size() == b.size());
  for (std::size_t i = 0; i < a.size(); ++i) {
    CAPTURE(a[i].first);
    CHECK(a[i].first == b[i].first);
    CHECK(a[i].second == b[i].second);
  }
}

namespace {

// RFC 4180 cells of one CSV line (quotes doubled inside quoted cells).
std::vector<std::string> csv_cells(const std::string& line) {
  std::vector<std::string> cells(1);
  bool quoted = false;
  for (std::size_t i = 0; i < line.size(); ++i) {
    const char c = line[i];
    if (quoted && c == '"' && i + 1 < line.size() && line[i + 1] == '"') {
      cells.back() += '"';
      ++i;
    } else if (c == '"') {
      quoted = !quoted;
    } else if (c == ',' && !quoted) {
      cells.emplace_back();
    } else {
      cells.back() += c;
    }
  }
  return cells;
}

std::vector<std::string> csv_lines(const std::string& csv) {
  std::vector<std::string> lines;
  std::size_t at = 0;
  while (at < csv.size()) {
    const std::size_t nl = csv.find('\n', at);
    lines.push_back(csv.substr(at, nl - at));
    at = nl == std::string::npos ? csv.size() : nl + 1;
  }
  return lines;
}

std::string limit_header(int k, const std::string& key) {
  const std::string p = "limit" + std::to_string(k) + ":";
  return p + key + "," + p + "u," + p + "k," + p + "lo95," + p + "hi95," + p + "min," + p + "max," + p +
         "allowed," + p + "passed," + p + "verdict," + p + "margin," + p + "margin_fraction";
}

// Margins by hand (docs/batch-output.md): distance to the nearest bound; over hi − lo.
double margin_two_sided(double v, double lo, double hi) { return std::min(v - lo, hi - v); }

// Shortest round-trip text parses back to the very double it was written from.
constexpr double kRoundTrip = 0;
// The analysed value against its closed form: the capture is written with 9 significant digits.
constexpr double kNineDigits = 1e-7;

}  // namespace

TEST_CASE("batch: summary.csv header and a row, cell by cell, with margins by hand and true/false booleans") {
  Boards boards;
  periodfit::test::TempDir out("batch_csv");
  run_batch(options_for(boards, out.path.string(), 1));
  const auto lines = csv_lines(slurp(out.path / "report" / "summary.csv"));
  REQUIRE(lines.size() == 6);  // header + 5 files
  CHECK(lines[0] == "path,status,f0_hz,excited,order,dc_gain,delay_s,cost_ratio,adequate,linear," +
                        limit_header(1, "dc_gain") + "," + limit_header(2, "natural_frequency_hz[pole=1]") +
                        "," + limit_header(3, "damping[pole=1]") +
                        ",flags,failing_flags,failing_limits,message");
  // board_a: the textbook filter (g = 1, fn = 1000 Hz, ζ = 0.5), passing every limit.
  const auto c = csv_cells(lines[1]);
  REQUIRE(c.size() == 10 + 3 * 12 + 4);
  CHECK(c[0] == (boards.dir.path / "board_a.csv").string());
  CHECK(c[1] == "PASS");
  CHECK(std::stod(c[2]) == doctest::Approx(100.013).epsilon(1e-6));  // the fixture's f0
  CHECK(c[3] == "25");                                               // odd harmonics 1 … 49
  CHECK(c[4] == "0/2");
  CHECK(c[5] == c[10]);  // the dc_gain key column is limit 1's value
  CHECK(c[6] == "0");    // no delay estimated
  CHECK(std::stod(c[7]) > 0);
  // Booleans: true/false in every machine output. This capture's 0/2 fit sits near the lower
  // edge of its cost band (cost 38.4, band 39.8 … 117), so which one it is stays open here; an
  // inadequate model carries the caution flag model-inadequate, which does not fail the file.
  CHECK((c[8] == "true" || c[8] == "false"));
  CHECK(c[9] == "true");
  // limit 1: dc_gain 1 ± 0.02 with guard band; k is the model's normal 95 % factor.
  const double g = std::stod(c[10]), gu = std::stod(c[11]), gk = std::stod(c[12]);
  CHECK(g == doctest::Approx(1).epsilon(0.02));
  CHECK(gu > 0);
  CHECK(gk == model_coverage_factor());
  CHECK(std::stod(c[13]) == doctest::Approx(g - gk * gu).epsilon(1e-12));
  CHECK(std::stod(c[14]) == doctest::Approx(g + gk * gu).epsilon(1e-12));
  CHECK(c[15] == "0.98");
  CHECK(c[16] == "1.02");
  CHECK(c[17] == "1 \xC2\xB1 0.02 (guard band: 95 % interval inside)");
  CHECK(c[18] == "true");
  CHECK(c[19] == "pass");
  CHECK(std::stod(c[20]) == doctest::Approx(margin_two_sided(g, 0.98, 1.02)).epsilon(1e-12));
  CHECK(std::stod(c[21]) == doctest::Approx(margin_two_sided(g, 0.98, 1.02) / 0.04).epsilon(1e-9));
  // limit 2: fn 1000 ± 5 % = 950 … 1050.
  const double fn = std::stod(c[22]);
  CHECK(fn == doctest::Approx(1000).epsilon(0.05));
  CHECK(c[27] == "950");
  CHECK(c[28] == "1050");
  CHECK(c[29] == "1000 Hz \xC2\xB1 5 %");
  CHECK(c[30] == "true");
  CHECK(c[31] == "pass");
  CHECK(std::stod(c[32]) == doctest::Approx(margin_two_sided(fn, 950, 1050)).epsilon(1e-12));
  CHECK(std::stod(c[33]) == doctest::Approx(margin_two_sided(fn, 950, 1050) / 100).epsilon(1e-9));
  // limit 3: ζ 0.45 … 0.55.
  const double z = std::stod(c[34]);
  CHECK(c[39] == "0.45");
  CHECK(c[40] == "0.55");
  CHECK(c[41] == "0.45 \xE2\x80\xA6 0.55");
  CHECK(c[42] == "true");
  CHECK(std::stod(c[44]) == doctest::Approx(margin_two_sided(z, 0.45, 0.55)).epsilon(1e-12));
  CHECK(std::stod(c[45]) == doctest::Approx(margin_two_sided(z, 0.45, 0.55) / 0.1).epsilon(1e-9));
  // At most the caution flag, nothing failing, no message.
  CHECK(c[46] == (c[8] == "false" ? "model-inadequate" : ""));
  CHECK(c[47] == "");
  CHECK(c[48] == "");
  CHECK(c[49] == "");
  // board_b fails the corner limit: passed false, a negative margin (outside).
  const auto b = csv_cells(lines[2]);
  CHECK(b[1] == "FAIL");
  CHECK(b[30] == "false");
  CHECK(b[31] == "fail: outside the range");
  CHECK(std::stod(b[32]) < 0);
  CHECK(b[48].rfind("natural_frequency_hz of pole 1 = 1", 0) == 0);
}

TEST_CASE("batch: limits written in %, dB, kHz and mV; a 9.3 % THD fails 8 %, the whole row by hand") {
  periodfit::test::TempDir dir("batch_units");
  test::SineCapture s;  // 1 V at 1.2 kHz with a 93 mV third harmonic: THD 0.093 (IEEE Std 1241)
  test::write_sine_csv(dir.file("a.csv"), s);
  BatchOptions o;
  o.inputs = {dir.file("a.csv")};
  o.report_dir = dir.file("report");
  o.jobs = 1;
  o.config = parse_batch_config(R"([[limit]]
result = "thd"
max = "8 %"
[[limit]]
result = "thd"
max = "-20 dB"
[[limit]]
result = "f0_hz"
nominal = "1.2 kHz"
tolerance = "5 Hz"
[[limit]]
result = "amplitude"
harmonic = 1
nominal = "1 V"
tolerance = "20 mV"
)",
                                "units.toml");
  const BatchResult r = run_batch(o);
  CHECK(batch_exit_code(r) == ExitCode::fail);
  const auto lines = csv_lines(slurp(dir.path / "report" / "summary.csv"));
  REQUIRE(lines.size() == 2);
  CHECK(lines[0] == "path,status,channel,f0_hz,rms,thd,sinad_db," + limit_header(1, "thd") + "," +
                        limit_header(2, "thd") + "," + limit_header(3, "f0_hz") + "," +
                        limit_header(4, "amplitude[n=1]") + ",flags,failing_flags,failing_limits,message");
  const auto c = csv_cells(lines[1]);
  REQUIRE(c.size() == 7 + 4 * 12 + 4);
  CHECK(c[0] == dir.file("a.csv"));
  CHECK(c[1] == "FAIL");
  CHECK(c[2] == "v");
  CHECK(std::stod(c[3]) == doctest::Approx(1200).epsilon(kNineDigits));
  // RMS of a1·cos + a3·cos(3·): √((a1² + a3²)/2).
  CHECK(std::stod(c[4]) == doctest::Approx(std::sqrt((1 + 0.093 * 0.093) / 2)).epsilon(kNineDigits));
  const double thd = std::stod(c[5]);
  CHECK(thd == doctest::Approx(0.093).epsilon(kNineDigits));
  // SINAD of a noise-free two-line signal: 20·log10(1/THD) (IEEE Std 1241).
  CHECK(std::stod(c[6]) == doctest::Approx(-20 * std::log10(0.093)).epsilon(kNineDigits));
  // limit 1: thd ≤ 8 % fails; no uncertainty for THD, so u, k, lo95, hi95 are empty.
  const std::vector<std::string> l1(c.begin() + 7, c.begin() + 19);
  const double m1 = 0.08 - thd;  // by hand: negative, outside
  CHECK(l1 == std::vector<std::string>{c[5], "", "", "", "", "", "0.08", "\xE2\x89\xA4 8 %", "false",
                                       "fail: outside the range", format_shortest(m1),
                                       format_shortest(m1 / 0.08)});
  // limit 2: thd ≤ −20 dB = 0.1 (20·log10 of an amplitude ratio) passes.
  const std::vector<std::string> l2(c.begin() + 19, c.begin() + 31);
  const double hi2 = std::pow(10.0, -20.0 / 20);
  CHECK(l2 == std::vector<std::string>{c[5], "", "", "", "", "", format_shortest(hi2),
                                       "\xE2\x89\xA4 \xE2\x88\x92" "20 dB", "true", "pass",
                                       format_shortest(hi2 - thd), format_shortest((hi2 - thd) / hi2)});
  // limit 3: f0 1.2 kHz ± 5 Hz = 1195 … 1205 Hz; f0's interval is value ± 1.96·u.
  const double f0 = std::stod(c[31]);
  CHECK(c[31] == c[3]);
  CHECK(std::stod(c[33]) == doctest::Approx(1.959963984540054));
  CHECK(std::stod(c[34]) == doctest::Approx(f0 - std::stod(c[33]) * std::stod(c[32])).epsilon(1e-12));
  CHECK(c[36] == "1195");
  CHECK(c[37] == "1205");
  CHECK(c[38] == "1.2 kHz \xC2\xB1 5 Hz");
  CHECK(c[39] == "true");
  CHECK(std::stod(c[41]) == doctest::Approx(margin_two_sided(f0, 1195, 1205)).epsilon(1e-12));
  CHECK(std::stod(c[42]) == doctest::Approx(margin_two_sided(f0, 1195, 1205) / 10).epsilon(1e-9));
  // limit 4: amplitude 1 V ± 20 mV = 0.98 … 1.02 V.
  const double a1 = std::stod(c[43]);
  CHECK(a1 == doctest::Approx(1).epsilon(kNineDigits));
  CHECK(c[48] == "0.98");
  CHECK(c[49] == "1.02");
  CHECK(c[50] == "1 V \xC2\xB1 20 mV");
  CHECK(c[51] == "true");
  CHECK(std::stod(c[53]) == doctest::Approx(margin_two_sided(a1, 0.98, 1.02)).epsilon(1e-12));
  // flags, failing_flags, failing_limits (the value in the unit of the limit), message. The
  // capture is noise-free and coherent (whole periods of identical 9-digit samples): its periods
  // repeat, which analyze flags (caution; core/flags.cpp).
  CHECK(c[55] == "v: identical-periods");
  CHECK(c[56] == "");
  CHECK(c[57] == "thd = 9.3 % (no uncertainty known), allowed \xE2\x89\xA4 8 %");
  CHECK(c[58] == "");
  CHECK(kRoundTrip == 0);
}

TEST_CASE("batch: a clipped capture fails by default and passes when the config allows the flag") {
  periodfit::test::TempDir dir("batch_clipped");
  test::SineCapture s;
  s.f0_hz = 50;  // 200 samples per period: flat runs of tens of samples at the clip level
  s.fs_hz = 10000;
  s.samples = 2000;
  s.a3_v = 0;
  s.clip_v = 0.8;
  test::write_sine_csv(dir.file("clipped.csv"), s);
  s.clip_v = 0;
  test::write_sine_csv(dir.file("clean.csv"), s);
  BatchOptions o;
  o.inputs = {dir.path.string()};
  o.report_dir = dir.file("report");
  o.jobs = 1;
  o.config = parse_batch_config("", "default.toml");  // no limits: only flags can fail a file
  BatchResult r = run_batch(o);
  REQUIRE(r.files.size() == 2);
  CHECK(r.files[0].status == report::FileStatus::pass);  // clean.csv
  // Both are noise-free coherent captures (200 samples per period, 10 identical periods): the
  // periods repeat, a caution flag that does not fail a file.
  const std::vector<std::string> clipped_flags = {"v: clipped", "v: identical-periods"};
  CHECK(r.files[0].flags == std::vector<std::string>{"v: identical-periods"});
  CHECK(r.files[1].status == report::FileStatus::fail);  // clipped.csv
  CHECK(r.files[1].flags == clipped_flags);
  CHECK(r.files[1].failing_flags == std::vector<std::string>{"v: clipped"});
  CHECK(batch_exit_code(r) == ExitCode::fail);
  CHECK(file_reason(r.files[1], o.config) == "flag v: clipped (invalidates)");
  auto lines = csv_lines(slurp(dir.path / "report" / "summary.csv"));
  REQUIRE(lines.size() == 3);
  CHECK(lines[0] == "path,status,channel,f0_hz,rms,thd,sinad_db,flags,failing_flags,failing_limits,message");
  auto c = csv_cells(lines[2]);
  REQUIRE(c.size() == 11);
  CHECK(c[0] == dir.file("clipped.csv"));
  CHECK(c[1] == "FAIL");
  CHECK(c[7] == "v: clipped; v: identical-periods");
  CHECK(c[8] == "v: clipped");
  CHECK(c[9] == "");
  CHECK(c[10] == "");
  const auto summary = nlohmann::json::parse(slurp(dir.path / "report" / "summary.json"));
  CHECK(summary["fail_on_flags"] == nlohmann::json(invalidating_flags()));
  CHECK(summary["files"][1]["flags"] == nlohmann::json::array({"v: clipped", "v: identical-periods"}));
  CHECK(summary["files"][1]["failing_flags"] == nlohmann::json::array({"v: clipped"}));
  const std::string html = slurp(dir.path / "report" / "report.html");
  CHECK(html.find("<th>flags</th><th>failing flags and limits (measured)</th>") != std::string::npos);
  CHECK(html.find("<td class=\"msg\">v: clipped (invalidates)<br>v: identical-periods (caution)</td><td "
                  "class=\"msg\">flag v: clipped (invalidates)</td>") != std::string::npos);

  // Allowing it: the config lists the flags that fail a file, and clipped is not among them.
  o.config = parse_batch_config("[verdict]\nfail_on_flags = [\"aliasing-risk\"]\n", "allow.toml");
  r = run_batch(o);
  CHECK(r.files[1].status == report::FileStatus::pass);
  CHECK(r.files[1].flags == clipped_flags);  // still shown
  CHECK(r.files[1].failing_flags.empty());
  CHECK(batch_exit_code(r) == ExitCode::ok);
  lines = csv_lines(slurp(dir.path / "report" / "summary.csv"));
  c = csv_cells(lines[2]);
  CHECK(c[1] == "PASS");
  CHECK(c[7] == "v: clipped; v: identical-periods");
  CHECK(c[8] == "");
}

TEST_CASE("batch: plots only for failed files when asked") {
  Boards boards;
  periodfit::test::TempDir out("batch_plots");
  BatchOptions o = options_for(boards, out.path.string(), 1);
  o.config.plots = PlotSelection::failed;
  const BatchResult r = run_batch(o);
  const std::string html = slurp(out.path / "report" / "report.html");
  // board_b failed: three plots (Bode, spectrum, waveform) with ids f<FNV-1a of its path>-1…3,
  // named by the path so a section is the same bytes in a shard (batch/shard.hpp); board_a none.
  REQUIRE(r.files.size() == 5);  // board_a … board_e
  const std::string a_id = "id=\"f" + hex64(fnv1a_64(r.files[0].path));
  const std::string b_id = "id=\"f" + hex64(fnv1a_64(r.files[1].path));
  CHECK(html.find(b_id + "-1-title\"") != std::string::npos);
  CHECK(html.find(b_id + "-3-title\"") != std::string::npos);
  CHECK(html.find(a_id + "-1-title\"") == std::string::npos);
}

TEST_CASE("batch: options are validated before any file is read") {
  BatchOptions o;
  CHECK_THROWS_WITH_AS(o.validate(), "invalid option: inputs = (none) (give at least one folder or capture file)",
                       OptionError);
  o.inputs = {"x"};
  CHECK_THROWS_WITH_AS(o.validate(), "invalid option: report = \"\" (a report folder is required)", OptionError);
  o.report_dir = "out";
  o.jobs = -1;
  CHECK_THROWS_WITH_AS(o.validate(), "invalid option: jobs = -1 (must be >= 0 (0 = hardware threads))",
                       OptionError);
}

TEST_CASE("batch: a model limit without a model order is a load-time error") {
  try {
    parse_batch_config("[analysis]\nmode = \"frf\"\n[[limit]]\nresult = \"dc_gain\"\nmin = 0.9\n", "c.toml");
    FAIL("no error");
  } catch (const InputError& e) {
    CHECK(std::string(e.what()) ==
          "c.toml:3:1: dc_gain needs a fitted model: set order = \"M/N\" or \"auto\" in [analysis]");
  }
}

namespace {

// The best of a few runs: the least disturbed by other processes on the machine.
double best_seconds_of_measurements_json(const MeasurementSet& set, std::size_t& size) {
  double best = 1e300;
  for (int run = 0; run < 5; ++run) {
    const auto start = std::chrono::steady_clock::now();
    size = measurements_json(set).size();
    best = std::min(best, std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
  }
  return best;
}

MeasurementSet measurements_of(std::size_t channels) {
  MeasurementSet set;
  for (std::size_t c = 0; c < channels; ++c)
    for (int n = 1; n <= 4; ++n)
      set.set(measurement_key("amplitude", "ch" + std::to_string(c), n), Quantity::symmetric(1.0 / n, 0.01));
  return set;
}

}  // namespace

TEST_CASE("batch: the per-file measurements JSON grows linearly with channels and freq_hz limits") {
  // Issue 11, class 6: filling the ordered JSON object key by key searched every key already
  // there, so 4x the keys cost 16x the time. Linear cost makes the ratio about 4 (a little over
  // from cache effects); the bound is the geometric middle between linear (4) and quadratic
  // (16), so neither a loaded machine nor the sanitizer build can push a linear ratio across.
  constexpr double kMaxRatio = 8;
  // Below this the whole 4N call is too short for the ratio to mean anything (timer and
  // scheduler noise: on a loaded 2-core machine a linear 4N call took 0.043 s at a ratio over
  // 8); the quadratic version takes about 0.5 s for 4N here, 5x above the floor.
  constexpr double kNoiseFloor_s = 0.1;
  constexpr std::size_t kChannels = 1250;  // x 4 harmonics = 5000 keys, then 20 000
  const MeasurementSet small = measurements_of(kChannels), large = measurements_of(4 * kChannels);
  std::size_t small_size = 0, large_size = 0;
  const double t_small = best_seconds_of_measurements_json(small, small_size);
  const double t_large = best_seconds_of_measurements_json(large, large_size);
  CHECK(small_size == 4 * kChannels);
  CHECK(large_size == 16 * kChannels);
  const double ratio = t_large / std::max(t_small, 1e-9);
  CAPTURE(t_small);
  CAPTURE(t_large);
  CHECK((ratio < kMaxRatio || t_large < kNoiseFloor_s));
  // Same content and order as the MeasurementSet (sorted keys), each {value, lo95, hi95}.
  const auto j = measurements_json(small);
  auto it = small.values().begin();
  bool same = true;
  for (const auto& [key, value] : j.items()) {
    same = same && key == it->first && value["value"] == it->second.value && value["lo95"] == it->second.lo95;
    ++it;
  }
  CHECK(same);
  CHECK(j.begin().key() == "amplitude[channel=ch0,n=1]");
}

TEST_CASE("batch: a zero scale factor is a load-time error naming the key and its line") {
  // Issue 11, class 10: scale = 0 passed the load check and every file became an ERROR row.
  try {
    parse_batch_config("[read]\nscale.v_out = 0\n", "c.toml");
    FAIL("no error");
  } catch (const InputError& e) {
    CHECK(std::string(e.what()) == "c.toml:2:15: scale.v_out must be a finite, non-zero factor");
  }
  try {
    parse_batch_config("[read.scale]\nv_in = 1\nv_out = 0.0\n", "c.toml");
    FAIL("no error");
  } catch (const InputError& e) {
    CHECK(std::string(e.what()) == "c.toml:3:9: scale.v_out must be a finite, non-zero factor");
  }
  CHECK(parse_batch_config("[read]\nscale.v_out = -10\n", "c.toml").read.scales.front().second == -10);
}

namespace {

// The report folder's parent holds only the folder and its lock: no staging or old folder left.
std::vector<std::string> siblings(const fs::path& parent) {
  std::vector<std::string> names;
  for (const auto& e : fs::directory_iterator(parent)) names.push_back(e.path().filename().string());
  std::sort(names.begin(), names.end());
  return names;
}

}  // namespace

TEST_CASE("batch: a re-run replaces the report folder whole, with no stale per-file JSON") {
  // Issue 11, class 4: a re-run with fewer files left the earlier run's files/*.json.
  Boards boards;
  periodfit::test::TempDir out("batch_rerun");
  run_batch(options_for(boards, out.path.string(), 1));
  CHECK(periodfit::test::folder_files(out.path / "report").size() == 3 + 5);
  BatchOptions fewer = options_for(boards, out.path.string(), 1);
  fewer.inputs = {boards.dir.file("board_a.csv")};
  run_batch(fewer);
  const auto files = periodfit::test::folder_files(out.path / "report");
  REQUIRE(files.size() == 3 + 1);
  CHECK(files[0].first == "files/0001-board_a.csv.json");
  CHECK(siblings(out.path) == std::vector<std::string>{".report.lock", "report"});
}

TEST_CASE("batch: a second run into a report folder in use fails at once, naming the holder") {
  Boards boards;
  periodfit::test::TempDir out("batch_locked");
  const std::string lock = (out.path / ".report.lock").string();
  const int fd = ::open(lock.c_str(), O_RDWR | O_CREAT, 0600);
  REQUIRE(fd >= 0);
  REQUIRE(::flock(fd, LOCK_EX | LOCK_NB) == 0);
  REQUIRE(::write(fd, "4242\n", 5) == 5);
  const std::string expected = out.path.string() + "/report: in use by another batch run (pid 4242), which holds " +
                               lock + ": Resource temporarily unavailable";
  CHECK_THROWS_WITH_AS(run_batch(options_for(boards, out.path.string(), 1)), expected.c_str(), IoError);
  CHECK(siblings(out.path) == std::vector<std::string>{".report.lock"});
  ::close(fd);
  run_batch(options_for(boards, out.path.string(), 1));  // released: the next run proceeds
  CHECK(fs::exists(out.path / "report" / "summary.csv"));
}

TEST_CASE("batch: a report folder holding files a run does not write is refused and left as it is") {
  Boards boards;
  periodfit::test::TempDir out("batch_foreign");
  fs::create_directories(out.path / "report");
  test::write_text((out.path / "report" / "thesis.tex").string(), "keep me\n");
  CHECK_THROWS_AS(run_batch(options_for(boards, out.path.string(), 1)), OptionError);
  CHECK(periodfit::test::folder_files(out.path / "report").size() == 1);
  CHECK(slurp(out.path / "report" / "thesis.tex") == "keep me\n");
}

TEST_CASE("batch: a report folder inside the input folder is not read as captures on a re-run") {
  Boards boards;
  BatchOptions o = options_for(boards, boards.dir.path.string(), 1);  // report = <input>/report
  o.config.files.recursive = true;
  const BatchResult first = run_batch(o);
  const BatchResult second = run_batch(o);
  CHECK(first.files.size() == 5);
  REQUIRE(second.files.size() == 5);
  for (const auto& f : second.files) CHECK(f.path.find("/report/") == std::string::npos);
}

TEST_CASE("batch: a dangling symbolic link that matches becomes an ERROR row saying so") {
  // Issue 11, class 10: it was skipped silently, so a capture went missing from the run.
  Boards boards;
  fs::create_symlink(boards.dir.path / "gone.csv", boards.dir.path / "board_f.csv");
  periodfit::test::TempDir out("batch_dangling");
  const BatchResult r = run_batch(options_for(boards, out.path.string(), 1));
  REQUIRE(r.files.size() == 6);
  CHECK(r.files[5].status == report::FileStatus::error);
  CHECK(r.files[5].error.find("a symbolic link to " + (boards.dir.path / "gone.csv").string() +
                              ", which does not exist") != std::string::npos);
}

TEST_CASE("batch: CSV text cells that a spreadsheet would run as formulas are quoted; numbers are not") {
  // Issue 11, class 9; OWASP "CSV injection": a leading = + - @ TAB CR makes a formula.
  CHECK(csv_cell("=2+5*cmd|calc") == "'=2+5*cmd|calc");
  CHECK(csv_cell("@SUM(A1)") == "'@SUM(A1)");
  CHECK(csv_cell("-x,y") == "\"'-x,y\"");
  CHECK(csv_cell("-1.5") == "-1.5");
  CHECK(csv_cell("+3e-2") == "+3e-2");
  CHECK(csv_cell("v_out") == "v_out");
  CHECK(csv_cell("a\"b") == "\"a\"\"b\"");
}

TEST_CASE("batch: control characters from inputs are shown as \\xHH on the terminal") {
  CHECK(terminal_text("a\x1b]0;x\x07" "b\rc", false) == "a\\x1b]0;x\\x07b\\x0dc");
  CHECK(terminal_text("l1\nl2\t", false) == "l1\\nl2\\t");
  CHECK(terminal_text("l1\nl2", true) == "l1\nl2");
  CHECK(terminal_text("\xC2\x9b" "31m \xC2\xB0", false) == "\\x9b31m \xC2\xB0");  // C1 CSI; ° kept
  Table t({{"file", Table::Align::left}});
  t.add_row({"x\x1b[2J"});
  CHECK(t.render() == "file\n--------\nx\\x1b[2J\n");
}
