// Tests of the distortion figures: closed forms, the IEEE Std 1241 ideal quantizer, and a
// polynomial nonlinearity against the trig identities.
#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <numbers>
#include <random>
#include <vector>

#include "dsp/harmonics.hpp"
#include "dsp/metrics.hpp"

using namespace periodfit;
using std::numbers::pi;

TEST_CASE("metrics: definitions on hand-made amplitudes") {
  // thd = √(A2² + A3²)/A1 = √(0.03² + 0.04²)/1 = 0.05 (definition, docs/methods.md).
  const std::vector<double> amps = {0.0, 1.0, 0.03, 0.04};
  const double pr = 1e-6, pn = 1e-6;
  const auto d = dsp::distortion_figures(amps, pr, pn);
  CHECK(d.thd == doctest::Approx(0.05).epsilon(1e-14));
  CHECK(d.thd_r == doctest::Approx(0.05 / std::sqrt(1 + 0.05 * 0.05)).epsilon(1e-14));
  // thd_n = √((0.0025/2 + 1e-6)/(1/2)) and SINAD = −20·log10(thd_n).
  const double thdn = std::sqrt((0.0025 / 2 + 1e-6) / 0.5);
  CHECK(d.thd_n == doctest::Approx(thdn).epsilon(1e-14));
  CHECK(d.sinad_db == doctest::Approx(-20 * std::log10(thdn)).epsilon(1e-14));
  CHECK(d.snr_db == doctest::Approx(10 * std::log10(0.5 / 1e-6)).epsilon(1e-14));
  // Without a full-scale range ENOB is not defined (IEEE Std 1241-2010 §9.3 needs FSR).
  CHECK(std::isnan(d.enob_bits));
  // With FSR = 2: ENOB = log2(FSR/(√12·NAD)), NAD = √(0.0025/2 + 1e-6) (IEEE 1241 §9.3).
  const auto f = dsp::distortion_figures(amps, pr, pn, 2.0);
  CHECK(f.enob_bits == doctest::Approx(std::log2(2.0 / (std::sqrt(12.0) * std::sqrt(0.0025 / 2 + 1e-6)))).epsilon(1e-14));
  // A zero fundamental makes the ratios undefined, not a number.
  const auto z = dsp::distortion_figures(std::vector<double>{0.0, 0.0, 0.1}, pr, pn);
  CHECK(std::isinf(z.thd));
  CHECK(std::isinf(z.sinad_db));
  CHECK(dsp::crest_factor(std::sqrt(2.0), 1.0) == std::sqrt(2.0));
}

TEST_CASE("metrics: ideal N-bit quantizer has SINAD 6.02N + 1.76 dB and ENOB N (IEEE Std 1241)") {
  // IEEE Std 1241: an ideal N-bit quantizer driven by a full-scale sine has quantization
  // noise q²/12 and SINAD = 6.02N + 1.76 dB (exactly 20·log10(2^N·√1.5) for amplitude
  // 2^(N−1)·q). Non-coherent sine, 2^16 samples: the error is noise-like; the approximation
  // (uniform error) holds to ≈ ±0.1 dB at 8 bits and better above, so ±0.2 dB (common
  // practice tolerance for ADC test records of this length).
  constexpr double kSinadTolDb = 0.2;
  for (int bits : {8, 12, 16}) {
    const double fs = 1e6, f0 = 1e6 / 97.37;  // 97.37 samples per period: not coherent
    const double q = 2.0 / std::pow(2.0, bits);
    const double A = 1.0 - q / 1e6;  // just below full scale: no code clips
    Channel c;
    c.name = "adc";
    c.samples.resize(1 << 16);
    for (std::size_t k = 0; k < c.samples.size(); ++k) {
      const double x = A * std::cos(2 * pi * f0 * static_cast<double>(k) / fs + 0.3);
      // mid-rise quantizer: codes −2^(N−1)…2^(N−1)−1, output at the step's centre
      c.samples[k] = q * (std::floor(x / q) + 0.5);
    }
    dsp::AnalyzeOptions opt;
    opt.full_scale_range = 2.0;  // the quantizer's range: codes span −1…1
    const auto a = dsp::analyze_channel(c, fs, 0, opt);
    const double expected = 6.02 * bits + 1.76;
    INFO("bits " << bits);
    CHECK(std::abs(a.distortion.sinad_db - expected) < kSinadTolDb);
    CHECK(std::abs(a.distortion.enob_bits - bits) < kSinadTolDb / 6.02);
    CHECK_FALSE(a.has_flag(Flag::clipped));
  }
}

