#include "dsp/waveforms.hpp"

#include <fftw3.h>

#include <algorithm>
#include <cmath>
#include <mutex>
#include <numbers>
#include <set>

#include "core/error.hpp"
#include "core/number_format.hpp"

namespace periodfit::dsp {

namespace {

constexpr double kPi = std::numbers::pi;

struct KindName {
  WaveKind kind;
  const char* name;
};
constexpr KindName kKindNames[] = {
    {WaveKind::sine, "sine"},           {WaveKind::square, "square"},
    {WaveKind::triangle, "triangle"},   {WaveKind::sawtooth, "sawtooth"},
    {WaveKind::half_wave, "half-wave"}, {WaveKind::full_wave, "full-wave"},
    {WaveKind::pulse, "pulse"},         {WaveKind::harmonics, "harmonics"},
};

std::string num(double v) { return format_shortest(v); }

/// Harmonic n of a rectangular pulse of height h on u ∈ [0, d): (2h/(nπ))·sin(nπd)·e^{−jnπd}
/// (pulse centred at u = d/2, even about it; handbook table "rectangular pulse train").
/// sin(nπd) and e^{−jnπd} are evaluated from q = n·d mod 2 so that an integer n·d gives an
/// exact zero and large n keep their accuracy.
std::complex<double> pulse_harmonic(double h, double d, int n) {
  const double nd = n * d;
  const double q = nd - 2 * std::floor(nd / 2);  // in [0, 2)
  const double r = q - std::floor(q);           // q mod 1
  if (r == 0) return 0;
  const double s = std::sin(kPi * q);
  const double a = 2 * h / (n * kPi) * s;
  return {a * std::cos(kPi * q), -a * std::sin(kPi * q)};
}

}  // namespace

std::vector<std::string> wave_kind_names() {
  std::vector<std::string> names;
  for (const auto& k : kKindNames) names.emplace_back(k.name);
  return names;
}

std::string_view wave_kind_name(WaveKind kind) {
  for (const auto& k : kKindNames)
    if (k.kind == kind) return k.name;
  return "?";
}

WaveKind parse_wave_kind(std::string_view name) {
  for (const auto& k : kKindNames)
    if (name == k.name) return k.kind;
  throw UnknownNameError("wave kind", name, wave_kind_names());
}

void WaveSpec::validate() const {
  if (!(std::isfinite(f0_hz) && f0_hz > 0)) throw OptionError("f0_hz", num(f0_hz), "must be > 0");
  if (!std::isfinite(offset_v)) throw OptionError("offset_v", num(offset_v), "must be finite");
  if (kind == WaveKind::harmonics) {
    if (terms.empty())
      throw OptionError("terms", "(none)", "a harmonic list needs at least one n:amp:phase_deg term");
    std::set<int> seen;
    for (const auto& t : terms) {
      if (t.n < 1) throw OptionError("harmonic n", std::to_string(t.n), "must be >= 1; use the offset for dc");
      if (!(std::isfinite(t.amplitude) && t.amplitude >= 0))
        throw OptionError("harmonic amplitude", num(t.amplitude), "must be >= 0");
      if (!std::isfinite(t.phase_deg))
        throw OptionError("harmonic phase_deg", num(t.phase_deg), "must be finite");
      if (!seen.insert(t.n).second)
        throw OptionError("harmonic n", std::to_string(t.n), "each harmonic may be given once");
    }
    return;
  }
  if (!(std::isfinite(amplitude_v) && amplitude_v > 0))
    throw OptionError("amplitude_v", num(amplitude_v), "must be > 0");
  if ((kind == WaveKind::square || kind == WaveKind::pulse) && !(duty > 0 && duty < 1))
    throw OptionError("duty", num(duty), "must be in (0, 1)");
}

double FourierSeries::ac_energy() const {
  double e = 0;
  for (std::size_t n = 1; n < phasors.size(); ++n) e += std::norm(phasors[n]) / 2;
  return e;
}

double FourierSeries::value(double t_s) const {
  if (phasors.empty()) return 0;
  const double cycles = f0_hz * t_s;
  const double theta = 2 * kPi * (cycles - std::floor(cycles));
  double v = phasors[0].real();
  // e^{jnθ} by recurrence, re-seeded every 64 steps so rounding cannot accumulate.
  std::complex<double> step = std::polar(1.0, theta), rot = step;
  for (std::size_t n = 1; n < phasors.size(); ++n) {
    if (n % 64 == 0) rot = std::polar(1.0, static_cast<double>(n) * theta);
    v += (phasors[n] * rot).real();
    rot *= step;
  }
  return v;
}

std::vector<double> sample_period(const FourierSeries& series, int samples_per_period) {
  const auto size = static_cast<std::size_t>(std::max(1, samples_per_period));
  const auto& y = series.phasors;
  std::vector<std::complex<double>> bins(size, 0.0), out(size);
  if (!y.empty()) bins[0] += y[0].real();
  for (std::size_t n = 1; n < y.size(); ++n) {
    const std::size_t b = n % size;
    bins[b] += y[n] / 2.0;
    bins[(size - b) % size] += std::conj(y[n]) / 2.0;
  }
  // FFTW's planner is not thread-safe: plan under a lock, with FFTW's own thread-safe planner
  // mode switched on once (as dsp/fft_plan does) so other FFTW users are safe too.
  static std::mutex planner;
  static const bool thread_safe = [] {
    fftw_make_planner_thread_safe();
    return true;
  }();
  (void)thread_safe;
  fftw_plan plan;
  {
    std::lock_guard lock(planner);
    plan = fftw_plan_dft_1d(static_cast<int>(size), reinterpret_cast<fftw_complex*>(bins.data()),
                            reinterpret_cast<fftw_complex*>(out.data()), FFTW_BACKWARD, FFTW_ESTIMATE);
  }
  if (plan == nullptr) throw std::bad_alloc();
  fftw_execute(plan);
  {
    std::lock_guard lock(planner);
    fftw_destroy_plan(plan);
  }
  std::vector<double> v(size);
  for (std::size_t k = 0; k < size; ++k) v[k] = out[k].real();
  return v;
}

double wave_value_at_phase(const WaveSpec& w, double u) {
  u -= std::floor(u);
  const double a = w.amplitude_v;
  double v = 0;
  switch (w.kind) {
    case WaveKind::sine: v = a * std::sin(2 * kPi * u); break;
    case WaveKind::square:
      v = (u == 0 || u == w.duty) ? 0 : (u < w.duty ? a : -a);
      break;
    case WaveKind::triangle:
      v = u < 0.25 ? 4 * a * u : (u < 0.75 ? a * (2 - 4 * u) : a * (4 * u - 4));
      break;
    case WaveKind::sawtooth: v = u == 0.5 ? 0 : (u < 0.5 ? 2 * a * u : a * (2 * u - 2)); break;
    case WaveKind::half_wave: v = a * std::max(std::sin(2 * kPi * u), 0.0); break;
    case WaveKind::full_wave: v = a * std::abs(std::sin(2 * kPi * u)); break;
    case WaveKind::pulse:
      v = (u == 0 || u == w.duty) ? a / 2 : (u < w.duty ? a : 0);
      break;
    case WaveKind::harmonics:
      for (const auto& t : w.terms)
        v += t.amplitude * std::cos(2 * kPi * (t.n * u - std::floor(t.n * u)) + t.phase_deg * kPi / 180);
      break;
  }
  return v + w.offset_v;
}

double wave_value(const WaveSpec& w, double t_s) {
  const double cycles = w.f0_hz * t_s;
  return wave_value_at_phase(w, cycles - std::floor(cycles));
}

double wave_dc(const WaveSpec& w) {
  const double a = w.amplitude_v;
  double dc = 0;
  switch (w.kind) {
    case WaveKind::sine:
    case WaveKind::triangle:
    case WaveKind::sawtooth:
    case WaveKind::harmonics: dc = 0; break;
    case WaveKind::square: dc = a * (2 * w.duty - 1); break;
    case WaveKind::half_wave: dc = a / kPi; break;        // handbook: A/π
    case WaveKind::full_wave: dc = 2 * a / kPi; break;    // handbook: 2A/π
    case WaveKind::pulse: dc = a * w.duty; break;         // A·d
  }
  return dc + w.offset_v;
}

std::complex<double> wave_harmonic(const WaveSpec& w, int n) {
  if (n < 1) return wave_dc(w);
  const double a = w.amplitude_v;
  const double dn = n;
  switch (w.kind) {
    case WaveKind::sine: return n == 1 ? std::complex<double>(0, -a) : 0.0;
    case WaveKind::square: return pulse_harmonic(2 * a, w.duty, n);
    case WaveKind::pulse: return pulse_harmonic(a, w.duty, n);
    case WaveKind::triangle: {
      if (n % 2 == 0) return 0;
      const double amp = 8 * a / (kPi * kPi * dn * dn);
      return {0, n % 4 == 1 ? -amp : amp};  // (−1)^k sin((2k+1)θ): −90° for n ≡ 1, +90° for n ≡ 3 (mod 4)
    }
    case WaveKind::sawtooth: {
      const double amp = 2 * a / (kPi * dn);
      return {0, n % 2 == 1 ? -amp : amp};  // (−1)^{n+1} sin(nθ)
    }
    case WaveKind::half_wave:
      if (n == 1) return {0, -a / 2};
      if (n % 2 == 1) return 0;
      return -2 * a / (kPi * (dn * dn - 1));
    case WaveKind::full_wave:
      if (n % 2 == 1) return 0;
      return -4 * a / (kPi * (dn * dn - 1));  // n = 2k: 4A/(π(4k²−1)) at 180°
    case WaveKind::harmonics: {
      std::complex<double> x = 0;
      for (const auto& t : w.terms)
        if (t.n == n) x += std::polar(t.amplitude, t.phase_deg * kPi / 180);
      return x;
    }
  }
  return 0;
}

double wave_ac_energy(const WaveSpec& w) {
  const double a2 = w.amplitude_v * w.amplitude_v;
  const double d = w.duty;
  switch (w.kind) {
    case WaveKind::sine: return a2 / 2;
    case WaveKind::square: return 4 * a2 * d * (1 - d);        // A² − (A(2d−1))²
    case WaveKind::triangle:
    case WaveKind::sawtooth: return a2 / 3;                     // mean of (linear ramp)² = A²/3
    case WaveKind::half_wave: return a2 / 4 - a2 / (kPi * kPi); // A²/4 − (A/π)²
    case WaveKind::full_wave: return a2 / 2 - 4 * a2 / (kPi * kPi);
    case WaveKind::pulse: return a2 * d * (1 - d);              // A²d − (Ad)²
    case WaveKind::harmonics: {
      double e = 0;
      for (const auto& t : w.terms) e += t.amplitude * t.amplitude / 2;
      return e;
    }
  }
  return 0;
}

bool wave_has_jumps(const WaveSpec& w) {
  return w.kind == WaveKind::square || w.kind == WaveKind::sawtooth || w.kind == WaveKind::pulse;
}

void TruncationOptions::validate() const {
  if (harmonics < 0) throw OptionError("harmonics", std::to_string(harmonics), "must be >= 0 (0 = automatic)");
  if (!(max_left_out_fraction >= 1e-14 && max_left_out_fraction < 1))
    throw OptionError("max_left_out_fraction", num(max_left_out_fraction),
                      "must be in [1e-14, 1): below 1e-14 rounding of the energy sum decides");
  if (max_harmonics < 1)
    throw OptionError("max_harmonics", std::to_string(max_harmonics), "must be >= 1");
  if (harmonics > max_harmonics)
    throw OptionError("harmonics", std::to_string(harmonics), "must be <= " + std::to_string(max_harmonics));
}

SeriesTruncation truncate_series(const WaveSpec& wave, const TruncationOptions& options) {
  wave.validate();
  options.validate();
  SeriesTruncation out;
  out.series.f0_hz = wave.f0_hz;
  const double total = wave_ac_energy(wave);
  int highest_term = 0;  // harmonics kind: beyond this everything is zero
  if (wave.kind == WaveKind::harmonics)
    for (const auto& t : wave.terms) highest_term = std::max(highest_term, t.n);
  // Left-out energy: for a finite list it is summed directly; otherwise Parseval with the
  // closed-form total (exact up to rounding).
  const auto left_out = [&](double kept, int n_kept) {
    if (wave.kind == WaveKind::harmonics) {
      double e = 0;
      for (const auto& t : wave.terms)
        if (t.n > n_kept) e += t.amplitude * t.amplitude / 2;
      return e;
    }
    return std::max(0.0, total - kept);
  };
  auto& x = out.series.phasors;
  x.push_back(wave_dc(wave));
  double kept = 0;
  if (options.harmonics > 0) {
    for (int n = 1; n <= options.harmonics; ++n) {
      x.push_back(wave_harmonic(wave, n));
      kept += std::norm(x.back()) / 2;
    }
    out.harmonics = options.harmonics;
    out.method = SeriesCount::given;
  } else {
    const double allowed = options.max_left_out_fraction * total;
    int n = 0;
    while (total > 0 && left_out(kept, n) > allowed) {
      if (n >= options.max_harmonics)
        throw AnalysisError("the " + std::string(wave_kind_name(wave.kind)) + " wave needs more than " +
                            std::to_string(options.max_harmonics) +
                            " harmonics to leave out less than " + num(options.max_left_out_fraction) +
                            " of its energy; give the harmonic count");
      ++n;
      x.push_back(wave_harmonic(wave, n));
      kept += std::norm(x.back()) / 2;
    }
    // A waveform whose series ends (sine, a harmonic list) is complete at its last term.
    if (n == 0) n = 1, x.push_back(wave_harmonic(wave, 1));
    out.harmonics = n;
    out.method = (wave.kind == WaveKind::harmonics && n >= highest_term) || wave.kind == WaveKind::sine
                     ? SeriesCount::complete
                     : SeriesCount::automatic;
  }
  out.left_out_fraction = total > 0 ? left_out(kept, out.harmonics) / total : 0;
  return out;
}

}  // namespace periodfit::dsp
