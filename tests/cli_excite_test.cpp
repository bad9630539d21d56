// `periodfit excite` contracts: the text summary, WAV and CSV files, the JSON summary, and bad
// input (exit 2, one line).
#include <doctest/doctest.h>

#include <sndfile.h>

#include <cmath>
#include <nlohmann/json.hpp>

#include "support/cli_runner.hpp"

using namespace periodfit;
using test::run_cli;

TEST_CASE("cli excite: an odd multisine WAV with the whole text summary") {
  test::TempDir dir("cli_excite_wav");
  const auto wav = dir.file("odd.wav");
  const auto r = run_cli("excite '" + wav + "' --harmonics 1-20 --odd --f0 1000 --rate 48000 --amplitude 0.5 --format pcm16");
  CHECK(r.exit_code == 0);
  CHECK(r.err == "");
  CHECK(r.out ==
        "signal              multisine, schroeder phases\n"
        "f0                  1000 Hz\n"
        "sample rate         48000 Hz\n"
        "samples per period  48\n"
        "periods             1 (48 samples, 0.001 s)\n"
        "channels            1\n"
        "format              pcm16\n"
        "peak                0.5 (requested 0.5), max code 16384 of 32767\n"
        "rms                 " + [&] {
          // The RMS line is the one number here not fixed by the options; take it from the file.
          SF_INFO info{};
          SNDFILE* f = sf_open(wav.c_str(), SFM_READ, &info);
          REQUIRE(f != nullptr);
          std::vector<double> v(static_cast<std::size_t>(info.frames));
          sf_readf_double(f, v.data(), info.frames);
          sf_close(f);
          double s2 = 0;
          for (double x : v) s2 += x * x;
          char buf[64];
          std::snprintf(buf, sizeof buf, "%.6g", std::sqrt(s2 / static_cast<double>(v.size())));
          return std::string(buf);
        }() + "\n" +
        "crest factor        1.6286 (4.24 dB)\n"
        "harmonics           1,3,5,7,9,11,13,15,17,19\n");
  SF_INFO info{};
  SNDFILE* f = sf_open(wav.c_str(), SFM_READ, &info);
  REQUIRE(f != nullptr);
  CHECK(info.samplerate == 48000);
  CHECK(info.frames == 48);
  CHECK(info.channels == 1);
  CHECK((info.format & SF_FORMAT_SUBMASK) == SF_FORMAT_PCM_16);
  sf_close(f);
}

TEST_CASE("cli excite: CSV with two channels, adjusted f0 reported, JSON summary") {
  test::TempDir dir("cli_excite_csv");
  const auto csv = dir.file("tri.csv");
  const auto json = dir.file("tri.json");
  const auto r = run_cli("excite '" + csv + "' --signal triangle --f0 997 --rate 8000 --channels 2 --amplitude 0.5 --json '" +
                         json + "'");
  CHECK(r.exit_code == 0);
  CHECK(r.err == "periodfit: warning: f0 adjusted from 997 Hz to 1000 Hz so a period holds 8 samples\n");
  // Triangle, peak 0.5, 8 samples per period from the upward zero crossing (dsp/waveforms.hpp).
  CHECK(test::slurp(csv) ==
        "time_s,value_1,value_2\n0,0,0\n0.000125,0.25,0.25\n0.00025,0.5,0.5\n0.000375,0.25,0.25\n5e-04,0,0\n"
        "0.000625,-0.25,-0.25\n0.00075,-0.5,-0.5\n0.000875,-0.25,-0.25\n");
  const auto j = nlohmann::ordered_json::parse(test::slurp(json));  // keeps the key order
  std::vector<std::string> keys;
  for (const auto& [k, v] : j.items()) keys.push_back(k);
  CHECK(keys == std::vector<std::string>{"status", "signal", "method", "seed", "f0_requested_hz", "f0_hz",
                                         "rate_requested_hz", "rate_hz", "adjusted", "samples_per_period", "periods",
                                         "samples", "channels", "format", "amplitude_requested", "peak", "rms",
                                         "crest_factor", "crest_factor_db", "max_code", "full_scale_code", "harmonics",
                                         "warnings"});
  CHECK(j["adjusted"] == "f0");
  CHECK(j["f0_hz"] == 1000.0);
  CHECK(j["peak"] == 0.5);
  // Samples 0, ±0.25, ±0.5: RMS sqrt((4·0.0625 + 2·0.25)/8) = sqrt(3/32), crest 0.5/that.
  CHECK(j["crest_factor"].get<double>() == doctest::Approx(0.5 / std::sqrt(3.0 / 32)).epsilon(1e-15));
  CHECK(j["max_code"].is_null());
  CHECK(j["harmonics"].size() == 4);  // n = 1 … M/2
}

