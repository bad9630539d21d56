// CLI contract of `periodfit analyze`: outputs (text, JSON, CSV), channel selection, warnings
// on stderr, and errors with exit code 2.
#include <doctest/doctest.h>
#include <sndfile.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <numbers>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "core/number_format.hpp"
#include "core/table.hpp"
#include "support/cli_runner.hpp"
#include "support/signals.hpp"

using periodfit::test::run_cli;
using periodfit::test::TempDir;
using periodfit::test::write_text;
using std::numbers::pi;

namespace {

/// CSV with a time column and two channels: v_in = cos at f0, v_out = distorted and delayed
/// (0.5·cos(ωt − 0.7) + 0.05·cos 3ωt), white noise of std `noise` on each (support/signals.hpp).
std::string two_channel_csv(std::size_t n, double fs, double f0, double noise = 1e-4) {
  std::mt19937_64 rng(4);
  const auto w = periodfit::test::interleaved_draws(rng, 2, n);
  const auto v_in = periodfit::test::harmonic_samples({0.0, 1.0}, f0, fs, n, {noise, nullptr, &w[0]});
  const auto v_out =
      periodfit::test::harmonic_samples({0.0, std::polar(0.5, -0.7), 0.0, 0.05}, f0, fs, n, {noise, nullptr, &w[1]});
  std::ostringstream s;
  s.precision(12);
  s << "time,v_in,v_out\n";
  for (std::size_t k = 0; k < n; ++k) s << static_cast<double>(k) / fs << "," << v_in[k] << "," << v_out[k] << "\n";
  return s.str();
}

std::string shell_quote(const std::string& p) { return "'" + p + "'"; }

}  // namespace

TEST_CASE("cli analyze: text report lists every channel, the figures and every harmonic") {
  TempDir dir("cli_analyze_text");
  write_text(dir.file("cap.csv"), two_channel_csv(3000, 10000, 50.3));
  const auto r = run_cli("analyze " + shell_quote(dir.file("cap.csv")) + " --harmonics 5");
  REQUIRE(r.exit_code == 0);
  CHECK(r.err.empty());
  CHECK(r.out.find("v_in") != std::string::npos);
  CHECK(r.out.find("\nv_out") != std::string::npos);
  for (const char* key : {"  f0 ", "  periods ", "  dc ", "  rms ", "  THD ", "  THD+N ", "  noise floor ",
                          "  uncertainty ", "  flags "})
    CHECK(r.out.find(key) != std::string::npos);
  // Five harmonic rows per channel, numbered 1…5, under the table header.
  CHECK(r.out.find("  n    freq/Hz") != std::string::npos);
  std::istringstream lines(r.out);
  std::string line;
  int rows = 0;
  while (std::getline(lines, line))
    if (line.size() > 3 && line.compare(0, 2, "  ") == 0 && line[2] >= '1' && line[2] <= '5' && line[3] == ' ') ++rows;
  CHECK(rows == 10);
}

