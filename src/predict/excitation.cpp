#include "predict/excitation.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <map>
#include <numbers>
#include <random>
#include <set>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "dsp/fft_plan.hpp"
#include "io/audio_writer.hpp"
#include "core/number_format.hpp"

namespace periodfit::predict {

namespace {

constexpr double kPi = std::numbers::pi;
/// rate/f0 within this relative distance of an integer counts as already whole.
constexpr double kWholeRelative = 1e-12;
/// A kept-f0 rate counts as a whole number of Hz within this relative distance.
constexpr double kWholeRateRelative = 1e-9;
/// Largest file: samples × channels (keeps a WAV under its 4 GiB limit at 32 bits).
constexpr double kMaxFileSamples = 1e9;
/// Harmonics listed for a wave excitation.
constexpr int kWaveHarmonicsListed = 50;

std::string num(double v) { return format_shortest(v); }
/// Frequencies in messages for people: 9 significant digits hide binary rounding.
std::string hz(double v) { return format_significant(v, 9); }

std::string trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
  return std::string(s);
}

int parse_positive(std::string_view item, std::string_view text) {
  const std::string s = trim(item);
  int v = 0;
  const auto [ptr, ec] = std::from_chars(s.data(), s.data() + s.size(), v);
  if (s.empty() || ec != std::errc{} || ptr != s.data() + s.size())
    throw OptionError("harmonics", std::string(text), "\"" + s + "\" is not a whole number");
  if (v < 1) throw OptionError("harmonics", std::string(text), "harmonic numbers start at 1, found " + s);
  return v;
}

double wrap_phase(double rad) {
  double r = std::remainder(rad, 2 * kPi);  // in [−π, π]
  if (r <= -kPi) r += 2 * kPi;
  return r;
}

}  // namespace

std::vector<int> parse_harmonic_list(std::string_view text) {
  std::vector<int> out;
  std::set<int> seen;
  std::size_t start = 0;
  const std::string whole(text);
  while (true) {
    const std::size_t comma = text.find(',', start);
    const std::string_view item = text.substr(start, comma == std::string_view::npos ? std::string_view::npos : comma - start);
    if (trim(item).empty()) throw OptionError("harmonics", whole, "empty item in the list");
    const std::size_t dash = item.find('-');
    int lo = 0, hi = 0;
    if (dash == std::string_view::npos) {
      lo = hi = parse_positive(item, text);
    } else {
      lo = parse_positive(item.substr(0, dash), text);
      hi = parse_positive(item.substr(dash + 1), text);
      if (hi < lo) throw OptionError("harmonics", whole, "range " + trim(item) + " runs backwards");
    }
    if (static_cast<double>(out.size()) + (hi - lo + 1.0) > kMaxListedHarmonics)
      throw OptionError("harmonics", whole, "more than " + std::to_string(kMaxListedHarmonics) + " harmonics");
    for (int n = lo; n <= hi; ++n) {
      if (!seen.insert(n).second)
        throw OptionError("harmonics", whole, "harmonic " + std::to_string(n) + " is listed twice");
      out.push_back(n);
    }
    if (comma == std::string_view::npos) break;
    start = comma + 1;
  }
  std::sort(out.begin(), out.end());
  return out;
}

std::vector<int> select_harmonics(const std::vector<int>& list, bool odd_only, int skip_every) {
  std::vector<int> out;
  for (int n : list) {
    if ((odd_only || skip_every > 0) && n % 2 == 0) continue;
    if (skip_every > 0 && ((n + 1) / 2) % skip_every == 0) continue;  // the ((n+1)/2)-th odd harmonic
    out.push_back(n);
  }
  return out;
}

std::vector<std::string> phase_rule_names() { return {"schroeder", "random", "zero"}; }

PhaseRule parse_phase_rule(std::string_view name) {
  if (name == "schroeder") return PhaseRule::schroeder;
  if (name == "random") return PhaseRule::random;
  if (name == "zero") return PhaseRule::zero;
  throw UnknownNameError("phase rule", name, phase_rule_names());
}

