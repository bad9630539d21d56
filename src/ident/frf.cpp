#include "ident/frf.hpp"

#include <limits>

#include "dsp/magnitude_interval.hpp"

#include <algorithm>
#include <boost/math/distributions/normal.hpp>
#include <boost/math/distributions/students_t.hpp>
#include <cmath>
#include <numbers>

#include "core/error.hpp"
#include "core/number_format.hpp"

namespace periodfit::ident {

namespace {

constexpr double kDegPerRad = 180.0 / std::numbers::pi;

/// The output responds when |Ȳ_n| exceeds this many standard deviations of its noise floor at
/// one excited line at least: 3σ, the analyze significance default (common practice for a
/// detection). For a noise-only output |Ȳ_n|²/σ² is exponential (circular Gaussian noise), so
/// a line passes by chance with probability e^{-9} ≈ 1.2e-4.
constexpr double kOutputResponseSigmas = 3;

/// Relative mismatch of f0 between the two spectra that still counts as "the same grid".
constexpr double kSameF0Relative = 1e-12;

void check_same_grid(const dsp::PeriodSpectra& u, const dsp::PeriodSpectra& y) {
  const auto complete = [](const dsp::PeriodSpectra& s) {
    const auto h = static_cast<std::size_t>(s.max_harmonic) + 1;
    if (s.periods < 1 || s.max_harmonic < 1 || s.mean.size() != h) return false;
    if (s.per_period.size() != static_cast<std::size_t>(s.periods)) return false;
    for (const auto& p : s.per_period)
      if (p.size() != h) return false;
    return s.noise_bin_variance.empty() || s.noise_bin_variance.size() == h;
  };
  if (!complete(u) || !complete(y))
    throw AnalysisError("FRF: the input or output spectrum is incomplete (no harmonics or periods)");
  if (u.periods != y.periods || u.max_harmonic != y.max_harmonic ||
      u.samples_per_period != y.samples_per_period ||
      std::abs(u.f0_hz - y.f0_hz) > kSameF0Relative * std::abs(u.f0_hz))
    throw AnalysisError("FRF: input and output are not on the same period grid (f0 " +
                        format_shortest(u.f0_hz) + " vs " + format_shortest(y.f0_hz) +
                        " Hz, " + std::to_string(u.periods) + " vs " +
                        std::to_string(y.periods) + " periods, " +
                        std::to_string(u.max_harmonic) + " vs " +
                        std::to_string(y.max_harmonic) + " harmonics)");
}

/// Per-harmonic sample statistics of the averaged phasors over P periods.
struct PeriodMoments {
  double var_u = 0;  ///< variance of Ū (sample variance of one period / P)
  double var_y = 0;
  double var_re = 0, var_im = 0, cov_re_im = 0;  ///< of the linearised δH, divided by P
};

PeriodMoments period_moments(const dsp::PeriodSpectra& u, const std::vector<std::complex<double>>& y_mean,
                             const std::vector<std::vector<std::complex<double>>>& y_periods,
                             std::size_t n, std::complex<double> h) {
  const auto periods = static_cast<std::size_t>(u.periods);
  const double scale = 1.0 / (double(periods - 1) * double(periods));
  PeriodMoments m;
  const std::complex<double> u_mean = u.mean[n];
  for (std::size_t p = 0; p < periods; ++p) {
    const std::complex<double> du = u.per_period[p][n] - u_mean;
    const std::complex<double> dy = y_periods[p][n] - y_mean[n];
    m.var_u += std::norm(du);
    m.var_y += std::norm(dy);
    if (u_mean != 0.0) {
      // δH_p = (δY − H·δU)/Ū: first-order deviation of Y/U (Pintelon & Schoukens §2.4).
      const std::complex<double> dh = (dy - h * du) / u_mean;
      m.var_re += dh.real() * dh.real();
      m.var_im += dh.imag() * dh.imag();
      m.cov_re_im += dh.real() * dh.imag();
    }
  }
  m.var_u *= scale;
  m.var_y *= scale;
  m.var_re *= scale;
  m.var_im *= scale;
  m.cov_re_im *= scale;
  return m;
}

}  // namespace

void FrfOptions::validate() const {
  if (!std::isfinite(min_snr_db) || min_snr_db < 0)
    throw OptionError("min_snr_db", format_shortest(min_snr_db), "must be finite and >= 0");
  if (!(confidence > 0 && confidence < 1))
    throw OptionError("confidence", format_shortest(confidence), "must be in (0, 1)");
  // Two periods give a rank-1 2×2 sample covariance, which no weighted fit can invert.
  if (min_periods_for_sample_variance < 3)
    throw OptionError("min_periods_for_sample_variance",
                      std::to_string(min_periods_for_sample_variance), "must be >= 3");
  if (!std::isfinite(skew_s))
    throw OptionError("skew_s", format_shortest(skew_s), "must be finite");
}

std::vector<FrfPoint> fit_points(const FrfResult& frf) {
  std::vector<FrfPoint> points;
  points.reserve(frf.points.size());
  for (const auto& p : frf.points)
    points.push_back({2 * std::numbers::pi * p.freq_hz, p.h, p.var_re, p.var_im, p.cov_re_im,
                      p.at_numerical_floor ? 0 : frf.dof, frf.method == FrfNoiseMethod::per_period_covariance});
  return points;
}

double coverage_factor(double confidence, int dof) {
  const double tail = 0.5 * (1 + confidence);
  if (dof <= 0 || dof > kNormalQuantileDof)
    return boost::math::quantile(boost::math::normal_distribution<double>(), tail);
  return boost::math::quantile(boost::math::students_t_distribution<double>(double(dof)), tail);
}

namespace {

/// Refuses spectra the FRF cannot use: no noise estimate at all, or a deskew longer than the
/// record. Returns whether the per-period covariance serves (else the noise bins do).
bool check_frf_inputs(const dsp::PeriodSpectra& input, const dsp::PeriodSpectra& output,
                      const FrfOptions& options) {
  options.validate();
  check_same_grid(input, output);
  const auto harmonics = static_cast<std::size_t>(input.max_harmonic);
  const bool per_period = input.periods >= options.min_periods_for_sample_variance;
  const bool have_bins = input.noise_bin_dof > 0 && output.noise_bin_dof > 0 &&
                         input.noise_bin_variance.size() == harmonics + 1 &&
                         output.noise_bin_variance.size() == harmonics + 1;
  if (!per_period && !have_bins)
    throw AnalysisError("FRF: no noise estimate: " + std::to_string(input.periods) +
                        " period(s) and no noise bins between the harmonics; at least " +
                        std::to_string(options.min_periods_for_sample_variance) +
                        " whole periods are needed");

  // The deskew is for acquisition paths (probe, cable, ADC pipeline), which lag by far less
  // than a record. A longer skew is a typo or a unit mix-up, and an enormous one only rotates
  // the phases by the rounding of skew_s itself (its last bit, 2^-53·|skew|, turns harmonic n
  // by n·ω0·2^-53·|skew| rad), which no uncertainty accounts for (issue 11, class 7).
  const double record_s = double(input.periods) / input.f0_hz;
  if (!(std::abs(options.skew_s) <= record_s))
    throw OptionError("skew_s", format_shortest(options.skew_s),
                      "must not exceed the record's length of " + format_significant(record_s, 6) +
                          " s (" + std::to_string(input.periods) + " periods of " +
                          format_significant(input.f0_hz, 9) + " Hz)");
  return per_period;
}

/// The output's phasors after the deskew: the recorded output lags by skew_s, so
/// Y_true = Y_rec·e^{+jnω0·skew}. Rotating the per-period phasors too keeps their spread about
/// the rotated mean unchanged.
struct DeskewedOutput {
  std::vector<std::complex<double>> mean;
  std::vector<std::vector<std::complex<double>>> per_period;
};

DeskewedOutput deskewed(const dsp::PeriodSpectra& output, double f0_hz, double skew_s) {
  DeskewedOutput y{output.mean, output.per_period};
  if (skew_s == 0) return y;
  const double w0 = 2 * std::numbers::pi * f0_hz;
  for (std::size_t n = 0; n <= static_cast<std::size_t>(output.max_harmonic); ++n) {
    const std::complex<double> rot = std::polar(1.0, double(n) * w0 * skew_s);
    y.mean[n] *= rot;
    for (auto& p : y.per_period) p[n] *= rot;
  }
  return y;
}

/// The point at harmonic n: H = Y/U (h) and its covariance of (Re H, Im H), from the per-period
/// moments or, with noise bins only (m holds their variances of Ū and Ȳ), for uncorrelated
/// circular noise.
FrfHarmonic frf_point(int n, double f0_hz, std::complex<double> u, std::complex<double> y, std::complex<double> h,
                      double snr, const PeriodMoments& m, bool per_period) {
  FrfHarmonic pt;
  pt.n = n;
  pt.freq_hz = double(n) * f0_hz;
  pt.u = u;
  pt.y = y;
  pt.h = h;
  pt.re = h.real();
  pt.im = h.imag();
  pt.mag = std::abs(h);
  pt.mag_db = 20 * std::log10(pt.mag);
  pt.phase_deg = std::arg(h) * kDegPerRad;
  pt.input_snr_db = 10 * std::log10(snr);
  if (per_period) {
    pt.var_re = m.var_re;
    pt.var_im = m.var_im;
    pt.cov_re_im = m.cov_re_im;
  } else {
    // Uncorrelated circular noise on Ū and Ȳ: σ²_H = |H|²(σ²_Y/|Y|² + σ²_U/|U|²)
    // = (σ²_Y + |H|²σ²_U)/|U|², split equally between Re and Im.
    const double var_h = (m.var_y + std::norm(h) * m.var_u) / std::norm(u);
    pt.var_re = pt.var_im = 0.5 * var_h;
    pt.cov_re_im = 0;
  }
  return pt;
}

/// Standard uncertainties and the coverage intervals of |H| and phase from the point's 2×2
/// covariance of (Re H, Im H), with coverage factor k.
void set_intervals(FrfHarmonic& pt, double k) {
  pt.var_h = pt.var_re + pt.var_im;
  // Radial and tangential projections of the 2×2 covariance give |H| and phase variances.
  const double c = pt.mag > 0 ? pt.re / pt.mag : 1.0;
  const double s = pt.mag > 0 ? pt.im / pt.mag : 0.0;
  const double var_mag = c * c * pt.var_re + s * s * pt.var_im + 2 * c * s * pt.cov_re_im;
  const double var_tan = s * s * pt.var_re + c * c * pt.var_im - 2 * c * s * pt.cov_re_im;
  pt.mag_u = std::sqrt(std::max(var_mag, 0.0));
  pt.phase_u_deg = pt.mag > 0 ? std::sqrt(std::max(var_tan, 0.0)) / pt.mag * kDegPerRad : 0.0;
  pt.mag_db_u = pt.mag > 0 ? 20 / std::numbers::ln10 * pt.mag_u / pt.mag : 0.0;
  // |H| interval inside [0, ∞): Rice inversion at low SNR (issue 12: a weak harmonic gave
  // [-0.000433, 0.0020006]); σ² per component is the mean of the two.
  const dsp::MagnitudeInterval iv = dsp::magnitude_interval(pt.mag, std::sqrt(0.5 * pt.var_h), k);
  if (iv.method == dsp::MagnitudeIntervalMethod::rice) {
    pt.mag_lo = iv.lo;
    pt.mag_hi = iv.hi;
  } else {
    pt.mag_lo = std::max(0.0, pt.mag - k * pt.mag_u);
    pt.mag_hi = pt.mag + k * pt.mag_u;
  }
  pt.phase_defined = !iv.consistent_with_zero && pt.mag_lo > 0;
  if (pt.phase_defined) {
    pt.phase_lo_deg = pt.phase_deg - k * pt.phase_u_deg;
    pt.phase_hi_deg = pt.phase_deg + k * pt.phase_u_deg;
  } else {
    pt.phase_lo_deg = pt.phase_hi_deg = std::numeric_limits<double>::quiet_NaN();
  }
}

/// An output with nothing at the excited lines (a constant, zero or noise-only channel) gives
/// |H| of rounding or noise; a ratio of those is not a response, and a model fitted to it
/// would be invented (issue 11, class 8). The output must stand out of its own noise (or
/// rounding) floor at one line at least, by kOutputResponseSigmas standard deviations.
void check_output_responds(const FrfResult& r) {
  bool responds = false;
  for (const auto& pt : r.points)
    responds = responds || std::norm(pt.y) > kOutputResponseSigmas * kOutputResponseSigmas *
                                                 r.output_noise_floor[static_cast<std::size_t>(pt.n)];
  if (responds) return;
  std::string ns;
  for (const auto& pt : r.points) ns += (ns.empty() ? "" : ", ") + std::to_string(pt.n);
  throw AnalysisError("the output carries no response at the excited harmonics (n = " + ns +
                      "): at none of them does it rise above its own noise or rounding level by " +
                      format_shortest(kOutputResponseSigmas) +
                      " standard deviations (the output is constant, zero or noise); check that "
                      "the output channel is the DUT's output");
}

}  // namespace

FrfResult compute_frf(const dsp::PeriodSpectra& input, const dsp::PeriodSpectra& output,
                      const FrfOptions& options) {
  const bool per_period = check_frf_inputs(input, output, options);
  const auto harmonics = static_cast<std::size_t>(input.max_harmonic);

  FrfResult r;
  r.method = per_period ? FrfNoiseMethod::per_period_covariance : FrfNoiseMethod::noise_bins;
  r.f0_hz = input.f0_hz;
  r.periods = input.periods;
  r.max_harmonic = input.max_harmonic;
  r.dof = per_period ? input.periods - 1 : std::min(input.noise_bin_dof, output.noise_bin_dof);
  r.output_noise_dof = per_period ? 2 * (input.periods - 1) : output.noise_bin_dof;
  r.confidence = options.confidence;
  r.coverage_factor = coverage_factor(options.confidence, r.dof);
  r.quantile = r.dof > kNormalQuantileDof ? "normal" : "student-t";
  if (!per_period) r.flags.push_back(Flag::few_periods);

  const DeskewedOutput yd = deskewed(output, input.f0_hz, options.skew_s);
  const std::vector<std::complex<double>>& y_mean = yd.mean;

  // The numerical floor scales with the largest phasor, dc included: a constant record's
  // harmonics are rounding relative to its dc value.
  double max_u = 0, max_y = 0;
  for (std::size_t n = 0; n <= harmonics; ++n) {
    max_u = std::max(max_u, std::abs(input.mean[n]));
    max_y = std::max(max_y, std::abs(y_mean[n]));
  }
  const double input_numerical_floor = std::pow(kNumericalFloorRelative * max_u, 2);
  const double output_numerical_floor = std::pow(kNumericalFloorRelative * max_y, 2);
  const double min_ratio = std::pow(10.0, options.min_snr_db / 10);

  bool at_floor = false;
  r.input_noise_floor.assign(harmonics + 1, 0.0);
  r.output_noise_floor.assign(harmonics + 1, 0.0);
  for (std::size_t n = 1; n <= harmonics; ++n) {
    const std::complex<double> u = input.mean[n];
    const std::complex<double> y = y_mean[n];
    const std::complex<double> h = u != 0.0 ? y / u : std::complex<double>(0);
    // Per period: the sample moments; otherwise the noise bins' variances of Ū and Ȳ.
    const PeriodMoments m = per_period ? period_moments(input, y_mean, yd.per_period, n, h)
                                       : PeriodMoments{input.noise_bin_variance[n], output.noise_bin_variance[n]};
    r.input_noise_floor[n] = std::max(m.var_u, input_numerical_floor);
    r.output_noise_floor[n] = std::max(m.var_y, output_numerical_floor);
    const double snr = std::norm(u) / r.input_noise_floor[n];
    if (!(snr > min_ratio)) {
      r.unexcited.push_back(int(n));
      continue;
    }
    FrfHarmonic pt = frf_point(int(n), input.f0_hz, u, y, h, snr, m, per_period);
    // No estimate is more precise than the computation: noise-free (synthetic) records get
    // the numerical floor instead of a zero variance, which no weighted fit could use.
    // The rounding of both records carries into H = Y/U as well: an output at its rounding
    // level (a constant or zero output) has |H| ≈ 1e-17 with this much spread, not none.
    const double floor_re_im =
        0.5 * std::max(std::pow(kNumericalFloorRelative * pt.mag, 2),
                       (output_numerical_floor + std::norm(h) * input_numerical_floor) / std::norm(u));
    if (pt.var_re < floor_re_im || pt.var_im < floor_re_im) {
      pt.var_re = std::max(pt.var_re, floor_re_im);
      pt.var_im = std::max(pt.var_im, floor_re_im);
      pt.cov_re_im = 0;
      pt.at_numerical_floor = true;
      at_floor = true;
    }
    set_intervals(pt, r.coverage_factor);
    r.points.push_back(pt);
  }
  if (at_floor) r.flags.push_back(Flag::numerical_floor);
  if (r.points.empty())
    throw AnalysisError("FRF: no excited harmonic: no input harmonic 1…" +
                        std::to_string(input.max_harmonic) + " exceeds the input noise floor by " +
                        format_shortest(options.min_snr_db) + " dB");
  check_output_responds(r);
  return r;
}

}  // namespace periodfit::ident
