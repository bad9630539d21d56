// `periodfit info`: the whole text and JSON outputs are contracts, and every bad input gives one
// `periodfit: error: …` line, exit code 2 and no partial output.
#include "support/test_paths.hpp"
#include <doctest/doctest.h>
#include <sndfile.h>
#include <sys/stat.h>

#include <algorithm>
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

TEST_CASE("cli info: record, clock, and per channel fundamental, dc, ac rms, span, code step, flat samples") {
  const TempDir dir("cli_info_text");
  write_text(dir.file("small.csv"), kSmall);
  const auto r = run_cli("info " + q(dir.file("small.csv")));
  CHECK(r.exit_code == 0);
  CHECK(r.err == "");
  // v = 1, 2, 3, 4: mean 2.5, total rms sqrt(7.5) = 2.73861, ac rms sqrt(1.25) = 1.11803
  // (closed forms); the code step is the lattice the values sit on, log2(span/step + 1) bits.
  CHECK(r.out == dir.file("small.csv") +
                     "  (csv, 2 channels)\n"
                     "  record  4 samples at 4 Hz = 1 s, first sample at t = 0 s\n"
                     "  clock   from the time column: 3 steps, each within 0 s of the mean step (rms 0 s); "
                     "times printed to 0.01 s\n"
                     "\n"
                     "  v [V]\n"
                     "    fundamental   none found (the record has 4 samples; at least 8 are needed to find a "
                     "fundamental)\n"
                     "    dc            2.5 V\n"
                     "    ac rms        1.11803 V (total rms 2.73861 V)\n"
                     "    span          1 V to 4 V\n"
                     "    code step     1 V (2 bits to code the span), 4 distinct levels\n"
                     "    flat samples  0\n"
                     "\n"
                     "  i [A]\n"
                     "    fundamental   none found (the record has 4 samples; at least 8 are needed to find a "
                     "fundamental)\n"
                     "    dc            0 A\n"
                     "    ac rms        0.5 A (total rms 0.5 A)\n"
                     "    span          -0.5 A to 0.5 A\n"
                     "    code step     1 A (1 bits to code the span), 2 distinct levels\n"
                     "    flat samples  0\n"
                     "\n"
                     "  preamble\n"
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
                                         "rate_source", "time_steps", "step_deviation_rms_s",
                                         "step_deviation_max_s", "time_printed_resolution_s", "channels",
                                         "metadata"});
  CHECK(f["rate_source"] == "time-column");
  CHECK(f["time_steps"] == 3);
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
  CHECK(v["ac_rms"].get<double>() == std::sqrt(1.25));
  CHECK(v["code_step"].get<double>() == 1.0);
  CHECK(v["levels"] == 4);
  CHECK(v["flat_at_extremes"] == 0);
  CHECK(v["f0_hz"].is_null());
  CHECK(v["periods"].is_null());
  CHECK(v["f0_note"] == "the record has 4 samples; at least 8 are needed to find a fundamental");
  CHECK(f["metadata"] == nlohmann::ordered_json::parse(R"([{"key": "Operator", "value": "Bench 3"}])"));
}

TEST_CASE("cli info: --json PATH writes the file and still prints the text; several files") {
  const TempDir dir("cli_info_files");
  write_text(dir.file("a.csv"), kSmall);
  write_text(dir.file("b.csv"), "Sample rate,1 kHz\nx\n1\n-1\n");
  const auto r = run_cli("info " + q(dir.file("a.csv")) + " " + q(dir.file("b.csv")) + " --json " +
                         q(dir.file("info.json")));
  REQUIRE(r.exit_code == 0);
  CHECK(r.out.find(dir.file("a.csv") + "  (csv, 2 channels)\n") == 0);
  CHECK(r.out.find("\n\n" + dir.file("b.csv") +
                   "  (csv, 1 channel)\n  record  2 samples at 1000 Hz = 0.002 s, first sample at t = 0 s\n"
                   "  clock   stated in the preamble (no time column)\n") != std::string::npos);
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
  CHECK(r.out.find("  (wav, 1 channel)\n  record  4 samples at 8000 Hz = 0.0005 s, first sample at t = 0 s\n"
                   "  clock   from the audio header\n\n  ch0 [FS]\n") != std::string::npos);
  CHECK(r.out.find("    span          -0.5 FS to 0.5 FS\n    code step     1 FS (1 bits to code the span), 2 distinct levels\n") !=
        std::string::npos);
}

