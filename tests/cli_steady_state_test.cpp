// `periodfit steady-state` contracts: whole text output, JSON and CSV shapes, model files (with
// covariance and measured points), a capture as the input, and bad input (exit 2, one line).
#include <doctest/doctest.h>

#include <cmath>
#include <fstream>
#include <numbers>
#include <random>
#include <string>
#include <nlohmann/json.hpp>

#include "output/model_file.hpp"
#include "support/cli_runner.hpp"
#include "support/signals.hpp"

using namespace periodfit;
using test::run_cli;

namespace {
constexpr double kPi = std::numbers::pi;
/// The CLI prints shortest round-trip doubles in JSON; closed forms agree to rounding.
constexpr double kJsonRel = 1e-12;

void write_rc_model(const std::string& path, bool with_covariance, bool with_frf, double f0 = 100) {
  output::ModelFile f;
  f.model.num = {1000};
  f.model.den = {1000, 1};
  if (with_covariance) f.model.covariance = {{4, 1}, {1, 9}};
  f.parameter_names = {"b0", "a0"};
  f.source = "invented bench";
  f.f0_hz = f0;
  if (with_frf)
    for (int n : {1, 3, 5}) {
      const double w = 2 * kPi * f0 * n;
      f.frf.push_back(ident::FrfPoint::circular(w, f.model.response(w) * 0.98, 1e-6));
    }
  output::write_model_file(path, f);
}
}  // namespace

TEST_CASE("cli steady-state: a sine through an RC low-pass prints the whole documented report") {
  // f0 = 1000/(2π) Hz, so ωτ = 1: |H| = 1/√2 and ∠H = −45° (closed form of 1/(1 + jωτ)).
  const auto r = run_cli("steady-state --system '1000/(1000 + s)' --wave sine --amplitude 1 --f0 159.15494309189535");
  CHECK(r.exit_code == 0);
  CHECK(r.err == "");
  CHECK(r.out ==
        "method                 superposition (model)\n"
        "status                 ok\n"
        "f0                     159.155 Hz\n"
        "harmonics used         1 (complete; input energy left out 0 of the total)\n"
        "output tail            0 (the input's series ends at N)\n"
        "dc                     0\n"
        "rms                    0.5\n"
        "min / max              -0.707107 / 0.707107\n"
        "ripple (peak-to-peak)  1.41421\n"
        "THD                    0 %\n"
        "\n"
        "n  freq_Hz  amplitude  phase_deg      gain  gain_phase_deg  source\n"
        "-  -------  ---------  ---------  --------  --------------  ------\n"
        "1  159.155   0.707107   -135.000  0.707107         -45.000  model\n");
}

TEST_CASE("cli steady-state: JSON holds dc, harmonics and the truncation bound") {
  // Half-wave rectified 10 V, 50 Hz into τ = 1 ms: dc is H(0)·A/π = 10/π (handbook series).
  const auto r = run_cli("steady-state --system '1000/(1000 + s)' --wave half-wave --amplitude 10 --f0 50 --harmonics 400 --json -");
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["dc"].get<double>() == doctest::Approx(10 / kPi).epsilon(kJsonRel));
  CHECK(j["harmonics_used"] == 400);
  CHECK(j["harmonic_count_method"] == "given");
  CHECK(j["input_left_out_fraction"].get<double>() > 0);
  // Machine output is complete (issue 13): the 201 nonzero harmonics of 400 (a half-wave has
  // the fundamental and the even harmonics only: handbook series), not --list's 50.
  CHECK(j["harmonics_listed"] == 201);
  CHECK(j["harmonics"].size() == 201);
  const auto& h1 = j["harmonics"][0];
  const double wt = 2 * kPi * 50 * 1e-3;
  CHECK(h1["n"] == 1);
  CHECK(h1["amplitude"].get<double>() == doctest::Approx(5 / std::sqrt(1 + wt * wt)).epsilon(kJsonRel));
  CHECK(h1["phase_deg"].get<double>() == doctest::Approx(-90 - std::atan(wt) * 180 / kPi).epsilon(kJsonRel));
  CHECK(j["harmonics"][1]["n"] == 2);  // odd harmonics ≥ 3 of a half-wave are absent
  CHECK(j["dc_u"].is_null());           // a typed-in model has no covariance
  CHECK(j["status"] == "ok");
}

