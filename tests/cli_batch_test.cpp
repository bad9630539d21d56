// `periodfit batch` as a command: exit codes (0 all pass, 1 a limit failed, 2 an error or bad
// usage), the closing line, --quiet, load-time config errors before any file is read,
// identical report folders across --jobs, and HTML escaping of hostile file and channel names.
#include "support/test_paths.hpp"
#include <doctest/doctest.h>

#include <algorithm>
#include <filesystem>
#include <string>
#include <vector>

#include "batch_fixture.hpp"
#include "core/table.hpp"
#include "support/cli_runner.hpp"

using periodfit::test::run_cli;
using periodfit::test::slurp;
using periodfit::test::TempDir;
using periodfit::test::write_text;
namespace fs = std::filesystem;

namespace {

std::string q(const std::string& s) { return "'" + s + "'"; }

}  // namespace

TEST_CASE("cli batch: exit code 0 when every file passes, 1 when a limit fails, 2 on an error row") {
  TempDir dir("cli_batch_codes");
  fs::create_directories(dir.path / "good");
  periodfit::test::LowpassCapture c;
  periodfit::test::write_lowpass_csv(dir.file("good/a.csv"), c);
  write_text(dir.file("limits.toml"), periodfit::test::lowpass_config());

  auto r = run_cli("batch " + q(dir.file("good")) + " --config " + q(dir.file("limits.toml")) +
                   " --report " + q(dir.file("out0")) + " --quiet");
  CHECK(r.exit_code == 0);
  CHECK(r.out == "1 pass, 0 fail, 0 error\n");
  CHECK(r.err.empty());  // stderr is not a terminal: no progress

  periodfit::test::LowpassCapture off = c;
  off.fn_hz = 1300;
  periodfit::test::write_lowpass_csv(dir.file("good/b.csv"), off);
  r = run_cli("batch " + q(dir.file("good")) + " --config " + q(dir.file("limits.toml")) +
              " --report " + q(dir.file("out1")));
  CHECK(r.exit_code == 1);
  CHECK(r.out.find("report: " + dir.file("out1") + "/report.html\n") != std::string::npos);
  CHECK(r.out.size() > 24);
  CHECK(r.out.substr(r.out.size() - 24) == "1 pass, 1 fail, 0 error\n");
  // The table names the failing limit with its measured value: 1300 Hz, the synthesised ωn.
  const std::string failing = "natural_frequency_hz of pole 1 = ";
  const auto at = r.out.find(failing);
  REQUIRE(at != std::string::npos);
  CHECK(std::stod(r.out.substr(at + failing.size())) == doctest::Approx(1300).epsilon(0.01));

  write_text(dir.file("good/c.wav"), "RIFF");  // cut in the header
  r = run_cli("batch " + q(dir.file("good")) + " --config " + q(dir.file("limits.toml")) +
              " --report " + q(dir.file("out2")) + " -q");
  CHECK(r.exit_code == 2);
  CHECK(r.out == "1 pass, 1 fail, 1 error\n");
  const std::string csv = slurp(dir.path / "out2" / "summary.csv");
  CHECK(csv.find("/good/c.wav,ERROR,") != std::string::npos);
}

TEST_CASE("cli batch: bad usage and bad configs exit 2 with one message, before any file is read") {
  TempDir dir("cli_batch_usage");
  fs::create_directories(dir.path / "in");
  write_text(dir.file("in/x.csv"), "not read\n");
  auto r = run_cli("batch " + q(dir.file("in")));
  CHECK(r.exit_code == 2);
  CHECK(r.err == "periodfit: error: periodfit batch needs --report OUTDIR: folder for summary.csv, summary.json, files/*.json, report.html\n");

  write_text(dir.file("bad.toml"), "[analysis]\nmode = \"frf\"\norder = \"0/2\"\n\n[[limit]]\nresult = \"dampng\"\npole = 1\nmin = 0.4\n");
  r = run_cli("batch " + q(dir.file("in")) + " --config " + q(dir.file("bad.toml")) + " --report " +
              q(dir.file("out")));
  CHECK(r.exit_code == 2);
  CHECK(r.err.rfind("periodfit: error: " + dir.file("bad.toml") +
                        ":6:10: unknown result \"dampng\" (did you mean \"damping\"? results: ",
                    0) == 0);
  CHECK(r.out.empty());
  CHECK_FALSE(fs::exists(dir.path / "out"));  // nothing was written

  r = run_cli("batch " + q(dir.file("nowhere")) + " --report " + q(dir.file("out")));
  CHECK(r.exit_code == 2);
  CHECK(r.err == "periodfit: error: " + dir.file("nowhere") + ": cannot open: No such file or directory\n");

  r = run_cli("batch " + q(dir.file("in")) + " --report " + q(dir.file("out")) + " --jobs -3");
  CHECK(r.exit_code == 2);
  CHECK(r.err == "periodfit: error: invalid option: jobs = -3 (must be >= 0 (0 = hardware threads))\n");

  r = run_cli("batch " + q(dir.file("in")) + " --report " + q(dir.file("out")) + " --mode identfy");
  CHECK(r.exit_code == 2);
  CHECK(r.err == "periodfit: error: invalid option: --mode = \"identfy\" (must be analyze or frf)\n");
}