TEST_CASE("cli info: a clipped 16-bit tone shows its periods, the code step and the flat samples") {
  const TempDir dir("cli_info_clipped");
  SF_INFO info{};
  info.samplerate = 8000;
  info.channels = 1;
  info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_16;
  // 100 Hz for 0.5 s = 50 periods, 0.8 FS clipped at ±0.5 FS (16384 codes): every clipped sample
  // sits in a run of about 22 (80 samples per period), so all of them count as flat.
  std::vector<short> codes(4000);
  std::size_t clipped = 0;
  for (std::size_t k = 0; k < codes.size(); ++k) {
    const double v = 0.8 * std::sin(2 * 3.141592653589793 * 100.0 * static_cast<double>(k) / 8000.0);
    const double c = std::clamp(v, -0.5, 0.5);
    if (c != v) ++clipped;
    codes[k] = static_cast<short>(std::lround(c * 32768.0));
  }
  SNDFILE* f = sf_open(dir.file("clip.wav").c_str(), SFM_WRITE, &info);
  REQUIRE(f);
  sf_write_short(f, codes.data(), static_cast<sf_count_t>(codes.size()));
  sf_close(f);
  const auto r = run_cli("info " + q(dir.file("clip.wav")) + " --json -");
  REQUIRE(r.exit_code == 0);
  const auto ch = nlohmann::ordered_json::parse(r.out)["files"][0]["channels"][0];
  // One PCM16 code is 2^-15 FS (the reader's code / 0x8000 normalisation, docs/capture-formats.md).
  CHECK(ch["code_step"].get<double>() == 1.0 / 32768.0);
  CHECK(ch["flat_at_extremes"].get<std::size_t>() == clipped);
  REQUIRE(ch["f0_hz"].is_number());
  // The coarse-plus-sine-fit fundamental of a noise-free tone: 100 Hz to far better than 1e-6.
  CHECK(std::fabs(ch["f0_hz"].get<double>() - 100.0) < 1e-6);
  CHECK(std::fabs(ch["periods"].get<double>() - 50.0) < 1e-6);
  const auto text = run_cli("info " + q(dir.file("clip.wav")));
  CHECK(text.out.find("    fundamental   100 Hz: 50 periods in the record\n") != std::string::npos);
  CHECK(text.out.find("    flat samples  " + std::to_string(clipped) +
                      " held at the min or max in runs of 3 or more (clipping, or flat tops by design)\n") !=
        std::string::npos);
}

TEST_CASE("cli info: a time column's step deviations are reported with the printed resolution") {
  const TempDir dir("cli_info_clock");
  // Steps of 1 ms with every fourth time printed 20 ns late (within the reader's 1e-4 relative
  // uniformity): steps deviate by +20 ns and -20 ns from the mean 1 ms.
  std::string csv = "t,x\n";
  for (int k = 0; k < 200; ++k) {
    const double t = 1e-3 * k + (k % 4 == 3 ? 20e-9 : 0.0);
    char line[64];
    std::snprintf(line, sizeof line, "%.9f,%d\n", t, (k % 10) - 5);
    csv += line;
  }
  write_text(dir.file("clock.csv"), csv);
  const auto r = run_cli("info " + q(dir.file("clock.csv")) + " --json -");
  REQUIRE(r.exit_code == 0);
  const auto f = nlohmann::ordered_json::parse(r.out)["files"][0];
  CHECK(f["rate_source"] == "time-column");
  CHECK(f["time_steps"] == 199);
  // Largest deviation 20 ns (a late time's two steps are +20 and -20 ns about a mean step
  // within 0.1 ns of 1 ms); printed to 1e-9 s.
  CHECK(std::fabs(f["step_deviation_max_s"].get<double>() - 20e-9) < 0.5e-9);
  CHECK(f["step_deviation_rms_s"].get<double>() > 5e-9);
  CHECK(f["step_deviation_rms_s"].get<double>() < 20e-9);
  CHECK(std::fabs(f["time_printed_resolution_s"].get<double>() - 1e-9) < 1e-15);
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
               "--scale: expected CH=VALUE, found \"v\"");
  expect_error("info " + q(dir.file("good.csv")) + " --scale v=0",
               "--scale: expected a finite non-zero factor after '=' in \"v=0\"");
  expect_error("info " + q(dir.file("good.csv")) + " --unit v=",
               "--unit: no value after '=' in \"v=\"");
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