TEST_CASE("cli steady-state: a model file with covariance gives value_u in the CSV") {
  test::TempDir dir("cli_predict_cov");
  const auto model = dir.file("rc.model.json");
  write_rc_model(model, true, false);
  const auto csv = dir.file("out.csv");
  const auto r = run_cli("steady-state --model '" + model + "' --wave square --f0 100 --harmonics 99 --csv '" + csv +
                         "' --rate 1000 --periods 2");
  REQUIRE(r.exit_code == 0);
  const std::string text = test::slurp(csv);
  CHECK(text.rfind("time_s,value,value_u\n0,", 0) == 0);
  CHECK(std::count(text.begin(), text.end(), '\n') == 21);  // header + 2 periods × 10 samples
  CHECK(r.out.find("dc                     0, u = 0\n") != std::string::npos);
  CHECK(r.out.find("u_amplitude") != std::string::npos);
}

TEST_CASE("cli steady-state: --harmonics 199 --json lists 199 harmonics; --list shortens only the text") {
  // A sawtooth has every harmonic (handbook series 2A/(n pi)), so 199 are computed and listed.
  const std::string args = "steady-state --system \"1000/(1000 + s)\" --wave sawtooth --f0 50 --harmonics 199";
  const auto json = run_cli(args + " --list 3 --json -");
  REQUIRE(json.exit_code == 0);
  const auto j = nlohmann::json::parse(json.out);
  CHECK(j["harmonics_listed"] == 199);
  REQUIRE(j["harmonics"].size() == 199);
  CHECK(j["harmonics"][198]["n"] == 199);
  const auto text = run_cli(args + " --list 3");
  REQUIRE(text.exit_code == 0);
  // Row n: amplitude 2/(n pi)·|H|, |H| = 1/sqrt(1 + (n·2pi·50·1e-3)^2) (closed form): n = 1 gives
  // 0.63662·0.954028 = 0.607353, gain phase -atan(0.314159) = -17.441 deg.
  const std::string table_end =
      "n  freq_Hz  amplitude  phase_deg      gain  gain_phase_deg  source\n"
      "-  -------  ---------  ---------  --------  --------------  ------\n"
      "1       50   0.607353   -107.441  0.954028         -17.441  model\n"
      "2      100   0.269523     57.858  0.846733         -32.142  model\n"
      "3      150   0.154429   -133.304  0.727727         -43.304  model\n"
      "(196 more harmonics not listed here: --list 0 lists them, --json holds every one)\n";
  REQUIRE(text.out.size() > table_end.size());
  CHECK(text.out.substr(text.out.size() - table_end.size()) == table_end);
}

TEST_CASE("cli steady-state: measured FRF points are used only where they exist") {
  test::TempDir dir("cli_predict_frf");
  const auto model = dir.file("rc.model.json");
  write_rc_model(model, false, true);
  // Harmonics 1, 3, 5 are measured; 7 comes from the model.
  auto r = run_cli("steady-state --model '" + model + "' --response-from measured --wave square --f0 100 --harmonics 7 --json -");
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["method"] == "superposition (measured FRF + model)");
  CHECK(j["harmonics"][2]["source"] == "measured");
  CHECK(j["harmonics"][3]["source"] == "model");
  // --response-from model: the fit everywhere, measured points ignored. (A model file always holds a
  // model, so the refusal to extrapolate measured-only points is tested in superposition_test.)
  r = run_cli("steady-state --model '" + model + "' --response-from model --wave square --f0 100 --harmonics 7 --json -");
  REQUIRE(r.exit_code == 0);
  CHECK(nlohmann::json::parse(r.out)["method"] == "superposition (model)");
  CHECK(r.exit_code == 0);  // the model everywhere: fine
}

namespace {

/// An invented capture: dc + 2 V at 50 Hz + 0.5 V at 150 Hz (phase +30°), 20 periods at
/// 10 kHz, plus seeded white noise of `noise_v` rms.
void write_supply_capture(const std::string& path, double dc_v, double noise_v) {
  std::mt19937_64 rng(1234);
  const auto v = test::tone_samples(dc_v, {{1, 2, 0}, {3, 0.5, 30}}, 50, {10000, 4000}, {noise_v, &rng});
  std::ofstream out(path);
  out << "t,v\n";
  out.precision(17);
  for (std::size_t k = 0; k < v.size(); ++k) out << static_cast<double>(k) / 10000.0 << "," << v[k] << "\n";
}

}  // namespace