std::vector<std::string> sample_format_names() { return {"pcm16", "pcm24", "float", "csv"}; }

SampleFormat parse_sample_format(std::string_view name) {
  if (name == "pcm16") return SampleFormat::pcm16;
  if (name == "pcm24") return SampleFormat::pcm24;
  if (name == "float") return SampleFormat::float32;
  if (name == "csv") return SampleFormat::text;
  throw UnknownNameError("sample format", name, sample_format_names());
}

std::string_view sample_format_name(SampleFormat format) {
  switch (format) {
    case SampleFormat::pcm16: return "pcm16";
    case SampleFormat::pcm24: return "pcm24";
    case SampleFormat::float32: return "float";
    case SampleFormat::text: return "csv";
  }
  return "?";
}

void ExciteOptions::validate() const {
  if (signal != "multisine") {
    std::vector<std::string> known{"multisine"};
    for (const auto& n : dsp::wave_kind_names())
      if (n != "harmonics") known.push_back(n);
    if (std::find(known.begin(), known.end(), signal) == known.end())
      throw UnknownNameError("signal", signal, known);
  }
  if (!(std::isfinite(f0_hz) && f0_hz > 0)) throw OptionError("f0_hz", num(f0_hz), "must be > 0");
  if (!(std::isfinite(rate_hz) && rate_hz > 0)) throw OptionError("rate_hz", num(rate_hz), "must be > 0");
  if (periods < 1) throw OptionError("periods", std::to_string(periods), "must be >= 1");
  if (!(std::isfinite(duration_s) && duration_s >= 0))
    throw OptionError("duration_s", num(duration_s), "must be >= 0 (0 = use periods)");
  if (!(std::isfinite(amplitude) && amplitude > 0)) throw OptionError("amplitude", num(amplitude), "must be > 0");
  if (format != SampleFormat::text && amplitude > 1)
    throw OptionError("amplitude", num(amplitude), "must be <= 1 (full scale) in a WAV file");
  if (channels < 1 || channels > 64) throw OptionError("channels", std::to_string(channels), "must be in [1, 64]");
  if (skip_every == 1 || skip_every < 0)
    throw OptionError("skip_every", std::to_string(skip_every), "must be 0 (none) or >= 2");
  if ((signal == "square" || signal == "pulse") && !(duty > 0 && duty < 1))
    throw OptionError("duty", num(duty), "must be in (0, 1)");
  for (const auto& [n, a] : spectrum) {
    if (n < 1) throw OptionError("spectrum harmonic", std::to_string(n), "must be >= 1");
    if (!(std::isfinite(a) && a > 0))
      throw OptionError("spectrum amplitude of harmonic " + std::to_string(n), num(a), "must be > 0");
  }
}

