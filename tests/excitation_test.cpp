// Excitation signals: Schroeder crest factor, harmonic sets, seamless looping, the amplitude
// limit, and WAV files read back through libsndfile.
#include <doctest/doctest.h>

#include <sndfile.h>

#include <cmath>
#include <numbers>
#include <random>
#include <sstream>

#include "core/error.hpp"
#include "io/audio_writer.hpp"
#include "output/excitation_output.hpp"
#include "predict/excitation.hpp"
#include "support/cli_runner.hpp"
#include "support/python_ref.hpp"

using namespace periodfit;
using predict::ExciteOptions;

namespace {
constexpr double kPi = std::numbers::pi;

ExciteOptions multisine(const std::string& harmonics, double f0 = 1, double rate = 65536) {
  ExciteOptions o;
  o.harmonics = harmonics;
  o.f0_hz = f0;
  o.rate_hz = rate;
  o.amplitude = 1;
  o.format = predict::SampleFormat::text;
  return o;
}

struct Wav {
  SF_INFO info{};
  std::vector<double> samples;  // interleaved
};
Wav read_wav(const std::string& path) {
  Wav w;
  SNDFILE* f = sf_open(path.c_str(), SFM_READ, &w.info);
  REQUIRE(f != nullptr);
  w.samples.resize(static_cast<std::size_t>(w.info.frames * w.info.channels));
  CHECK(sf_readf_double(f, w.samples.data(), w.info.frames) == w.info.frames);
  sf_close(f);
  return w;
}
}  // namespace

TEST_CASE("excitation: flat 1-200 Schroeder multisine has a crest factor under 2, zero phase has 20") {
  // Zero phase: the peak is Σa = 200 at t = 0 and the RMS is sqrt(200/2) = 10, so the crest
  // factor is sqrt(2·200) = 20 (closed form). Schroeder phases: the value comes from
  // tests/python/predict_schroeder.py (numpy irfft of the same phases, 65536 points per
  // period); ≈1.69, from memory in line with Schroeder's "about 1.7" for flat spectra.
  constexpr double kSameGridTol = 1e-9;  // same phases, same grid: FFT rounding only
  auto o = multisine("1-200");
  const auto s = predict::generate_excitation(o);
  CHECK(s.crest_factor < 2);
  CHECK(s.crest_factor < 20.0 / 5);  // "well below" the zero-phase value
  o.phases = predict::PhaseRule::zero;
  const auto z = predict::generate_excitation(o);
  CHECK(z.crest_factor == doctest::Approx(std::sqrt(2.0 * 200)).epsilon(1e-12));
  if (!test::python_has("numpy")) {
    MESSAGE("SKIPPED: /usr/bin/python3 lacks numpy; the Schroeder crest factor reference did not run");
    return;
  }
  const auto out = test::run_python("predict_schroeder.py", "200 65536");
  REQUIRE(out);
  std::istringstream in(*out);
  double cf = 0;
  in >> cf;
  MESSAGE("Schroeder flat 1-200: crest factor " << s.crest_factor << " (numpy " << cf << ")");
  CHECK(s.crest_factor == doctest::Approx(cf).epsilon(kSameGridTol));
  // Flat spectrum as written: every harmonic has amplitude peak/CF·√2·/√200 … i.e. equal.
  for (const auto& h : s.harmonics) CHECK(h.amplitude == doctest::Approx(s.harmonics[0].amplitude).epsilon(1e-9));
  // Odd harmonics 1–199 (K = 100 components, Schroeder over the component index), same source.
  auto odd = multisine("1-199");
  odd.odd_only = true;
  const auto so = predict::generate_excitation(odd);
  const auto out_odd = test::run_python("predict_schroeder.py", "100 65536 odd");
  REQUIRE(out_odd);
  std::istringstream in_odd(*out_odd);
  double cf_odd = 0;
  in_odd >> cf_odd;
  MESSAGE("Schroeder flat odd 1-199: crest factor " << so.crest_factor << " (numpy " << cf_odd << ")");
  CHECK(so.crest_factor == doctest::Approx(cf_odd).epsilon(kSameGridTol));
  CHECK(so.crest_factor < 2);
  // Phases are Schroeder's −πk(k−1)/K (wrapped), in the file's own cos convention.
  for (int k : {1, 2, 3, 50, 200}) {
    const double want = std::remainder(-kPi * k * (k - 1) / 200, 2 * kPi) * 180 / kPi;
    const double got = s.harmonics[static_cast<std::size_t>(k - 1)].phase_deg;
    CHECK(std::abs(std::remainder(got - want, 360.0)) < 1e-7);
  }
}