TEST_CASE("cli steady-state: a capture's analysed harmonics are the input") {
  // An invented capture: 2 V at 50 Hz plus 0.5 V at 150 Hz (phase +30°), 20 periods at 10 kHz.
  test::TempDir dir("cli_predict_capture");
  const auto path = dir.file("supply.csv");
  write_supply_capture(path, 0, 0);
  const auto r = run_cli("steady-state --system '1000/(1000 + s)' --input-file '" + path + "' --channel v --harmonics 5 --json -");
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["harmonic_count_method"] == "measured");
  CHECK(j["input_left_out_fraction"].is_null());
  CHECK(j["f0_hz"].get<double>() == doctest::Approx(50).epsilon(1e-9));
  const double w3 = 2 * kPi * 150e-3;
  // Output at 150 Hz: 0.5/sqrt(1 + (ωτ)²) at 30° − atan(ωτ) (closed form); the capture is
  // noise-free, so the analysis recovers the input to ~1e-9.
  CHECK(j["harmonics"][2]["amplitude"].get<double>() == doctest::Approx(0.5 / std::sqrt(1 + w3 * w3)).epsilon(1e-7));
  CHECK(j["harmonics"][2]["phase_deg"].get<double>() == doctest::Approx(30 - std::atan(w3) * 180 / kPi).epsilon(1e-7));
  const auto bad = run_cli("steady-state --system '1/(1 + s)' --input-file '" + path + "' --channel v_ot");
  CHECK(bad.exit_code == 2);
  CHECK(bad.err == "periodfit: error: unknown channel \"v_ot\" in " + path + " (channels: v)\n");  // too far for a suggestion
}

TEST_CASE("cli steady-state: a capture's uncertainties reach every output figure") {
  // The same kind of capture with noise (σ = 1 mV, seeded) and a 0.8 V dc: the analysis gives
  // each input harmonic a u, and the output must carry it (issue 12: the dc was printed with
  // the model's u only, 1e4 times too small). First-order propagation (JCGM 100:2008 §5.1.2)
  // through Y_n = H(jnω0)·X_n with H exact: u(|Y_n|) = |H_n|·u(|X_n|), u(∠Y_n) = u(∠X_n),
  // u(Y_0) = H(0)·u(X_0), with the u's of the capture's own analysis (analyze --json).
  test::TempDir dir("cli_predict_capture_u");
  const auto path = dir.file("supply.csv");
  write_supply_capture(path, 0.8, 1e-3);
  const auto an = run_cli("analyze '" + path + "' --harmonics 5 --json -");
  REQUIRE(an.exit_code == 0);
  const auto in = nlohmann::json::parse(an.out)["channels"][0];
  const auto r = run_cli("steady-state --system '1000/(1000 + s)' --input-file '" + path +
                         "' --channel v --harmonics 5 --json -");
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["has_uncertainty"] == true);
  CHECK(j["uncertainty_sources"] == nlohmann::json::array({"input harmonics"}));
  // Relative tolerance: the propagation is the closed form above evaluated in double precision.
  constexpr double kClosedForm = 1e-9;
  CHECK(j["dc_u"].get<double>() == doctest::Approx(in["dc_u"].get<double>()).epsilon(kClosedForm));  // H(0) = 1
  for (std::size_t i = 0; i < 3; ++i) {
    CAPTURE(i);
    const double gain = j["harmonics"][i]["gain_magnitude"].get<double>();
    CHECK(j["harmonics"][i]["amplitude_u"].get<double>() ==
          doctest::Approx(gain * in["harmonics"][i]["amplitude_u"].get<double>()).epsilon(kClosedForm));
    CHECK(j["harmonics"][i]["phase_u_deg"].get<double>() ==
          doctest::Approx(in["harmonics"][i]["phase_u_deg"].get<double>()).epsilon(kClosedForm));
  }
  CHECK(j["rms_u"].get<double>() > 0);
  CHECK(j["ripple_pp_u"].get<double>() > 0);
  // The text says what the u's include.
  const auto t = run_cli("steady-state --system '1000/(1000 + s)' --input-file '" + path + "' --channel v --harmonics 5");
  REQUIRE(t.exit_code == 0);
  CHECK(t.out.find("u includes") != std::string::npos);
  CHECK(t.out.find("input harmonics") != std::string::npos);
}