TEST_CASE("cli batch: the report folder is the same for --jobs 1 and --jobs 2") {
  TempDir dir("cli_batch_jobs");
  fs::create_directories(dir.path / "in");
  for (unsigned i = 0; i < 4; ++i) {
    periodfit::test::LowpassCapture c;
    c.seed = 10 + i;
    c.fn_hz = 950 + 40 * i;
    periodfit::test::write_lowpass_csv(dir.file("in/unit_" + std::to_string(i) + ".csv"), c);
  }
  write_text(dir.file("in/broken.csv"), "time,a,b\n0,1,\n");
  write_text(dir.file("limits.toml"), periodfit::test::lowpass_config());
  const std::string common = "batch " + q(dir.file("in")) + " --config " + q(dir.file("limits.toml")) + " -q";
  const auto r1 = run_cli(common + " --jobs 1 --report " + q(dir.file("j1")));
  const auto r2 = run_cli(common + " --jobs 2 --report " + q(dir.file("j2")));
  CHECK(r1.exit_code == 2);
  CHECK(r1.out == r2.out);
  const auto a = periodfit::test::folder_files(dir.path / "j1"), b = periodfit::test::folder_files(dir.path / "j2");
  REQUIRE(a.size() == b.size());
  CHECK(a.size() == 3 + 5);  // summaries, report, one JSON per file
  for (std::size_t i = 0; i < a.size(); ++i) {
    CAPTURE(a[i].first);
    CHECK(a[i] == b[i]);
  }
}

TEST_CASE("cli batch: hostile file and channel names are escaped in report.html") {
  TempDir dir("cli_batch_hostile");
  fs::create_directories(dir.path / "in");
  periodfit::test::LowpassCapture c;
  c.input_name = "<script>alert(1)</script>";
  c.output_name = "out\"put";
  const std::string hostile_file = "R&D \"quoted\" 'single'.csv";
  periodfit::test::write_lowpass_csv(dir.file("in/" + hostile_file), c);
  write_text(dir.file("in/<img src=x onerror=alert(2)>.csv"), "garbage\n");
  const auto r = run_cli("batch " + q(dir.file("in")) +
                         " --mode analyze --f0-hint 100 --plots all -q --report " + q(dir.file("out")));
  CHECK(r.exit_code == 2);  // the garbage file is an ERROR row
  const std::string html = slurp(dir.path / "out" / "report.html");
  CHECK(html.find("<script") == std::string::npos);
  CHECK(html.find("<img") == std::string::npos);
  CHECK(html.find("&lt;script&gt;alert(1)&lt;/script&gt;") != std::string::npos);
  CHECK(html.find("&lt;img src=x onerror=alert(2)&gt;.csv") != std::string::npos);
  CHECK(html.find("R&amp;D &quot;quoted&quot; &#39;single&#39;.csv") != std::string::npos);
  CHECK(html.find("out&quot;put") != std::string::npos);
  // The per-file JSON name is made safe for any file system.
  CHECK(fs::exists(dir.path / "out" / "files" / "0002-R_D__quoted___single_.csv.json"));
  // CSV quoting (RFC 4180) keeps the name in one field.
  const std::string csv = slurp(dir.path / "out" / "summary.csv");
  CHECK(csv.find("\"" + dir.file("in/R&D \"\"quoted\"\" 'single'.csv") + "\",PASS,") != std::string::npos);
}