namespace {

/// Whole samples per period M: f0 or the rate gives way when rate/f0 is not whole; the period
/// count from the duration. Sets r's timing fields and returns M.
int settle_period_grid(const ExciteOptions& o, ExciteResult& r) {
  const double ratio = o.rate_hz / o.f0_hz;
  const double m_real = std::round(ratio);
  if (m_real < 2)
    throw OptionError("f0_hz", num(o.f0_hz), "must be at most half the sample rate (" + num(o.rate_hz) + " Hz)");
  if (m_real > kMaxFileSamples)
    throw OptionError("f0_hz", num(o.f0_hz), "gives more than 1e9 samples per period at " + num(o.rate_hz) + " Hz");
  // One period is built in memory (the unit-scale period, its complex spectrum and a scaled
  // copy: counted as 32 B per sample) before the file repeats it; bounded against the memory
  // budget before allocation (issue 11, class 5).
  if (const auto over = over_memory_budget(32.0 * m_real))
    throw OptionError("rate_hz", num(o.rate_hz),
                      "one period of " + num(m_real) + " samples at f0 = " + num(o.f0_hz) + " Hz needs " + *over);
  const int m = static_cast<int>(m_real);
  r.samples_per_period = m;
  if (std::abs(ratio - m_real) <= kWholeRelative * m_real) {
    r.f0_hz = o.f0_hz;
    r.rate_hz = o.rate_hz;
  } else if (o.adjust == LoopAdjust::f0) {
    r.adjusted = LoopAdjust::f0;
    r.rate_hz = o.rate_hz;
    r.f0_hz = o.rate_hz / m_real;
  } else {
    r.adjusted = LoopAdjust::rate;
    r.f0_hz = o.f0_hz;
    r.rate_hz = m_real * o.f0_hz;
    if (o.format != SampleFormat::text) {
      const double whole = std::round(r.rate_hz);
      if (std::abs(r.rate_hz - whole) > kWholeRateRelative * r.rate_hz)
        throw OptionError("adjust", "rate",
                          "keeping f0 = " + num(o.f0_hz) + " Hz needs " + std::to_string(m) + " samples per period at " +
                              hz(r.rate_hz) + " Hz, not a whole number of Hz for a WAV file; adjust f0 instead");
      r.rate_hz = whole;
    }
  }
  r.periods = o.duration_s > 0 ? static_cast<int>(std::min(2e9, std::ceil(o.duration_s * r.f0_hz - 1e-9))) : o.periods;
  r.periods = std::max(1, r.periods);
  if (static_cast<double>(m) * r.periods * o.channels > kMaxFileSamples)
    throw OptionError(o.duration_s > 0 ? "duration_s" : "periods",
                      o.duration_s > 0 ? num(o.duration_s) : std::to_string(o.periods),
                      "the file would hold more than 1e9 samples");
  return m;
}

/// The phases of a multisine with amplitudes `amp` by the rule asked for; sets r.method,
/// r.phases (and r.seed for random phases).
std::vector<double> multisine_phases(const ExciteOptions& o, const std::vector<double>& amp, ExciteResult& r) {
  std::vector<double> phase(amp.size(), 0.0);
  if (o.phases == PhaseRule::schroeder) {
    double total = 0;
    for (double a : amp) total += a * a;
    // φ_k − φ_{k−1} = −2π·Σ_{l<k} p_l, the recursion form of Schroeder's sum.
    // Wrapped at every step so a long list keeps its accuracy.
    double cumulative = 0;
    for (std::size_t k = 1; k < amp.size(); ++k) {
      cumulative += amp[k - 1] * amp[k - 1] / total;
      phase[k] = wrap_phase(phase[k - 1] - 2 * kPi * cumulative);
    }
    r.method = "multisine, schroeder phases";
    r.phases = PhaseRule::schroeder;
  } else if (o.phases == PhaseRule::random) {
    std::mt19937_64 engine(o.seed);
    for (double& p : phase) p = wrap_phase(2 * kPi * static_cast<double>(engine() >> 11) * 0x1p-53);
    r.seed = o.seed;
    r.method = "multisine, random phases";
    r.phases = PhaseRule::random;
  } else {
    r.method = "multisine, zero phases";
    r.phases = PhaseRule::zero;
  }
  return phase;
}

/// One unit-scale period of M samples of the multisine; `excited` receives its harmonics.
std::vector<double> multisine_period(const ExciteOptions& o, ExciteResult& r, int m, std::vector<int>& excited) {
  const std::vector<int> selected = select_harmonics(parse_harmonic_list(o.harmonics), o.odd_only, o.skip_every);
  if (selected.empty())
    throw OptionError("harmonics", o.harmonics, "no harmonic is left after the odd/skip-every selection");
  if (2 * static_cast<long>(selected.back()) >= m)
    throw OptionError("harmonics", o.harmonics,
                      "harmonic " + std::to_string(selected.back()) + " (" + hz(selected.back() * r.f0_hz) +
                          " Hz) must lie below half the sample rate (" + hz(r.rate_hz / 2) + " Hz)");
  std::vector<double> amp(selected.size(), 1.0);
  if (!o.spectrum.empty()) {
    std::map<int, double> given(o.spectrum.begin(), o.spectrum.end());
    for (std::size_t i = 0; i < selected.size(); ++i) {
      const auto it = given.find(selected[i]);
      if (it == given.end())
        throw OptionError("spectrum", "(harmonic " + std::to_string(selected[i]) + " missing)",
                          "the amplitude spectrum must give every selected harmonic");
      amp[i] = it->second;
    }
  }
  const std::vector<double> phase = multisine_phases(o, amp, r);
  dsp::FourierSeries s{r.f0_hz, std::vector<std::complex<double>>(static_cast<std::size_t>(selected.back()) + 1, 0.0)};
  for (std::size_t i = 0; i < selected.size(); ++i)
    s.phasors[static_cast<std::size_t>(selected[i])] = std::polar(amp[i], phase[i]);
  excited = selected;
  return dsp::sample_period(s, m);
}

/// One unit-scale period of M samples of a waveform, exact or band-limited; `excited` receives
/// the harmonics listed.
std::vector<double> wave_period(const ExciteOptions& o, ExciteResult& r, int m, std::vector<int>& excited) {
  dsp::WaveSpec w;
  w.kind = dsp::parse_wave_kind(o.signal);
  w.amplitude_v = 1;
  w.f0_hz = r.f0_hz;
  w.duty = o.duty;
  std::vector<double> x;
  if (o.band_limited) {
    dsp::TruncationOptions t;
    t.harmonics = std::max(1, (m - 1) / 2);
    x = dsp::sample_period(dsp::truncate_series(w, t).series, m);
    r.method = o.signal + " wave, band-limited to " + std::to_string(t.harmonics) + " harmonics";
  } else {
    x.resize(static_cast<std::size_t>(m));
    for (int k = 0; k < m; ++k) x[static_cast<std::size_t>(k)] = dsp::wave_value_at_phase(w, static_cast<double>(k) / m);
    r.method = o.signal + " wave, exact samples";
  }
  for (int n = 1; n <= std::min(kWaveHarmonicsListed, m / 2); ++n) excited.push_back(n);
  return x;
}

/// Scales the period by its true sampled peak to the amplitude, quantises it without exceeding
/// the amplitude, and records peak, RMS, crest factor and codes of what is written.
void scale_and_quantise(const ExciteOptions& o, ExciteResult& r, std::vector<double>& x) {
  double peak = 0;
  for (double v : x) peak = std::max(peak, std::abs(v));
  if (!(peak > 0)) throw AnalysisError("the " + o.signal + " signal is zero at every sample of the period");
  const double scale = o.amplitude / peak;
  for (double& v : x) v = std::clamp(v * scale, -o.amplitude, o.amplitude);
  if (o.format != SampleFormat::text) {
    const auto enc = o.format == SampleFormat::pcm16   ? io::AudioEncoding::pcm16
                     : o.format == SampleFormat::pcm24 ? io::AudioEncoding::pcm24
                                                       : io::AudioEncoding::float32;
    x = io::quantize_pcm(x, enc, o.amplitude);
    r.full_scale_code = io::pcm_full_scale(enc);
  }
  r.peak = 0;
  double sum2 = 0;
  for (double v : x) r.peak = std::max(r.peak, std::abs(v)), sum2 += v * v;
  r.rms = std::sqrt(sum2 / static_cast<double>(x.size()));
  r.crest_factor = r.peak / r.rms;
  if (r.full_scale_code > 0) r.max_code = std::lround(r.peak * static_cast<double>(r.full_scale_code));
}

}  // namespace

