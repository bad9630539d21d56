#include "ident/identify.hpp"

#include <algorithm>
#include <cmath>
#include <future>
#include <numbers>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "core/number_format.hpp"

namespace periodfit::ident {

namespace {

/// Two captures count as one time base when their rates agree to this relative tolerance
/// (rates parsed from text may differ in the last digit).
constexpr double kSameRateRelative = 1e-9;

std::string list_harmonics(const std::vector<int>& n) {
  std::string s;
  for (std::size_t i = 0; i < n.size(); ++i) s += (i ? ", " : "") + std::to_string(n[i]);
  return s;
}

struct Selected {
  const Capture* capture;
  const Channel* channel;
};

/// The exponent e with max|x|·2^-e in [0.5, 1); 0 for an all-zero, non-finite or constant
/// channel (a constant one is refused by the fit with its value, which must be the file's).
int unit_exponent(const std::vector<double>& x) {
  if (x.empty() || std::all_of(x.begin(), x.end(), [&](double v) { return v == x.front(); })) return 0;
  double peak = 0;
  for (double v : x) peak = std::max(peak, std::abs(v));
  return peak > 0 && std::isfinite(peak) ? std::ilogb(peak) + 1 : 0;
}

std::vector<double> scaled_by(const std::vector<double>& x, int exponent) {
  std::vector<double> out;
  out.reserve(x.size());
  for (double v : x) out.push_back(std::ldexp(v, exponent));
  return out;
}

std::complex<double> ldexp(std::complex<double> z, int e) {
  return {std::ldexp(z.real(), e), std::ldexp(z.imag(), e)};
}

/// The FRF and linearity of channels analysed at 2^-eu and 2^-ey back in the channels' units:
/// H scales by 2^(eu−ey), its variances by the square (ldexp: exact); phases, SNRs, dB levels
/// relative to the output and degrees of freedom do not change.
void scale_back(FrfResult& frf, LinearityResult& linearity, int eu, int ey) {
  const int g = ey - eu;
  for (auto& p : frf.points) {
    p.u = ldexp(p.u, eu);
    p.y = ldexp(p.y, ey);
    p.h = ldexp(p.h, g);
    p.re = std::ldexp(p.re, g);
    p.im = std::ldexp(p.im, g);
    p.mag = std::ldexp(p.mag, g);
    p.mag_db = 20 * std::log10(p.mag);
    p.mag_u = std::ldexp(p.mag_u, g);
    p.mag_lo = std::ldexp(p.mag_lo, g);
    p.mag_hi = std::ldexp(p.mag_hi, g);
    p.var_h = std::ldexp(p.var_h, 2 * g);
    p.var_re = std::ldexp(p.var_re, 2 * g);
    p.var_im = std::ldexp(p.var_im, 2 * g);
    p.cov_re_im = std::ldexp(p.cov_re_im, 2 * g);
  }
  for (double& v : frf.input_noise_floor) v = std::ldexp(v, 2 * eu);
  for (double& v : frf.output_noise_floor) v = std::ldexp(v, 2 * ey);
  for (auto* lines : {&linearity.odd, &linearity.even})
    for (auto& line : *lines) line.amplitude = std::ldexp(line.amplitude, ey);
}

bool frf_finite(const FrfResult& frf) {
  bool ok = true;
  for (const auto& p : frf.points)
    ok = ok && std::isfinite(p.mag) && std::isfinite(p.mag_hi) && std::isfinite(p.var_h) &&
         std::isfinite(p.var_re) && std::isfinite(p.var_im) && std::isfinite(std::abs(p.u)) &&
         std::isfinite(std::abs(p.y)) && p.var_h > 0;
  return ok;
}

/// The spectra of both channels on one grid, truncated to the same harmonic count.
struct LockedPair {
  dsp::PeriodSpectra input, output;
};

/// Locks the input (dsp/period_lock.hpp): f0 and the H-harmonic least-squares fit; the same fit
/// with f0 forced on the output. Each grid is the fitted model evaluated exactly at the grid
/// times plus the band-limited interpolation of the residual (noise, harmonics above H).
/// dsp::resample_to_periods would refit every harmonic below 0.45·fs instead: exact for them
/// too, but N·fs/(2f0) work per channel, hundreds of harmonics for an oversampled capture,
/// where the interpolator is far more accurate than its 1e-3 band-edge bound anyway.
/// Fills the result's fundamental (residual back in the input's unit, 2^eu), selection and
/// samples per period.
LockedPair lock_pair(Selected in, Selected out, const std::vector<double>& u_samples,
                     const std::vector<double>& y_samples, int eu, const IdentifyOptions& options,
                     IdentifyResult& r) {
  const Capture& ci = *in.capture;
  const double fs = ci.sample_rate_hz;
  // The one lock call (dsp::lock_channel): f0, the automatic harmonic count (every harmonic up
  // to the band limit significant against its local noise) and the spectra, on the input; the
  // output is locked with f0 and H forced to the input's, on the same grid.
  dsp::LockedChannel lu;
  // The output is locked on a second thread with f0 and H of the input's first fit, as soon as
  // they are known (the lock stage is thread-safe: cached FFTW plans behind a lock); it is
  // redone only when the input's final lock moved its grid (dsp::lock_channel).
  const double y_t0 = out.capture->t0_s;
  dsp::SelectionOptions grid_only;
  grid_only.examine_band = false;
  const auto lock_output = [&y_samples, fs, y_t0, grid_only](double f0_grid, int h, int m) {
    dsp::LockOptions forced;
    forced.f0_hz = f0_grid;
    forced.max_harmonic = h;
    return dsp::lock_channel(y_samples, fs, y_t0, forced, m, grid_only).spectra;
  };
  std::future<dsp::PeriodSpectra> speculative;
  double speculative_f0 = 0;
  int speculative_h = 0;
  const auto first_grid = [&](const dsp::HarmonicFit& fit, const dsp::PeriodGrid& grid) {
    speculative_f0 = grid.f0_hz;
    speculative_h = fit.harmonics();
    speculative = std::async(std::launch::async, lock_output, grid.f0_hz, fit.harmonics(), grid.samples_per_period);
  };
  try {
    lu = dsp::lock_channel(u_samples, fs, ci.t0_s, options.lock, options.samples_per_period, {}, first_grid);
  } catch (const AnalysisError& e) {
    if (speculative.valid()) speculative.wait();
    throw AnalysisError(ci.source + ": input channel \"" + in.channel->name + "\": " + e.what());
  }
  r.fundamental = lu.fit.fundamental;
  r.selection = lu.selection;
  r.fundamental.residual_rms = std::ldexp(r.fundamental.residual_rms, eu);
  const double f0 = r.fundamental.f0_hz;
  const int nyquist_harmonics = dsp::band_limit_harmonics(fs, f0);
  const auto drain = [&speculative] {
    if (!speculative.valid()) return;
    try {
      speculative.get();
    } catch (const Error&) {
      // the output's own error is reported when it is locked for good
    }
  };
  if (!(f0 > 0) || !std::isfinite(f0)) {
    drain();
    throw AnalysisError(ci.source + ": input channel \"" + in.channel->name +
                        "\" has no periodic component");
  }
  if (nyquist_harmonics < 1) {
    drain();
    throw AnalysisError(ci.source + ": fundamental " + format_shortest(f0) +
                        " Hz is above 0.45 of the sample rate " + format_shortest(fs) + " Hz");
  }
  const int harmonics = std::min(lu.fit.harmonics(), nyquist_harmonics);
  const int m = lu.grid.samples_per_period;
  r.samples_per_period = m;
  // Both channels must share the grid exactly: the input's grid f0 (within 0.1 u of the reported
  // f0 when the final fit did not relock) and at least the harmonics reported.
  const bool reuse = speculative.valid() && speculative_f0 == lu.grid.f0_hz && speculative_h >= harmonics;
  if (!reuse) {
    drain();
    speculative = std::async(std::launch::async, lock_output, lu.grid.f0_hz, lu.fit.harmonics(), m);
  }
  LockedPair pair;
  pair.input = std::move(lu.spectra);
  dsp::truncate_spectra(pair.input, harmonics);
  try {
    pair.output = speculative.get();
    dsp::truncate_spectra(pair.output, harmonics);
  } catch (const AnalysisError& e) {
    throw AnalysisError(out.capture->source + ": output channel \"" + out.channel->name + "\": " + e.what());
  }
  return pair;
}

/// The rational model of the order asked (or auto) fitted to the FRF, with its flags and status.
void fit_model(IdentifyResult& r, const IdentifyOptions& options) {
  const std::string& source = r.input_source;
  RationalFitOptions fit = options.fit;
  fit.auto_order = options.order == "auto";
  if (!fit.auto_order) fit.order = parse_model_order(options.order, "order");
  fit.estimate_delay = options.estimate_delay;
  const ModelOrder smallest = fit.auto_order ? ModelOrder{0, 1} : fit.order;
  const int needed = required_points(smallest, fit.estimate_delay);
  const auto have = int(r.frf.points.size());
  if (have < needed) {
    std::vector<int> ns;
    for (const auto& p : r.frf.points) ns.push_back(p.n);
    throw AnalysisError(source + ": model order " + (fit.auto_order ? "auto (smallest 0/1)" : order_text(fit.order)) +
                        (fit.estimate_delay ? " with delay" : "") + " needs at least " +
                        std::to_string(needed) + " excited harmonics; the input excites " +
                        std::to_string(have) + " (n = " + list_harmonics(ns) + ")");
  }
  try {
    r.model = fit_rational(fit_points(r.frf), fit);
  } catch (const AnalysisError& e) {
    throw AnalysisError(source + ": model fit: " + e.what());
  }
  // A model the data cannot determine leaves identify nothing to report for the order asked.
  if (!r.model->fitted_model()) throw AnalysisError(source + ": model fit: " + r.model->message);
  r.model_confidence = fit.confidence;
  if (!r.model->adequate) {
    r.flags.push_back(Flag::model_inadequate);
    r.status = Status::model_inadequate;
  }
  if (r.model->unstable) r.flags.push_back(Flag::unstable_pole);
  if (!(r.model->condition_number <= kIllConditionedJacobian)) r.flags.push_back(Flag::ill_conditioned);
  if (!r.model->covariance_defined) r.flags.push_back(Flag::parameter_u_undefined);
  if (r.model->status == LeastSquaresStatus::max_iterations ||
      r.model->status == LeastSquaresStatus::failed) {
    r.flags.push_back(Flag::model_not_converged);
    r.status = Status::model_not_converged;
  }
}

IdentifyResult run(Selected in, Selected out, const IdentifyOptions& options) {
  options.validate();
  const Capture& ci = *in.capture;
  if (!(ci.sample_rate_hz > 0))
    throw AnalysisError(ci.source + ": sample rate unknown (give --rate)");
  IdentifyResult r;
  r.input_source = ci.source;
  r.output_source = out.capture->source;
  r.input_channel = in.channel->name;
  r.output_channel = out.channel->name;
  r.input_unit = in.channel->unit;
  r.output_unit = out.channel->unit;
  r.sample_rate_hz = ci.sample_rate_hz;
  r.skew_s = options.frf.skew_s;

  // Each channel is analysed in a unit where its peak is in [0.5, 1): a power of two, so the
  // scaling is exact, and sums of squares neither overflow (peaks beyond ~1e154) nor sink into
  // sub-normals (below ~1e-154), which had made f0_u 0 and shifted f0 (issue 11, class 7).
  const int eu = unit_exponent(in.channel->samples);
  const int ey = unit_exponent(out.channel->samples);
  const LockedPair spectra = lock_pair(in, out, scaled_by(in.channel->samples, -eu),
                                       scaled_by(out.channel->samples, -ey), eu, options, r);
  try {
    r.frf = compute_frf(spectra.input, spectra.output, options.frf);
  } catch (const AnalysisError& e) {
    const std::string output_name = out.capture->source == ci.source
                                        ? "\"" + out.channel->name + "\""
                                        : "\"" + out.channel->name + "\" of " + out.capture->source;
    throw AnalysisError(ci.source + ": input channel \"" + in.channel->name + "\", output channel " +
                        output_name + ": " + e.what());
  }
  r.linearity = check_linearity(r.frf, spectra.output, options.linearity);
  scale_back(r.frf, r.linearity, eu, ey);
  if (!frf_finite(r.frf))
    throw AnalysisError(ci.source + ": the frequency response between input channel \"" + in.channel->name +
                        "\" and output channel \"" + out.channel->name +
                        "\" (or its variance) exceeds the range of double precision numbers; give the "
                        "channels in units closer to each other (--scale)");
  for (const auto& f : r.frf.flags) r.flags.push_back(f);
  if (r.linearity.nonlinear) r.flags.push_back(Flag::nonlinear);
  if (r.selection.truncated_lines > 0) r.flags.push_back(Flag::harmonics_truncated);
  if (!options.order.empty()) fit_model(r, options);
  return r;
}

}  // namespace

void IdentifyOptions::validate() const {
  if (input_channel.empty()) throw OptionError("input_channel", "\"\"", "must name a channel");
  dsp::validate(lock);  // the fundamental's options are analyze's (one struct, one check)
  if (samples_per_period != 0 && samples_per_period < 2 * std::max(lock.max_harmonic, 1) + 2)
    throw OptionError("samples_per_period", std::to_string(samples_per_period),
                      "must be 0 (automatic) or >= 2·max_harmonic + 2");
  frf.validate();
  linearity.validate();
  if (!order.empty() && order != "auto") (void)parse_model_order(order, "order");
}

IdentifyResult identify(const Capture& capture, const IdentifyOptions& options) {
  options.validate();
  const std::size_t iu = capture.channel_index(options.input_channel);
  const std::size_t iy = capture.channel_index(options.output_channel.empty() ? "#1" : options.output_channel);
  if (iu == iy)
    throw AnalysisError(capture.source + ": input and output are the same channel \"" +
                        capture.channels[iu].name + "\"");
  return with_memory_step("identifying from " + capture.source,
                          [&] { return run({&capture, &capture.channels[iu]}, {&capture, &capture.channels[iy]}, options); });
}

IdentifyResult identify(const Capture& input_capture, const Capture& output_capture,
                        const IdentifyOptions& options) {
  options.validate();
  const double a = input_capture.sample_rate_hz, b = output_capture.sample_rate_hz;
  if (std::abs(a - b) > kSameRateRelative * std::max(std::abs(a), std::abs(b)))
    throw AnalysisError("input and output captures differ in sample rate: " + format_shortest(a) +
                        " Hz (" + input_capture.source + ") vs " + format_shortest(b) + " Hz (" +
                        output_capture.source + ")");
  if (input_capture.sample_count() != output_capture.sample_count())
    throw AnalysisError("input and output captures differ in length: " +
                        std::to_string(input_capture.sample_count()) + " samples (" +
                        input_capture.source + ") vs " + std::to_string(output_capture.sample_count()) +
                        " samples (" + output_capture.source + ")");
  const Channel& u = input_capture.channel(options.input_channel);
  if (options.output_channel.empty() && output_capture.channels.size() != 1)
    throw AnalysisError(output_capture.source + " has " + std::to_string(output_capture.channels.size()) +
                        " data channels: choose the DUT output with --output (a name, or #N for position N)");
  const Channel& y = output_capture.channel(options.output_channel.empty() ? "#0" : options.output_channel);
  return run({&input_capture, &u}, {&output_capture, &y}, options);
}

}  // namespace periodfit::ident