TEST_CASE("cli analyze: text states each uncertainty as u with GUM digits; every table column labelled") {
  // The text's numbers are the JSON's rounded as GUM 7.2.6 (format_value_u), so the whole
  // f0 and dc lines and the whole harmonic table are rebuilt from the JSON of the same run.
  TempDir dir("cli_analyze_u");
  write_text(dir.file("cap.csv"), two_channel_csv(3000, 10000, 50.3));
  const auto text = run_cli("analyze " + shell_quote(dir.file("cap.csv")) + " --channel v_out --harmonics 3");
  const auto json = run_cli("analyze " + shell_quote(dir.file("cap.csv")) + " --channel v_out --harmonics 3 --json -");
  REQUIRE(text.exit_code == 0);
  REQUIRE(json.exit_code == 0);
  const auto c = nlohmann::json::parse(json.out)["channels"][0];
  CHECK(text.out.find("\xC2\xB1") == std::string::npos);  // no bare "±"
  const std::string f0_line = "  f0           " +
                              periodfit::format_with_u(c["f0_hz"].get<double>(), c["f0_u_hz"].get<double>(), "Hz") +
                              " (sine-fit, 3 harmonics)\n";
  CHECK(text.out.find(f0_line) != std::string::npos);
  const std::string dc_line =
      "  dc           " + periodfit::format_with_u(c["dc"].get<double>(), c["dc_u"].get<double>()) + "\n";
  CHECK(text.out.find(dc_line) != std::string::npos);
  periodfit::Table t({{"n"}, {"freq/Hz"}, {"amplitude"}, {"u"}, {"phase/deg"}, {"u/deg"},
                              {"significant", periodfit::Table::Align::left}});
  for (const auto& h : c["harmonics"]) {
    const auto a = periodfit::format_value_u(h["amplitude"].get<double>(), h["amplitude_u"].get<double>());
    const auto p = periodfit::format_value_u(h["phase_deg"].get<double>(), h["phase_u_deg"].get<double>());
    // A line whose amplitude is consistent with 0 has no phase (docs/analyze-json.md).
    const bool phase = h["phase_defined"].get<bool>();
    t.add_row({std::to_string(h["n"].get<int>()), periodfit::format_significant(h["freq_hz"].get<double>(), 8),
               a.value, a.u, phase ? p.value : "undefined", phase ? p.u : "-",
               std::string(h["significant"].get<bool>() ? "yes" : "no") +
                   (phase ? "" : " (amplitude consistent with 0: phase undefined)")});
  }
  const std::string table = t.render(2);
  REQUIRE(text.out.size() >= table.size());
  CHECK(text.out.substr(text.out.size() - table.size()) == table);
  // The fundamental (amplitude 0.5, noise 1e-4 over 3000 samples) has u of a few 1e-6: the
  // value is printed to u's second significant digit, never to a fixed 6 digits.
  const auto a1 = periodfit::format_value_u(c["harmonics"][0]["amplitude"].get<double>(),
                                                c["harmonics"][0]["amplitude_u"].get<double>());
  CHECK(a1.u.size() <= 7);  // two significant digits: "2.6e-06" at most
}

TEST_CASE("cli analyze: --json - writes the documented fields, thd as a ratio") {
  TempDir dir("cli_analyze_json");
  write_text(dir.file("cap.csv"), two_channel_csv(3000, 10000, 50.3));
  const auto r = run_cli("analyze " + shell_quote(dir.file("cap.csv")) + " --json - --harmonics 4");
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::ordered_json::parse(r.out);  // stdout holds only the JSON
  REQUIRE(j["channels"].size() == 2);
  const auto& c = j["channels"][1];
  std::vector<std::string> keys;
  for (auto it = c.begin(); it != c.end(); ++it) keys.push_back(it.key());
  // The minimum fields, in the documented order (docs/analyze-json.md).
  const std::vector<std::string> expected = {
      "name", "unit", "status", "f0_hz", "f0_u_hz", "f0_method", "periods", "whole_periods",
      "samples_per_period", "dc", "dc_u", "rms", "peak", "crest_factor", "thd", "thd_r",
      "thd_above_noise", "thd_upper", "thd_n", "sinad_db", "snr_db", "enob_bits", "full_scale_range",
      "enob_note", "nad_rms", "noise_rms", "noise_floor", "noise_floor_dbc", "noise_method", "noise_dof",
      "period_scatter_ratio", "quantisation_step", "f0_free_hz", "f0_free_u_hz", "fit", "harmonic_selection", "drift", "baseline",
      "residual_lines", "flags", "warnings", "harmonics"};
  CHECK(keys == expected);
  CHECK(c["name"] == "v_out");
  CHECK(c["f0_hz"].get<double>() == doctest::Approx(50.3).epsilon(1e-6));
  // thd = 0.05/0.5 = 0.1 as a ratio (not 10 %), from the synthesised amplitudes.
  CHECK(c["thd"].get<double>() == doctest::Approx(0.1).epsilon(1e-3));
  REQUIRE(c["harmonics"].size() == 4);
  const auto& h3 = c["harmonics"][2];
  CHECK(h3["n"] == 3);
  CHECK(h3["amplitude"].get<double>() == doctest::Approx(0.05).epsilon(1e-3));
  for (const char* k : {"n", "freq_hz", "amplitude", "amplitude_u", "phase_deg", "phase_u_deg", "amplitude_lo",
                        "amplitude_hi", "phase_defined", "phase_note"})
    CHECK(h3.contains(k));
  // v_out = 0.5·cos(ωt − 0.7 rad): phase −40.107°.
  CHECK(c["harmonics"][0]["phase_deg"].get<double>() == doctest::Approx(-0.7 * 180 / pi).epsilon(1e-4));
}

