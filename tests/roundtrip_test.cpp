// Round trip: `periodfit excite` writes a multisine, the test filters it through a known H(s)
// (scipy.signal.freqs + numpy FFT, tests/python/predict_roundtrip_filter.py) and adds noise,
// `periodfit frf` fits the model, and `periodfit steady-state` with the identified model file
// reproduces the true model's prediction within the propagated uncertainty.
#include <doctest/doctest.h>

#include <cmath>
#include <numbers>
#include <nlohmann/json.hpp>
#include <sstream>

#include "support/cli_runner.hpp"
#include "support/python_ref.hpp"

using namespace periodfit;
using test::run_cli;

namespace {
constexpr double kPi = std::numbers::pi;
/// Each parameter within 3 standard uncertainties of the truth: for a correct u the chance of
/// a miss is 0.27 % per parameter; the noise seed is fixed, so the outcome is deterministic.
constexpr double kCoverageK = 3;
}  // namespace

TEST_CASE("roundtrip: excite -> filter -> frf recovers the filter within its uncertainty") {
  if (!test::python_has("numpy, scipy")) {
    MESSAGE("SKIPPED: /usr/bin/python3 lacks numpy/scipy; the round trip did not run");
    return;
  }
  test::TempDir dir("roundtrip");
  // The true DUT: second-order low-pass, ωn = 2π·800 rad/s, ζ = 0.5.
  const double wn = 2 * kPi * 800, zeta = 0.5;
  const std::vector<double> truth{wn * wn, wn * wn, 2 * zeta * wn};  // b0, a0, a1 (a2 = 1)
  std::ostringstream num, den;
  num.precision(17);
  den.precision(17);
  num << wn * wn;
  den << wn * wn << "," << 2 * zeta * wn << ",1";
  // The same system as an expression for predict --system (ascending powers of s).
  std::ostringstream den_expr;
  den_expr.precision(17);
  den_expr << wn * wn << " + " << 2 * zeta * wn << "*s + s^2";

  const auto u = dir.file("u.csv"), capture = dir.file("bench.csv"), model = dir.file("dut.model.json");
  // 32 periods of a random-phase multisine, harmonics 1–30 of 100 Hz at 10 kHz.
  auto r = run_cli("excite '" + u + "' --harmonics 1-30 --phases random --seed 5 --f0 100 --rate 10000 --periods 32 "
                   "--amplitude 1");
  REQUIRE(r.exit_code == 0);
  // Output noise σ = 1e-3 (numpy default_rng(11)).
  REQUIRE(test::run_python("predict_roundtrip_filter.py",
                           "'" + u + "' '" + capture + "' " + num.str() + " " + den.str() + " 1e-3 11"));
  r = run_cli("frf '" + capture + "' --input u --output y --f0 100 --order 0/2 --save-model '" + model +
              "' --json -");
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::json::parse(r.out);
  const auto& params = j["model"]["parameters"];
  REQUIRE(params.size() == 3);
  for (std::size_t i = 0; i < 3; ++i) {
    const double value = params[i]["value"].get<double>(), unc = params[i]["u"].get<double>();
    INFO(params[i]["name"].get<std::string>() << " = " << value << " ± " << unc << ", true " << truth[i]);
    CHECK(unc > 0);
    CHECK(std::abs(value - truth[i]) <= kCoverageK * unc);
    CHECK(unc < 1e-3 * truth[i]);  // and the uncertainty is small enough to mean something
  }
  CHECK(j["model"]["adequate"] == true);

  // Predict a 50 Hz square wave (given 2001 harmonics) through the identified model and through
  // the true one: RMS, ripple, THD and the first ten harmonic amplitudes agree within k·u of
  // the identified model's propagated uncertainty.
  const std::string wave = " --wave square --amplitude 1 --f0 50 --harmonics 2001 --rate 5000 --json -";
  const auto fitted = run_cli("steady-state --model '" + model + "'" + wave);
  const auto exact = run_cli("steady-state --system '" + num.str() + "/(" + den_expr.str() + ")'" + wave);
  REQUIRE(fitted.exit_code == 0);
  REQUIRE(exact.exit_code == 0);
  const auto f = nlohmann::json::parse(fitted.out), e = nlohmann::json::parse(exact.out);
  REQUIRE(f["has_uncertainty"] == true);
  for (const char* key : {"rms", "ripple_pp", "thd"}) {
    const std::string k(key);
    INFO(k << ": fitted " << f[k] << " ± " << f[k + "_u"] << ", true " << e[k]);
    CHECK(std::abs(f[k].get<double>() - e[k].get<double>()) <= kCoverageK * f[k + "_u"].get<double>());
  }
  for (std::size_t i = 0; i < 10; ++i) {
    const auto& hf = f["harmonics"][i];
    const auto& he = e["harmonics"][i];
    INFO("harmonic " << hf["n"]);
    CHECK(std::abs(hf["amplitude"].get<double>() - he["amplitude"].get<double>()) <=
          kCoverageK * hf["amplitude_u"].get<double>());
  }
}