TEST_CASE("cli excite: random phases are reproducible from the seed; a spectrum file shapes amplitudes") {
  test::TempDir dir("cli_excite_seed");
  const auto a = dir.file("a.csv"), b = dir.file("b.csv"), c = dir.file("c.csv");
  CHECK(run_cli("excite '" + a + "' --phases random --seed 42 --harmonics 1-10 --f0 100 --rate 4000").exit_code == 0);
  CHECK(run_cli("excite '" + b + "' --phases random --seed 42 --harmonics 1-10 --f0 100 --rate 4000").exit_code == 0);
  CHECK(run_cli("excite '" + c + "' --phases random --seed 43 --harmonics 1-10 --f0 100 --rate 4000").exit_code == 0);
  CHECK(test::slurp(a) == test::slurp(b));
  CHECK(test::slurp(a) != test::slurp(c));
  const auto spec = dir.file("pink.csv");
  test::write_text(spec, "n,amplitude\n# pink: 1/sqrt(n)\n1,1\n2,0.7071067811865476\n4,0.5\n");
  const auto r = run_cli("excite - --format csv --harmonics 1,2,4 --spectrum-file '" + spec +
                         "' --f0 100 --rate 4000 --json '" + dir.file("s.json") + "'");
  CHECK(r.exit_code == 0);
  const auto j = nlohmann::json::parse(test::slurp(dir.file("s.json")));
  CHECK(j["harmonics"][2]["amplitude"].get<double>() / j["harmonics"][0]["amplitude"].get<double>() ==
        doctest::Approx(0.5).epsilon(1e-9));
}

TEST_CASE("cli excite: bad input gives one error line and exit code 2") {
  test::TempDir dir("cli_excite_bad");
  const auto out = dir.file("x.wav");
  const auto spec = dir.file("bad_spectrum.csv");
  test::write_text(spec, "1,1\n2,abc\n");
  struct Case {
    std::string args, err;
  };
  const Case cases[] = {
      {"--signal sqare",
       "periodfit: error: unknown signal \"sqare\" (did you mean \"square\"? signals: multisine, sine, square, "
       "triangle, sawtooth, half-wave, full-wave, pulse)\n"},
      {"--signal square --duty 1", "periodfit: error: invalid option: duty = 1 (must be in (0, 1))\n"},
      {"--signal pulse --duty -0.2", "periodfit: error: invalid option: duty = -0.2 (must be in (0, 1))\n"},
      {"--f0 0", "periodfit: error: invalid option: f0_hz = 0 (must be > 0)\n"},
      {"--f0 -10", "periodfit: error: invalid option: f0_hz = -10 (must be > 0)\n"},
      {"--amplitude 1.5", "periodfit: error: invalid option: amplitude = 1.5 (must be <= 1 (full scale) in a WAV file)\n"},
      {"--harmonics 5-2", "periodfit: error: invalid option: harmonics = 5-2 (range 5-2 runs backwards)\n"},
      {"--harmonics 1-30 --f0 1000 --rate 48000",
       "periodfit: error: invalid option: harmonics = 1-30 (harmonic 30 (30000 Hz) must lie below half the sample "
       "rate (24000 Hz))\n"},
      {"--phases schroder",
       "periodfit: error: unknown phase rule \"schroder\" (did you mean \"schroeder\"? phase rules: schroeder, random, "
       "zero)\n"},
      {"--format mp3", "periodfit: error: unknown sample format \"mp3\" (sample formats: pcm16, pcm24, float, csv)\n"},
      {"--skip-every 1", "periodfit: error: invalid option: skip_every = 1 (must be 0 (none) or >= 2)\n"},
      {"--spectrum-file '" + spec + "' --harmonics 1-2",
       "periodfit: error: " + spec + ":2:3: expected an amplitude, found \"abc\"\n"},
  };
  for (const auto& c : cases) {
    INFO(c.args);
    const auto r = run_cli("excite '" + out + "' " + c.args);
    CHECK(r.exit_code == 2);
    CHECK(r.out == "");
    CHECK(r.err == c.err);
  }
  CHECK_FALSE(std::filesystem::exists(out));  // nothing written on error
}

TEST_CASE("cli excite: every option at its default writes a valid file (issue 11, class 10)") {
  test::TempDir dir("cli_excite_defaults");
  const auto r = run_cli("excite '" + dir.file("x.wav") + "'");
  CHECK_MESSAGE(r.exit_code == 0, r.err);
  CHECK(r.err.empty());
  // The defaults (ExciteOptions: 1 kHz, harmonics 1-20, 48 kHz): 20 kHz lies below 24 kHz.
  const auto back = run_cli("info '" + dir.file("x.wav") + "' --json -");
  CHECK_MESSAGE(back.exit_code == 0, back.err);
  CHECK(back.out.find("48000") != std::string::npos);
}