TEST_CASE("cli steady-state: bad input gives one error line and exit code 2") {
  struct Case {
    std::string args, err;
  };
  test::TempDir dir("cli_predict_bad");
  const auto missing_den = dir.file("missing.json");
  test::write_text(missing_den, "{\"format\": \"periodfit-model\", \"version\": 1, \"model\": {\"num\": [1]}}\n");
  const auto broken = dir.file("broken.json");
  test::write_text(broken, "{\"format\": \"periodfit-model\",\n");
  const Case cases[] = {
      {"steady-state --system '1/(1 + s)' --wave sqare",
       "periodfit: error: unknown wave kind \"sqare\" (did you mean \"square\"? wave kinds: sine, square, triangle, "
       "sawtooth, half-wave, full-wave, pulse, harmonics)\n"},
      {"steady-state --system '1/(1 + s)' --wave square --duty 1.5",
       "periodfit: error: invalid option: duty = 1.5 (must be in (0, 1))\n"},
      {"steady-state --system '1/(1 + s)' --wave pulse --duty 0", "periodfit: error: invalid option: duty = 0 (must be in (0, 1))\n"},
      {"steady-state --system '1/(1 + s)' --wave sine --f0 0", "periodfit: error: invalid option: f0_hz = 0 (must be > 0)\n"},
      {"steady-state --system '1/(1 + s)' --wave sine --f0 -50", "periodfit: error: invalid option: f0_hz = -50 (must be > 0)\n"},
      {"steady-state --system '1/(1 + 0.001*s' --wave sine",
       "periodfit: error: --system: unbalanced parentheses: expected \")\" for the \"(\" at column 3, found end of "
       "expression at column 15\n"},
      {"steady-state --system '' --wave sine",
       "periodfit: error: --system: expected an expression, found end of expression at column 1\n"},
      {"steady-state --system '1/(s - 1)' --wave sine",
       "periodfit: error: the model has a pole at 1+0j rad/s, not in the open left half-plane: it has no periodic "
       "steady state\n"},
      {"steady-state --model '" + missing_den + "' --wave sine",
       "periodfit: error: " + missing_den + ": missing key \"model.den\"\n"},
      {"steady-state --model '" + broken + "' --wave sine",
       "periodfit: error: " + broken +
           ":2:1: not valid JSON: syntax error while parsing object key - unexpected end of input; expected string "
           "literal\n"},
      {"steady-state --system '1/(1 + s)' --harmonic 3:0.5", "periodfit: error: invalid option: harmonic = 3:0.5 (expected "
                                                     "n:amplitude:phase_deg, e.g. 3:0.25:-90)\n"},
      {"steady-state --system '1/(1 + s)'", "periodfit: error: invalid option: input = (none) (give --wave KIND, --harmonic "
                                    "n:amp:phase_deg or --input-file FILE)\n"},
      {"steady-state --wave sine", "periodfit: error: invalid option: system = (none) (give --model FILE or --system EXPR)\n"},
  };
  for (const auto& c : cases) {
    INFO(c.args);
    const auto r = run_cli(c.args);
    CHECK(r.exit_code == 2);
    CHECK(r.out == "");
    CHECK(r.err == c.err);
  }
}

TEST_CASE("cli steady-state: --system takes the issue's second-order section with a named constant, and --delay") {
  // At ω = ωn: H(jωn) = 0.8·ωn²/(2ζωn·jωn) = −j·0.8/(2ζ): gain 0.8/0.7, phase −90° (closed form).
  const auto r = run_cli("steady-state --system '0.8*w^2/(s^2 + 2*0.35*w*s + w^2); w = 2*pi*1200' --wave sine --f0 1200 "
                         "--json -");
  REQUIRE(r.exit_code == 0);
  const auto h1 = nlohmann::json::parse(r.out)["harmonics"][0];
  CHECK(h1["gain_magnitude"].get<double>() == doctest::Approx(0.8 / 0.7).epsilon(kJsonRel));
  CHECK(h1["gain_phase_deg"].get<double>() == doctest::Approx(-90).epsilon(kJsonRel));
  // Dead time T adds −360°·f·T: 1000/(1000 + s) at ωτ = 1 with T = 100 µs → −45° − 5.7296°.
  const auto d = run_cli("steady-state --system '1000/(1000 + s)' --delay 1e-4 --wave sine --f0 159.15494309189535 --json -");
  REQUIRE(d.exit_code == 0);
  const auto g1 = nlohmann::json::parse(d.out)["harmonics"][0];
  CHECK(g1["gain_magnitude"].get<double>() == doctest::Approx(1 / std::sqrt(2.0)).epsilon(kJsonRel));
  CHECK(g1["gain_phase_deg"].get<double>() == doctest::Approx(-45 - 360 * 159.15494309189535 * 1e-4).epsilon(kJsonRel));
}