TEST_CASE("cli analyze: --plot writes a well-formed spectrum SVG with labelled axes") {
  TempDir dir("cli_analyze_plot");
  write_text(dir.file("cap.csv"), two_channel_csv(3000, 10000, 50.3));
  const auto r = run_cli("analyze " + shell_quote(dir.file("cap.csv")) + " --harmonics 5 --plot " +
                         shell_quote(dir.file("spectrum.svg")));
  REQUIRE(r.exit_code == 0);
  const std::string svg = periodfit::test::slurp(dir.file("spectrum.svg"));
  CHECK(svg.rfind("<?xml", 0) == 0);
  CHECK(svg.find("harmonic") != std::string::npos);
  CHECK(svg.find("amplitude (dB") != std::string::npos);
  CHECK(svg.find("</svg>") != std::string::npos);
  if (std::system("command -v xmllint >/dev/null 2>&1") == 0)  // Debian libxml2-utils
    CHECK(std::system(("xmllint --noout " + shell_quote(dir.file("spectrum.svg"))).c_str()) == 0);
  else
    MESSAGE("xmllint not installed: SVG well-formedness not checked here");
}

TEST_CASE("cli analyze: --csv writes the harmonics table; --channel selects by name and index") {
  TempDir dir("cli_analyze_csv");
  write_text(dir.file("cap.csv"), two_channel_csv(3000, 10000, 50.3));
  const auto r = run_cli("analyze " + shell_quote(dir.file("cap.csv")) + " --channel v_out --channel 0 --harmonics 3 --csv " +
                         shell_quote(dir.file("h.csv")));
  REQUIRE(r.exit_code == 0);
  const std::string csv = periodfit::test::slurp(dir.file("h.csv"));
  std::istringstream lines(csv);
  std::string line;
  std::getline(lines, line);
  CHECK(line == "channel,unit,n,freq_hz,amplitude,amplitude_u,phase_deg,phase_u_deg,significant");
  std::vector<std::string> rows;
  while (std::getline(lines, line)) rows.push_back(line);
  REQUIRE(rows.size() == 6);
  CHECK(rows[0].rfind("v_out,", 0) == 0);  // in the order asked for
  CHECK(rows[3].rfind("v_in,", 0) == 0);
  CHECK(rows[0].substr(rows[0].size() - 4) == ",yes");
}

TEST_CASE("cli analyze: unknown channel and no periodic component are errors, exit 2") {
  TempDir dir("cli_analyze_err");
  write_text(dir.file("cap.csv"), two_channel_csv(3000, 10000, 50.3));
  const auto r = run_cli("analyze " + shell_quote(dir.file("cap.csv")) + " --channel v_ot");
  CHECK(r.exit_code == 2);
  CHECK(r.out.empty());
  // The error names the file the channel was looked up in (issue 13, item 6).
  CHECK(r.err == "periodfit: error: unknown channel \"v_ot\" in " + dir.file("cap.csv") +
                     " (did you mean \"v_out\"? channels: v_in, v_out)\n");

  std::ostringstream s;
  s << "time,hiss\n";
  std::mt19937_64 rng(9);
  std::normal_distribution<double> d(0.0, 1.0);
  for (int k = 0; k < 4000; ++k) s << k * 1e-4 << "," << d(rng) << "\n";
  write_text(dir.file("hiss.csv"), s.str());
  const auto e = run_cli("analyze " + shell_quote(dir.file("hiss.csv")) + " --json " + shell_quote(dir.file("o.json")));
  CHECK(e.exit_code == 2);
  // The capture file is named before the channel (issue 11, class 10).
  CHECK(e.err.rfind("periodfit: error: " + dir.file("hiss.csv") +
                        ": channel \"hiss\": no periodic component stands out of the noise",
                    0) == 0);
  CHECK_FALSE(std::filesystem::exists(dir.file("o.json")));  // no partial result
}

