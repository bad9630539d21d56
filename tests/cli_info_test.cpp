// `periodfit info`: the whole text and JSON outputs are contracts, and every bad input gives one
// `periodfit: error: …` line, exit code 2 and no partial output.
#include "support/test_paths.hpp"
#include <doctest/doctest.h>
#include <sndfile.h>
#include <sys/stat.h>

#include <cmath>
#include <filesystem>
#include <nlohmann/json.hpp>
#include <string>

#include "support/cli_runner.hpp"

using periodfit::test::run_cli;
using periodfit::test::TempDir;
using periodfit::test::write_text;

namespace {

// Four rows at 0.25 s steps: rate 4 Hz, duration 1 s. v = 1..4: mean 2.5, RMS sqrt(30/4) =
// sqrt(7.5) = 2.73861 (closed forms); i = ±0.5: mean 0, RMS 0.5.
constexpr const char* kSmall =
    "Operator,Bench 3\n"
    "t (s),v (V),i (A)\n"
    "0,1,0.5\n"
    "0.25,2,-0.5\n"
    "0.5,3,0.5\n"
    "0.75,4,-0.5\n";

std::string q(const std::string& path) { return "'" + path + "'"; }

}  // namespace

TEST_CASE("cli info: aligned text with channels, rate, samples, duration, t0, statistics, metadata") {
  const TempDir dir("cli_info_text");
  write_text(dir.file("small.csv"), kSmall);
  const auto r = run_cli("info " + q(dir.file("small.csv")));
  CHECK(r.exit_code == 0);
  CHECK(r.err == "");
  CHECK(r.out == dir.file("small.csv") +
                     "\n"
                     "  format       csv\n"
                     "  channels     2 (v, i)\n"
                     "  sample rate  4 Hz\n"
                     "  samples      4\n"
                     "  duration     1 s\n"
                     "  t0           0 s\n"
                     "\n"
                     "  channel  unit   min  max  mean      rms\n"
                     "  -------  ----  ----  ---  ----  -------\n"
                     "  v        V        1    4   2.5  2.73861\n"
                     "  i        A     -0.5  0.5     0      0.5\n"
                     "\n"
                     "  metadata\n"
                     "    Operator  Bench 3\n");
}

TEST_CASE("cli info: --json - writes only the JSON, keys in the documented order") {
  const TempDir dir("cli_info_json");
  write_text(dir.file("small.csv"), kSmall);
  const auto r = run_cli("info " + q(dir.file("small.csv")) + " --json -");
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::ordered_json::parse(r.out);
  CHECK(j["periodfit_info"] == 1);
  REQUIRE(j["files"].size() == 1);
  const auto& f = j["files"][0];
  std::vector<std::string> keys;
  for (const auto& item : f.items()) keys.push_back(item.key());
  CHECK(keys == std::vector<std::string>{"source", "format", "sample_rate_hz", "t0_s", "samples", "duration_s",
                                         "channels", "metadata"});
  CHECK(f["source"] == dir.file("small.csv"));
  CHECK(f["sample_rate_hz"].get<double>() == 4.0);  // 3 steps / 0.75 s
  CHECK(f["samples"] == 4);
  CHECK(f["duration_s"].get<double>() == 1.0);
  const auto& v = f["channels"][0];
  CHECK(v["name"] == "v");
  CHECK(v["unit"] == "V");
  CHECK(v["min"].get<double>() == 1.0);
  CHECK(v["max"].get<double>() == 4.0);
  CHECK(v["mean"].get<double>() == 2.5);
  CHECK(v["rms"].get<double>() == std::sqrt(7.5));  // sums of small integers are exact
  CHECK(f["metadata"] == nlohmann::ordered_json::parse(R"([{"key": "Operator", "value": "Bench 3"}])"));
}

TEST_CASE("cli info: --json PATH writes the file and still prints the text; several files") {
  const TempDir dir("cli_info_files");
  write_text(dir.file("a.csv"), kSmall);
  write_text(dir.file("b.csv"), "Sample rate,1 kHz\nx\n1\n-1\n");
  const auto r = run_cli("info " + q(dir.file("a.csv")) + " " + q(dir.file("b.csv")) + " --json " +
                         q(dir.file("info.json")));
  REQUIRE(r.exit_code == 0);
  CHECK(r.out.find(dir.file("a.csv") + "\n") == 0);
  CHECK(r.out.find("\n\n" + dir.file("b.csv") + "\n  format       csv\n  channels     1 (x)\n  sample rate  1000 Hz\n") !=
        std::string::npos);
  const auto j = nlohmann::ordered_json::parse(periodfit::test::slurp(dir.file("info.json")));
  REQUIRE(j["files"].size() == 2);
  CHECK(j["files"][1]["channels"][0]["rms"].get<double>() == 1.0);
}