ExciteResult generate_excitation(const ExciteOptions& o) {
  o.validate();
  ExciteResult r;
  r.signal = o.signal;
  r.f0_requested_hz = o.f0_hz;
  r.rate_requested_hz = o.rate_hz;
  r.format = o.format;
  r.channels = o.channels;
  r.amplitude_requested = o.amplitude;
  const int m = settle_period_grid(o, r);
  std::vector<int> excited;
  std::vector<double> x = o.signal == "multisine" ? multisine_period(o, r, m, excited) : wave_period(o, r, m, excited);
  scale_and_quantise(o, r, x);

  // The file's own harmonics (DFT of the written period).
  std::vector<std::complex<double>> spectrum(static_cast<std::size_t>(m / 2 + 1));
  dsp::real_dft(x, spectrum);
  for (int n : excited) {
    // X_n = 2·DFT_n/M; cos(nω0t + φ) has DFT bin e^{jφ}·M/2, so φ = arg(bin).
    const std::complex<double> z = 2.0 * spectrum[static_cast<std::size_t>(n)] / static_cast<double>(m);
    r.harmonics.push_back({n, n * r.f0_hz, std::abs(z), std::arg(z) * 180 / kPi});
  }
  if (r.adjusted == LoopAdjust::f0)
    r.warnings.push_back("f0 adjusted from " + hz(o.f0_hz) + " Hz to " + hz(r.f0_hz) + " Hz so a period holds " +
                         std::to_string(m) + " samples");
  if (r.adjusted == LoopAdjust::rate)
    r.warnings.push_back("sample rate adjusted from " + hz(o.rate_hz) + " Hz to " + hz(r.rate_hz) +
                         " Hz so a period holds " + std::to_string(m) + " samples");
  r.period = std::move(x);
  return r;
}