TEST_CASE("excitation: harmonic lists parse ranges and mixes, and bad items are named") {
  CHECK(predict::parse_harmonic_list("1-200").size() == 200);
  CHECK(predict::parse_harmonic_list("2,5,11") == std::vector<int>{2, 5, 11});
  CHECK(predict::parse_harmonic_list("1,3,5-9") == std::vector<int>{1, 3, 5, 6, 7, 8, 9});
  CHECK(predict::parse_harmonic_list(" 11, 2 ,5") == std::vector<int>{2, 5, 11});
  CHECK_THROWS_WITH_AS(predict::parse_harmonic_list("9-5"),
                       "invalid option: harmonics = 9-5 (range 9-5 runs backwards)", OptionError);
  CHECK_THROWS_WITH_AS(predict::parse_harmonic_list("0-3"),
                       "invalid option: harmonics = 0-3 (harmonic numbers start at 1, found 0)", OptionError);
  CHECK_THROWS_WITH_AS(predict::parse_harmonic_list("1,,2"), "invalid option: harmonics = 1,,2 (empty item in the list)",
                       OptionError);
  CHECK_THROWS_WITH_AS(predict::parse_harmonic_list("1,x"),
                       "invalid option: harmonics = 1,x (\"x\" is not a whole number)", OptionError);
  CHECK_THROWS_WITH_AS(predict::parse_harmonic_list("1-5,3"),
                       "invalid option: harmonics = 1-5,3 (harmonic 3 is listed twice)", OptionError);
  const auto all = predict::parse_harmonic_list("1-20");
  CHECK(predict::select_harmonics(all, true, 0) == std::vector<int>{1, 3, 5, 7, 9, 11, 13, 15, 17, 19});
  // Every 3rd odd harmonic (the 3rd, 6th, 9th odd: 5, 11, 17) left out.
  CHECK(predict::select_harmonics(all, false, 3) == std::vector<int>{1, 3, 7, 9, 13, 15, 19});
  const auto r = predict::generate_excitation([] {
    auto o = multisine("1-40", 10, 48000);
    o.skip_every = 4;
    return o;
  }());
  CHECK(r.harmonics.size() == 15);  // 20 odd harmonics, 5 skipped (7, 15, 23, 31, 39)
  CHECK(r.harmonics[3].n == 9);
}

TEST_CASE("excitation: a period holds a whole number of samples, by adjusting f0 or the rate") {
  auto o = multisine("1-10", 997, 48000);
  auto r = predict::generate_excitation(o);
  CHECK(r.adjusted == "f0");
  CHECK(r.samples_per_period == 48);
  CHECK(r.f0_hz == 1000);
  REQUIRE(r.warnings.size() == 1);
  CHECK(r.warnings[0] == "f0 adjusted from 997 Hz to 1000 Hz so a period holds 48 samples");
  o.adjust = predict::LoopAdjust::rate;
  r = predict::generate_excitation(o);
  CHECK(r.adjusted == "rate");
  CHECK(r.f0_hz == 997);
  CHECK(r.rate_hz == 47856);  // 48 × 997
  o.f0_hz = 1001.3;
  o.format = predict::SampleFormat::pcm16;
  CHECK_THROWS_WITH_AS(predict::generate_excitation(o),
                       "invalid option: adjust = rate (keeping f0 = 1001.3 Hz needs 48 samples per period at "
                       "48062.4 Hz, not a whole number of Hz for a WAV file; adjust f0 instead)",
                       OptionError);
  o.f0_hz = 1000;
  r = predict::generate_excitation(o);
  CHECK(r.adjusted == "none");
  // Harmonics at or above Nyquist are refused.
  CHECK_THROWS_WITH_AS(predict::generate_excitation(multisine("1-24", 1000, 48000)),
                       "invalid option: harmonics = 1-24 (harmonic 24 (24000 Hz) must lie below half the sample "
                       "rate (24000 Hz))",
                       OptionError);
}