TEST_CASE("cli info: --scale, --unit and --rate apply to the capture") {
  const TempDir dir("cli_info_scale");
  write_text(dir.file("small.csv"), kSmall);
  const auto r = run_cli("info " + q(dir.file("small.csv")) + " --scale v=10 --scale 1=2 --unit i=mA --rate 8 --json -");
  REQUIRE(r.exit_code == 0);
  const auto f = nlohmann::ordered_json::parse(r.out)["files"][0];
  CHECK(f["sample_rate_hz"].get<double>() == 8.0);
  CHECK(f["channels"][0]["max"].get<double>() == 40.0);
  CHECK(f["channels"][1]["max"].get<double>() == 1.0);
  CHECK(f["channels"][1]["unit"] == "mA");
}

TEST_CASE("cli info: --time-column none makes the time column a channel") {
  const TempDir dir("cli_info_time_column");
  write_text(dir.file("small.csv"), kSmall);
  const auto r = run_cli("info " + q(dir.file("small.csv")) + " --time-column none --rate 4 --json -");
  REQUIRE(r.exit_code == 0);
  const auto f = nlohmann::ordered_json::parse(r.out)["files"][0];
  REQUIRE(f["channels"].size() == 3);
  CHECK(f["channels"][0]["name"] == "t");
  CHECK(f["channels"][0]["unit"] == "s");
  CHECK(f["channels"][0]["max"].get<double>() == 0.75);
}

TEST_CASE("cli info: a WAV file shows full-scale units") {
  const TempDir dir("cli_info_wav");
  SF_INFO info{};
  info.samplerate = 8000;
  info.channels = 1;
  info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_16;
  SNDFILE* f = sf_open(dir.file("tone.wav").c_str(), SFM_WRITE, &info);
  REQUIRE(f);
  const short codes[4] = {16384, -16384, 16384, -16384};  // ±0.5 FS (code / 0x8000)
  sf_write_short(f, codes, 4);
  sf_close(f);
  const auto r = run_cli("info " + q(dir.file("tone.wav")));
  CHECK(r.exit_code == 0);
  CHECK(r.out.find("  format       wav\n  channels     1 (ch0)\n  sample rate  8000 Hz\n  samples      4\n"
                   "  duration     0.0005 s\n") != std::string::npos);
  CHECK(r.out.find("  ch0      FS    -0.5  0.5     0  0.5\n") != std::string::npos);
}

TEST_CASE("cli info: bad inputs give one error line, exit 2, and no output") {
  const TempDir dir("cli_info_bad");
  write_text(dir.file("good.csv"), kSmall);
  write_text(dir.file("header.csv"), "t,v\n");
  write_text(dir.file("cell.csv"), "t,v\n0,1\n1,x1\n2,3\n");
  write_text(dir.file("empty.csv"), "");
  write_text(dir.file("norate.csv"), "a,b\n1,2\n3,4\n");
  const auto expect_error = [&](const std::string& args, const std::string& message) {
    CAPTURE(args);
    const auto r = run_cli(args);
    CHECK(r.exit_code == 2);
    CHECK(r.out == "");
    CHECK(r.err == "periodfit: error: " + message + "\n");
  };
  expect_error("info " + q(dir.file("missing.csv")), dir.file("missing.csv") + ": cannot open: No such file or directory");
  expect_error("info " + q(dir.path.string()), dir.path.string() + ": cannot read: Is a directory");
  expect_error("info " + q(dir.file("empty.csv")), dir.file("empty.csv") + ": the file is empty");
  expect_error("info " + q(dir.file("header.csv")), dir.file("header.csv") + ": no data rows below the header on line 1");
  expect_error("info " + q(dir.file("cell.csv")),
               dir.file("cell.csv") + ":3:3: expected a number in column \"v\", found \"x1\"");
  expect_error("info " + q(dir.file("norate.csv")),
               dir.file("norate.csv") +
                   ": no sample rate: no time column and no sample interval or rate in the preamble; give it with "
                   "--rate HZ");
  expect_error("info " + q(dir.file("good.csv")) + " --scale vv=2",
               dir.file("good.csv") + ": unknown channel \"vv\" (did you mean \"v\"? channels: v, i)");
  expect_error("info " + q(dir.file("good.csv")) + " --scale v",
               "--scale: expected CH=VALUE, found \"v\" (see periodfit --help)");
  expect_error("info " + q(dir.file("good.csv")) + " --scale v=0",
               "--scale: expected a finite non-zero factor after '=' in \"v=0\" (see periodfit --help)");
  expect_error("info " + q(dir.file("good.csv")) + " --unit v=",
               "--unit: no value after '=' in \"v=\" (see periodfit --help)");
  expect_error("info " + q(dir.file("good.csv")) + " --rate -5",
               "invalid option: rate_hz = -5 (must be > 0, or 0 to take the rate from the file)");
  // The second file fails: nothing is printed for the first and no JSON file is left.
  expect_error("info " + q(dir.file("good.csv")) + " " + q(dir.file("cell.csv")) + " --json " + q(dir.file("out.json")),
               dir.file("cell.csv") + ":3:3: expected a number in column \"v\", found \"x1\"");
  CHECK_FALSE(std::filesystem::exists(dir.file("out.json")));
}