std::vector<std::pair<int, double>> parse_amplitude_spectrum(std::string_view text, std::string_view name) {
  std::vector<std::pair<int, double>> out;
  std::set<int> seen;
  std::size_t line_no = 0, start = 0;
  const std::string file(name);
  while (start <= text.size()) {
    const std::size_t end = std::min(text.find('\n', start), text.size());
    std::string_view line = text.substr(start, end - start);
    ++line_no;
    start = end + 1;
    if (const auto hash = line.find('#'); hash != std::string_view::npos) line = line.substr(0, hash);
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    // Fields separated by comma, semicolon, tab or spaces.
    std::vector<std::pair<std::size_t, std::string_view>> fields;
    std::size_t i = 0;
    while (i < line.size()) {
      while (i < line.size() && (line[i] == ' ' || line[i] == '\t' || line[i] == ',' || line[i] == ';')) ++i;
      const std::size_t f = i;
      while (i < line.size() && !(line[i] == ' ' || line[i] == '\t' || line[i] == ',' || line[i] == ';')) ++i;
      if (i > f) fields.emplace_back(f + 1, line.substr(f, i - f));
    }
    if (fields.empty()) {
      if (end >= text.size()) break;
      continue;
    }
    int n = 0;
    double a = 0;
    const auto& [col_n, f_n] = fields[0];
    const auto [pn, en] = std::from_chars(f_n.data(), f_n.data() + f_n.size(), n);
    const bool n_ok = en == std::errc{} && pn == f_n.data() + f_n.size();
    if (!n_ok && out.empty() && seen.empty() && line_no == 1) continue;  // a header line
    if (!n_ok) throw InputError(file, line_no, col_n, "expected a harmonic number, found \"" + std::string(f_n) + "\"");
    if (fields.size() != 2)
      throw InputError(file, line_no, 0, "expected two fields (n, amplitude), found " + std::to_string(fields.size()));
    const auto& [col_a, f_a] = fields[1];
    const auto [pa, ea] = std::from_chars(f_a.data(), f_a.data() + f_a.size(), a);
    if (ea != std::errc{} || pa != f_a.data() + f_a.size())
      throw InputError(file, line_no, col_a, "expected an amplitude, found \"" + std::string(f_a) + "\"");
    if (n < 1) throw InputError(file, line_no, col_n, "harmonic numbers start at 1, found " + std::to_string(n));
    if (!(std::isfinite(a) && a > 0))
      throw InputError(file, line_no, col_a, "amplitudes must be > 0, found " + std::string(f_a));
    if (!seen.insert(n).second)
      throw InputError(file, line_no, col_n, "harmonic " + std::to_string(n) + " is given twice");
    out.emplace_back(n, a);
    if (end >= text.size()) break;
  }
  if (out.empty()) throw InputError(file, 0, 0, "no n,amplitude pairs found");
  return out;
}

}  // namespace periodfit::predict