TEST_CASE("excitation: the WAV file loops seamlessly and reads back exactly through libsndfile") {
  test::TempDir dir("excitation_test");
  for (auto fmt : {predict::SampleFormat::pcm16, predict::SampleFormat::pcm24, predict::SampleFormat::float32}) {
    auto o = multisine("1-20", 997, 48000);
    o.phases = predict::PhaseRule::random;
    o.seed = 7;
    o.periods = 5;
    o.channels = 2;
    o.amplitude = 0.8;
    o.format = fmt;
    const auto r = predict::generate_excitation(o);
    const std::string path = dir.file("ms.wav");
    output::write_excitation(path, r);
    const Wav w = read_wav(path);
    INFO("format " << predict::sample_format_name(fmt));
    CHECK(w.info.samplerate == 48000);
    CHECK(w.info.channels == 2);
    CHECK(w.info.frames == 5 * 48);
    const std::size_t m = 48;
    bool exact = true, periodic = true, same_channels = true;
    for (std::size_t k = 0; k < static_cast<std::size_t>(w.info.frames); ++k) {
      exact = exact && w.samples[2 * k] == r.period[k % m];
      same_channels = same_channels && w.samples[2 * k + 1] == w.samples[2 * k];
      if (k + m < static_cast<std::size_t>(w.info.frames)) periodic = periodic && w.samples[2 * (k + m)] == w.samples[2 * k];
    }
    CHECK(exact);          // the values written are the values reported
    CHECK(periodic);       // whole periods: sample k + M equals sample k, so the wrap is seamless
    CHECK(same_channels);  // --channels duplicates
    // No leakage: a DFT of the whole file has energy only on the excited harmonics' bins.
    double off_bin = 0, on_bin = 0;
    const std::size_t n = static_cast<std::size_t>(w.info.frames);
    for (std::size_t b = 1; b < n / 2; ++b) {
      std::complex<double> z = 0;
      for (std::size_t k = 0; k < n; ++k) z += w.samples[2 * k] * std::polar(1.0, -2 * kPi * double(b * k % n) / double(n));
      (b % 5 == 0 ? on_bin : off_bin) += std::norm(z);
    }
    CHECK(off_bin <= 1e-20 * on_bin);
  }
}