TEST_CASE("cli info: a file the user may not read is an IoError naming the reason") {
  const TempDir dir("cli_info_perm");
  write_text(dir.file("locked.csv"), kSmall);
  ::chmod(dir.file("locked.csv").c_str(), 0);
  ::chmod(dir.path.c_str(), 0755);
  std::string prefix;
  if (::geteuid() == 0) {
    // root reads any file; run the binary as the unprivileged user "nobody" instead.
    if (std::system("command -v setpriv >/dev/null 2>&1") != 0) {
      MESSAGE("skipped: running as root and setpriv is missing, so permission denial cannot be provoked");
      return;
    }
    prefix = "setpriv --reuid=65534 --regid=65534 --clear-groups ";
  }
  const std::string out = dir.file("stdout"), err = dir.file("stderr");
  const std::string cmd = prefix + "'" + PERIODFIT_EXE + "' info " + q(dir.file("locked.csv")) + " >" + q(out) +
                          " 2>" + q(err);
  const int status = std::system(cmd.c_str());
  CHECK(WEXITSTATUS(status) == 2);
  CHECK(periodfit::test::slurp(err) ==
        "periodfit: error: " + dir.file("locked.csv") + ": cannot open: Permission denied\n");
}

TEST_CASE("cli info: a pipe is read once, whole") {
  const TempDir dir("cli_info_pipe");
  write_text(dir.file("small.csv"), kSmall);
  const std::string out = dir.file("stdout");
  const std::string cmd = "cat " + q(dir.file("small.csv")) + " | '" + PERIODFIT_EXE + "' info /dev/stdin --json - >" + q(out);
  REQUIRE(std::system(cmd.c_str()) == 0);
  const auto j = nlohmann::ordered_json::parse(periodfit::test::slurp(out));
  CHECK(j["files"][0]["samples"] == 4);
  CHECK(j["files"][0]["channels"][0]["rms"].get<double>() == std::sqrt(7.5));
}

TEST_CASE("cli info: --rate reads SI prefixes and units (1MHz, 48k); a bad value names the option") {
  const TempDir dir("cli_info_rate_units");
  write_text(dir.file("small.csv"), kSmall);
  // 1MHz = 1e6 Hz, 48k = 48e3 Hz (SI prefixes), the same reader as the CSV preamble's rate.
  const auto mhz = run_cli("info " + q(dir.file("small.csv")) + " --rate 1MHz --json -");
  REQUIRE(mhz.exit_code == 0);
  CHECK(nlohmann::ordered_json::parse(mhz.out)["files"][0]["sample_rate_hz"].get<double>() == 1e6);
  const auto k = run_cli("info " + q(dir.file("small.csv")) + " --rate 48k --json -");
  REQUIRE(k.exit_code == 0);
  CHECK(nlohmann::ordered_json::parse(k.out)["files"][0]["sample_rate_hz"].get<double>() == 48e3);
  const auto bad = run_cli("info " + q(dir.file("small.csv")) + " --rate 1MQ");
  CHECK(bad.exit_code == 2);
  CHECK(bad.out.empty());
  CHECK(bad.err == "periodfit: error: --rate: \"1MQ\" is not a frequency (e.g. 48k, 1MHz)\n");
  const auto time = run_cli("info " + q(dir.file("small.csv")) + " --rate 12ns");
  CHECK(time.exit_code == 2);
  CHECK(time.err == "periodfit: error: --rate: \"12ns\" is not a frequency (e.g. 48k, 1MHz)\n");
}

TEST_CASE("cli info: a preamble row of vertical units gives the channel units") {
  const TempDir dir("cli_info_vertical_units");
  write_text(dir.file("scope.csv"), "Vertical Units,V,A\nTIME,CH1,CH2\n0,1,2\n0.5,3,4\n1,5,6\n");
  const auto r = run_cli("info " + q(dir.file("scope.csv")) + " --json -");
  REQUIRE(r.exit_code == 0);
  const auto f = nlohmann::ordered_json::parse(r.out)["files"][0];
  CHECK(f["channels"][0]["unit"] == "V");
  CHECK(f["channels"][1]["unit"] == "A");
}