TEST_CASE("metrics: y = x + a2·x² + a3·x³ of a sine has the trig-identity harmonics") {
  // x = A·cos θ: x² = A²/2·(1 + cos 2θ), x³ = A³/4·(3·cos θ + cos 3θ) (trig identities), so
  // y = a2·A²/2 + (A + 3·a3·A³/4)·cos θ + (a2·A²/2)·cos 2θ + (a3·A³/4)·cos 3θ.
  const double A = 0.8, a2 = 0.05, a3 = -0.02, fs = 48000, f0 = 997.0;
  Channel c;
  c.name = "dut";
  c.samples.resize(4800);  // 99.7 periods
  for (std::size_t k = 0; k < c.samples.size(); ++k) {
    const double x = A * std::cos(2 * pi * f0 * static_cast<double>(k) / fs);
    c.samples[k] = x + a2 * x * x + a3 * x * x * x;
  }
  const auto a = dsp::analyze_channel(c, fs, 0);
  const double h1 = A + 3 * a3 * A * A * A / 4, h2 = a2 * A * A / 2, h3 = std::abs(a3 * A * A * A / 4);
  constexpr double kExactTol = 1e-9;  // band-limited, within the model class: rounding only
  CHECK(a.dc == doctest::Approx(a2 * A * A / 2).epsilon(kExactTol));
  REQUIRE(a.harmonics.size() >= 3);
  CHECK(a.harmonics[0].amplitude == doctest::Approx(h1).epsilon(kExactTol));
  CHECK(a.harmonics[1].amplitude == doctest::Approx(h2).epsilon(kExactTol));
  CHECK(a.harmonics[2].amplitude == doctest::Approx(h3).epsilon(kExactTol));
  CHECK(std::abs(a.harmonics[2].phase_deg) == doctest::Approx(180).epsilon(kExactTol));  // a3 < 0
  // The automatic harmonic count keeps exactly the three lines the polynomial makes (the 4th and
  // above are zero, hence not significant against the rounding noise).
  CHECK(a.harmonics.size() == 3);
  CHECK(a.distortion.thd == doctest::Approx(std::hypot(h2, h3) / h1).epsilon(kExactTol));
  // rms over whole periods, dc included: √(dc² + Σ A_n²/2) (Parseval).
  const double dc = a2 * A * A / 2;
  CHECK(a.rms == doctest::Approx(std::sqrt(dc * dc + (h1 * h1 + h2 * h2 + h3 * h3) / 2)).epsilon(1e-9));
}

TEST_CASE("metrics: THD subtracts the noise power of the harmonic bins and bounds what it cannot see") {
  // E[Â_n²] = A_n² + v_n (a line plus circular noise of power v_n; docs/methods.md, "THD below
  // the noise floor"). Harmonics 2…4 at 0.001 with v_n = 1e-6 each: Σ Â² = 3e-6, D = 0, so THD
  // is 0, not significant, and its 95 % bound √(1.645·u(D)) with u(D)² = Σ v_n² = 3e-12.
  const std::vector<double> amps = {0.0, 1.0, 0.001, 0.001, 0.001};
  const std::vector<double> v = {0.0, 1e-6, 1e-6, 1e-6, 1e-6};
  const auto d = dsp::distortion_figures(amps, 1e-6, 1e-6, 0, v);
  CHECK(d.thd_noise_corrected);
  CHECK(d.thd == 0);
  CHECK_FALSE(d.thd_above_noise);
  CHECK(d.thd_upper == doctest::Approx(std::sqrt(1.6448536269514722 * std::sqrt(3e-12))).epsilon(1e-12));
  // A real 5 % second harmonic with the same noise: D = 0.0025 + 2e-6 − 3e-6 (closed form).
  const std::vector<double> strong = {0.0, 1.0, 0.05, 0.001, 0.001};
  const auto s = dsp::distortion_figures(strong, 1e-6, 1e-6, 0, v);
  CHECK(s.thd_above_noise);
  CHECK(s.thd == doctest::Approx(std::sqrt(0.0025 - 1e-6)).epsilon(1e-12));
  CHECK(s.thd_upper > s.thd);
  // Without noise powers nothing is subtracted (the definition, as before).
  CHECK(dsp::distortion_figures(strong, 1e-6, 1e-6).thd == doctest::Approx(std::sqrt(0.0025 + 2e-6)).epsilon(1e-14));
}