TEST_CASE("excitation: the amplitude is the peak of the whole waveform and is never exceeded") {
  // PCM codes are limited to floor(A·2^(b−1)) and to 2^(b−1) − 1 (io/audio_writer.hpp).
  for (double a : {1.0, 0.3, 0.123456}) {
    for (auto fmt : {predict::SampleFormat::pcm16, predict::SampleFormat::pcm24, predict::SampleFormat::float32,
                     predict::SampleFormat::text}) {
      for (const char* signal : {"multisine", "square", "sawtooth", "pulse"}) {
        auto o = multisine("1-100", 50, 44100);
        o.signal = signal;
        o.phases = predict::PhaseRule::random;
        o.amplitude = a;
        o.format = fmt;
        const auto r = predict::generate_excitation(o);
        INFO(signal << " " << predict::sample_format_name(fmt) << " A = " << a);
        double peak = 0;
        for (double v : r.period) peak = std::max(peak, std::abs(v));
        CHECK(peak <= a);
        CHECK(peak == r.peak);
        const double lsb = r.full_scale_code > 0 ? 1.0 / static_cast<double>(r.full_scale_code) : 1e-7 * a;
        CHECK(peak >= a - lsb);  // scaled to the true sampled peak, less at most one step
        if (r.full_scale_code > 0) CHECK(r.max_code <= r.full_scale_code - 1);
        CHECK(r.crest_factor == doctest::Approx(peak / r.rms));
      }
    }
  }
  // Exact square and pulse samples: crest factor 1 and 1/sqrt(d) (closed form).
  auto o = multisine("1", 50, 48000);
  o.signal = "square";
  // 960 samples per period, two of them jump midpoints (0): crest factor sqrt(960/958) = 1.00104.
  CHECK(predict::generate_excitation(o).crest_factor == doctest::Approx(std::sqrt(960.0 / 958)).epsilon(1e-12));
  o.signal = "pulse";
  o.duty = 0.25;
  // 239 samples at A, two midpoints at A/2: crest factor sqrt(960/239.5).
  CHECK(predict::generate_excitation(o).crest_factor == doctest::Approx(std::sqrt(960 / 239.5)).epsilon(1e-12));
  o.format = predict::SampleFormat::pcm16;
  o.amplitude = 1.2;
  CHECK_THROWS_WITH_AS(predict::generate_excitation(o),
                       "invalid option: amplitude = 1.2 (must be <= 1 (full scale) in a WAV file)", OptionError);
}

TEST_CASE("excitation: random phases come from mt19937_64 with the documented use of the seed") {
  auto o = multisine("1-8", 100, 48000);
  o.phases = predict::PhaseRule::random;
  o.seed = 12345;
  const auto a = predict::generate_excitation(o);
  std::mt19937_64 engine(12345);
  for (int n = 1; n <= 8; ++n) {
    const double phi = std::remainder(2 * kPi * static_cast<double>(engine() >> 11) * 0x1p-53, 2 * kPi) * 180 / kPi;
    CHECK(std::abs(std::remainder(a.harmonics[static_cast<std::size_t>(n - 1)].phase_deg - phi, 360.0)) < 1e-9);
  }
  CHECK(predict::generate_excitation(o).period == a.period);  // reproducible
  o.seed = 12346;
  CHECK(predict::generate_excitation(o).period != a.period);
}

TEST_CASE("excitation: user amplitude spectrum and band-limited waves") {
  auto o = multisine("1-4");
  o.spectrum = {{1, 1}, {2, 0.5}, {3, 0.25}, {4, 0.125}, {9, 1}};  // 9 is outside the set: unused
  const auto r = predict::generate_excitation(o);
  for (std::size_t i = 1; i < 4; ++i)
    CHECK(r.harmonics[i].amplitude / r.harmonics[0].amplitude == doctest::Approx(std::pow(0.5, double(i))).epsilon(1e-9));
  o.spectrum = {{1, 1}, {2, 0.5}};
  CHECK_THROWS_WITH_AS(predict::generate_excitation(o),
                       "invalid option: spectrum = (harmonic 3 missing) (the amplitude spectrum must give every "
                       "selected harmonic)",
                       OptionError);
  // Band-limited square: only odd harmonics below M/2, in the handbook ratio 1/n.
  ExciteOptions w = multisine("1", 1000, 48000);
  w.signal = "square";
  w.band_limited = true;
  const auto b = predict::generate_excitation(w);
  CHECK(b.harmonics[2].amplitude / b.harmonics[0].amplitude == doctest::Approx(1.0 / 3).epsilon(1e-9));
  CHECK(b.harmonics[1].amplitude < 1e-12 * b.harmonics[0].amplitude);
  ExciteOptions bad;
  bad.signal = "sqaure";
  CHECK_THROWS_WITH_AS(bad.validate(),
                       "unknown signal \"sqaure\" (did you mean \"square\"? signals: multisine, sine, square, "
                       "triangle, sawtooth, half-wave, full-wave, pulse)",
                       UnknownNameError);
  CHECK_NOTHROW(ExciteOptions{}.validate());  // defaults are valid
}