TEST_CASE("cli analyze: warnings go to stderr, one line per flag") {
  TempDir dir("cli_analyze_warn");
  std::ostringstream s;
  s << "time,c\n";
  for (int k = 0; k < 4000; ++k) {
    const double t = k * 1e-4;
    s << t << "," << std::clamp(std::cos(2 * pi * 50.3 * t), -0.8, 0.8) << "\n";
  }
  write_text(dir.file("clip.csv"), s.str());
  const auto r = run_cli("analyze " + shell_quote(dir.file("clip.csv")) + " --json -");
  REQUIRE(r.exit_code == 0);
  CHECK(r.err.rfind("periodfit: warning: channel \"c\": ", 0) == 0);
  CHECK(r.err.find("looks clipped") != std::string::npos);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["channels"][0]["flags"][0] == "clipped");
}

TEST_CASE("cli analyze: --f0 forces the fundamental; WAV captures are read too") {
  TempDir dir("cli_analyze_wav");
  const int fs = 48000, n = 48000;
  std::vector<float> x(static_cast<std::size_t>(n));
  for (int k = 0; k < n; ++k) x[static_cast<std::size_t>(k)] = static_cast<float>(0.5 * std::cos(2 * pi * 1000.0 * k / fs));
  SF_INFO info{};
  info.samplerate = fs;
  info.channels = 1;
  info.format = SF_FORMAT_WAV | SF_FORMAT_FLOAT;
  SNDFILE* f = sf_open(dir.file("tone.wav").c_str(), SFM_WRITE, &info);
  REQUIRE(f != nullptr);
  sf_writef_float(f, x.data(), n);
  sf_close(f);
  const auto r = run_cli("analyze " + shell_quote(dir.file("tone.wav")) + " --f0 1000 --harmonics 10 --json -");
  REQUIRE(r.exit_code == 0);
  const auto c = nlohmann::json::parse(r.out)["channels"][0];
  CHECK(c["f0_method"] == "forced");
  CHECK(c["f0_hz"] == 1000.0);
  CHECK(c["samples_per_period"] == 48);  // coherent: 48 samples per period
  CHECK(c["harmonics"][0]["amplitude"].get<double>() == doctest::Approx(0.5).epsilon(1e-7));
  CHECK(c["harmonics"].size() == 10);
  // --f0 1k and --f0 1kHz are the same 1000 Hz (SI prefix, io/quantity.hpp): the same JSON.
  for (const char* f0 : {"1k", "'1 kHz'"}) {
    CAPTURE(f0);
    const auto prefixed = run_cli("analyze " + shell_quote(dir.file("tone.wav")) + " --f0 " + f0 + " --harmonics 10 --json -");
    REQUIRE(prefixed.exit_code == 0);
    CHECK(prefixed.out == r.out);
  }
  const auto bad = run_cli("analyze " + shell_quote(dir.file("tone.wav")) + " --f0 1kV");
  CHECK(bad.exit_code == 2);
  CHECK(bad.out.empty());
  CHECK(bad.err == "periodfit: error: --f0: \"1kV\" is not a frequency (e.g. 48k, 1MHz)\n");
}

TEST_CASE("cli analyze: --help shows the defaults from the options struct") {
  const auto r = run_cli("analyze --help");
  CHECK(r.exit_code == 0);
  for (const char* opt : {"--channel", "--f0", "--f0-hint", "--harmonics", "--json", "--csv", "--samples-per-period"})
    CHECK(r.out.find(opt) != std::string::npos);
  CHECK(r.out.find("default 0\n") != std::string::npos);  // e.g. --harmonics N, default 0 (automatic)
}