TEST_CASE("cli batch: progress on stderr only when it is a terminal") {
  if (std::system("command -v script >/dev/null 2>&1") != 0) {
    MESSAGE("script (util-linux) not installed: the terminal progress check is skipped");
    return;
  }
  TempDir dir("cli_batch_tty");
  fs::create_directories(dir.path / "in");
  for (unsigned i = 0; i < 3; ++i) {
    periodfit::test::LowpassCapture c;
    c.seed = 20 + i;
    periodfit::test::write_lowpass_csv(dir.file("in/u" + std::to_string(i) + ".csv"), c);
  }
  write_text(dir.file("limits.toml"), periodfit::test::lowpass_config());
  // script(1) runs the command on a pseudo-terminal; stdout goes to a file, stderr stays on it.
  const auto on_tty = [&](const std::string& extra) {
    const std::string inner = std::string("'") + PERIODFIT_EXE + "' batch '" + dir.file("in") + "' --config '" +
                              dir.file("limits.toml") + "' --report '" + dir.file("out") + "' --jobs 1 " + extra +
                              " >'" + dir.file("stdout") + "'";
    const std::string cmd = "script -qec \"" + inner + "\" /dev/null >'" + dir.file("tty") + "' 2>&1 </dev/null";
    const int status = std::system(cmd.c_str());
    CHECK(WIFEXITED(status));
    CHECK(WEXITSTATUS(status) == 0);
    return slurp(dir.path / "tty");
  };
  const std::string shown = on_tty("");
  CHECK(shown.find("3/3 files") != std::string::npos);
  CHECK(shown.find("files/s  ETA") != std::string::npos);
  CHECK(slurp(dir.path / "stdout").find("3 pass, 0 fail, 0 error\n") != std::string::npos);
  const std::string quiet = on_tty("--quiet");
  CHECK(quiet.find("files/s") == std::string::npos);
}

TEST_CASE("cli batch: the table shows each file's flags; a FAIL line shows value, 95 % interval and allowed range") {
  TempDir dir("cli_batch_flags");
  fs::create_directories(dir.path / "in");
  periodfit::test::SineCapture sine;  // 1 V at 1.2 kHz, THD 9.3 %: amplitude 1 V, outside 1.1 V ± 50 mV
  periodfit::test::write_sine_csv(dir.file("in/a.csv"), sine);
  periodfit::test::SineCapture clipped;  // clipped at ±0.8 V: flag clipped, amplitude and THD off too
  clipped.f0_hz = 50;
  clipped.fs_hz = 10000;
  clipped.samples = 2000;
  clipped.a3_v = 0;
  clipped.clip_v = 0.8;
  periodfit::test::write_sine_csv(dir.file("in/b.csv"), clipped);
  write_text(dir.file("limits.toml"),
             "[[limit]]\nresult = \"amplitude\"\nharmonic = 1\nnominal = \"1.1 V\"\ntolerance = \"50 mV\"\n"
             "[[limit]]\nresult = \"thd\"\nmax = \"8 %\"\n");
  const auto r = run_cli("batch " + q(dir.file("in")) + " --config " + q(dir.file("limits.toml")) +
                         " --report " + q(dir.file("out")) + " --jobs 1");
  CHECK(r.exit_code == 1);
  // The table as periodfit's aligned-text renderer lays it out, every cell given here. Both
  // captures are noise-free and coherent, so their periods repeat (flag identical-periods): the
  // u's come from the one-period floor, a model value, so k = 1.96 (normal 97.5 % quantile); the
  // amplitude's u is ~1e-9 V (9-digit rounding), so the interval rounds to the value.
  periodfit::Table table({{"file", periodfit::Table::Align::left},
                                  {"status", periodfit::Table::Align::left},
                                  {"flags", periodfit::Table::Align::left},
                                  {"why not PASS (value, 95 % interval, allowed range) / message",
                                   periodfit::Table::Align::left}});
  table.add_row({dir.file("in") + "/a.csv", "FAIL", "v: identical-periods",
                 "amplitude at harmonic 1 = 1 V (95 %: 1 \xE2\x80\xA6 1, k = 1.96), allowed 1.1 V \xC2\xB1 "
                 "50 mV (+1 more)"});
  table.add_row({dir.file("in") + "/b.csv", "FAIL", "v: clipped, v: identical-periods",
                 "flag v: clipped (invalidates) (+2 more)"});
  CHECK(r.out == table.render() + "report: " + dir.file("out") + "/report.html\n0 pass, 2 fail, 0 error\n");
  CHECK(r.err.empty());
}

TEST_CASE("cli batch: a bare THD limit above 1 is refused at load time, saying how to write it") {
  TempDir dir("cli_batch_bare_thd");
  fs::create_directories(dir.path / "in");
  periodfit::test::write_sine_csv(dir.file("in/a.csv"), periodfit::test::SineCapture{});
  write_text(dir.file("limits.toml"), "[[limit]]\nresult = \"thd\"\nmax = 8\n");
  const auto r = run_cli("batch " + q(dir.file("in")) + " --config " + q(dir.file("limits.toml")) +
                         " --report " + q(dir.file("out")));
  CHECK(r.exit_code == 2);
  CHECK(r.err == "periodfit: error: " + dir.file("limits.toml") +
                     ":3:7: thd max = 8 is a ratio of 8 (800 %); write \"8 %\" or 0.08\n");
  CHECK(r.out.empty());
  CHECK_FALSE(fs::exists(dir.path / "out"));
}
