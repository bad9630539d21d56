#include "ident/identify.hpp"

#include <algorithm>
#include <cmath>
#include <future>
#include <numbers>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "core/number_format.hpp"
#include "core/table.hpp"
#include "io/json_writer.hpp"

namespace periodfit::ident {

namespace {

/// Harmonics above this fraction of fs are not examined (the lock stage's band limit).
constexpr double kNyquistFraction = 0.45;
/// Two captures count as one time base when their rates agree to this relative tolerance
/// (rates parsed from text may differ in the last digit).
constexpr double kSameRateRelative = 1e-9;

using json = nlohmann::ordered_json;

std::string order_text(ModelOrder o) { return std::to_string(o.num) + "/" + std::to_string(o.den); }

std::string list_harmonics(const std::vector<int>& n) {
  std::string s;
  for (std::size_t i = 0; i < n.size(); ++i) s += (i ? ", " : "") + std::to_string(n[i]);
  return s;
}

std::string sig(double v, int digits = 6) { return std::isfinite(v) ? format_significant(v, digits) : "-"; }

/// How the cost band was found, for the text report (ident/cost_band.hpp).
std::string band_text(const std::string& method) {
  if (method == "chi2") return "chi-square";
  if (method == "scaled-chi2") return "chi-square scaled for estimated weights";
  if (method == "monte-carlo") return "Monte Carlo, estimated weights";
  return method;
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
  const double fs = ci.sample_rate_hz;

  // Lock (dsp/period_lock.hpp): f0 and the H-harmonic least-squares fit on the input; the same
  // fit with f0 forced on the output. Each grid is the fitted model evaluated exactly at the
  // grid times plus the band-limited interpolation of the residual (noise, harmonics above H).
  // dsp::resample_to_periods would refit every harmonic below 0.45·fs instead: exact for them
  // too, but N·fs/(2f0) work per channel, hundreds of harmonics for an oversampled capture,
  // where the interpolator is far more accurate than its 1e-3 band-edge bound anyway.
  dsp::LockOptions lock;
  lock.f0_hz = options.f0_hz;
  lock.f0_hint_hz = options.f0_hint_hz;
  lock.max_harmonic = options.max_harmonic;
  // Each channel is analysed in a unit where its peak is in [0.5, 1): a power of two, so the
  // scaling is exact, and sums of squares neither overflow (peaks beyond ~1e154) nor sink into
  // sub-normals (below ~1e-154), which had made f0_u 0 and shifted f0 (issue 11, class 7).
  const int eu = unit_exponent(in.channel->samples);
  const int ey = unit_exponent(out.channel->samples);
  const std::vector<double> u_samples = scaled_by(in.channel->samples, -eu);
  const std::vector<double> y_scaled = scaled_by(out.channel->samples, -ey);
  dsp::HarmonicFit fit_u;
  try {
    fit_u = dsp::fit_harmonics(u_samples, fs, ci.t0_s, lock);
  } catch (const AnalysisError& e) {
    throw AnalysisError(ci.source + ": input channel \"" + in.channel->name + "\": " + e.what());
  }
  r.fundamental = fit_u.fundamental;
  r.fundamental.residual_rms = std::ldexp(r.fundamental.residual_rms, eu);
  const double f0 = r.fundamental.f0_hz;
  if (!(f0 > 0) || !std::isfinite(f0))
    throw AnalysisError(ci.source + ": input channel \"" + in.channel->name +
                        "\" has no periodic component");
  const int nyquist_harmonics = int(std::floor(kNyquistFraction * fs / f0));
  if (nyquist_harmonics < 1)
    throw AnalysisError(ci.source + ": fundamental " + format_shortest(f0) +
                        " Hz is above 0.45 of the sample rate " + format_shortest(fs) + " Hz");
  const int harmonics = std::min(fit_u.harmonics(), nyquist_harmonics);
  const int m = options.samples_per_period > 0 ? options.samples_per_period
                                               : dsp::default_samples_per_period(fs, f0, harmonics);
  r.samples_per_period = m;
  dsp::LockOptions forced;
  forced.f0_hz = f0;
  forced.max_harmonic = fit_u.harmonics();
  // The fit keeps its residual; recompute it only if it did not.
  const auto lock_grid = [m](const std::vector<double>& x, const dsp::HarmonicFit& fit) {
    if (fit.residual.size() == x.size()) return dsp::resample_fitted(fit.residual, fit, m);
    return dsp::resample_fitted(dsp::fit_residual(x, fit), fit, m);
  };
  // The output's fit and both grids are independent once f0 is known: the output is locked on
  // a second thread (the lock stage is thread-safe: cached FFTW plans behind a lock).
  const std::vector<double>& y_samples = y_scaled;
  const double y_t0 = out.capture->t0_s;
  auto output_spectra = std::async(std::launch::async, [&, forced] {
    const dsp::HarmonicFit fit_y = dsp::fit_harmonics(y_samples, fs, y_t0, forced);
    return dsp::period_spectra(lock_grid(y_samples, fit_y), harmonics);
  });
  const dsp::PeriodSpectra su = dsp::period_spectra(lock_grid(u_samples, fit_u), harmonics);
  dsp::PeriodSpectra sy;
  try {
    sy = output_spectra.get();
  } catch (const AnalysisError& e) {
    throw AnalysisError(out.capture->source + ": output channel \"" + out.channel->name + "\": " + e.what());
  }
  try {
    r.frf = compute_frf(su, sy, options.frf);
  } catch (const AnalysisError& e) {
    const std::string output_name = out.capture->source == ci.source
                                        ? "\"" + out.channel->name + "\""
                                        : "\"" + out.channel->name + "\" of " + out.capture->source;
    throw AnalysisError(ci.source + ": input channel \"" + in.channel->name + "\", output channel " +
                        output_name + ": " + e.what());
  }
  r.linearity = check_linearity(r.frf, sy, options.linearity);
  scale_back(r.frf, r.linearity, eu, ey);
  if (!frf_finite(r.frf))
    throw AnalysisError(ci.source + ": the frequency response between input channel \"" + in.channel->name +
                        "\" and output channel \"" + out.channel->name +
                        "\" (or its variance) exceeds the range of double precision numbers; give the "
                        "channels in units closer to each other (--scale)");
  for (const auto& f : r.frf.flags) r.flags.push_back(f);
  if (r.linearity.nonlinear) r.flags.push_back("nonlinear");

  if (!options.order.empty()) {
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
      throw AnalysisError(ci.source + ": model order " + (fit.auto_order ? "auto (smallest 0/1)" : order_text(fit.order)) +
                          (fit.estimate_delay ? " with delay" : "") + " needs at least " +
                          std::to_string(needed) + " excited harmonics; the input excites " +
                          std::to_string(have) + " (n = " + list_harmonics(ns) + ")");
    }
    try {
      r.model = fit_rational(fit_points(r.frf), fit);
    } catch (const AnalysisError& e) {
      throw AnalysisError(ci.source + ": model fit: " + e.what());
    }
    r.model_confidence = fit.confidence;
    if (!r.model->adequate) {
      r.flags.push_back("model-inadequate");
      r.status = "model-inadequate";
    }
    if (r.model->unstable) r.flags.push_back("unstable-pole");
    if (!(r.model->condition_number <= kIllConditionedJacobian)) r.flags.push_back("ill-conditioned");
    if (!r.model->covariance_defined) r.flags.push_back("parameter-u-undefined");
    if (r.model->status == LeastSquaresStatus::max_iterations ||
        r.model->status == LeastSquaresStatus::failed) {
      r.flags.push_back("model-not-converged");
      r.status = "model-not-converged";
    }
  }
  return r;
}

json root_json(const Root& p) {
  json j;
  j["re"] = io::json_number(p.value.real());
  j["im"] = io::json_number(p.value.imag());
  j["re_u"] = io::json_number(p.re_u);
  j["im_u"] = io::json_number(p.im_u);
  j["uncertainty_defined"] = p.uncertainty_defined;
  if (p.is_real) {
    j["time_constant_s"] = io::json_number(p.time_constant_s);
    j["time_constant_u_s"] = io::json_number(p.time_constant_u_s);
  } else {
    j["natural_frequency_rad_s"] = io::json_number(p.natural_frequency_rad_s);
    j["natural_frequency_u_rad_s"] = io::json_number(p.natural_frequency_u_rad_s);
    j["damping_ratio"] = io::json_number(p.damping_ratio);
    j["damping_ratio_u"] = io::json_number(p.damping_ratio_u);
    j["q_factor"] = io::json_number(p.q_factor);
    j["q_factor_u"] = io::json_number(p.q_factor_u);
  }
  return j;
}

json line_json(const DistortionLine& l) {
  return json{{"n", l.n},
              {"freq_hz", io::json_number(l.freq_hz)},
              {"amplitude", io::json_number(l.amplitude)},
              {"level_dbc", io::json_number(l.level_dbc)},
              {"above_floor_db", io::json_number(l.above_floor_db)}};
}

json optional_number(const std::optional<double>& v) { return v ? io::json_number(*v) : json(nullptr); }

std::string h_unit(const IdentifyResult& r) {
  if (r.input_unit.empty() && r.output_unit.empty()) return "";
  return (r.output_unit.empty() ? "1" : r.output_unit) + "/" + (r.input_unit.empty() ? "1" : r.input_unit);
}

/// Value of free parameter i in covariance order [b_0…b_M, a_0…a_{N−1}, T].
double parameter_value(const RationalFitResult& f, std::size_t i) {
  const std::size_t nb = f.model.num.size(), na = f.model.den.size() - 1;
  if (i < nb) return f.model.num[i];
  if (i < nb + na) return f.model.den[i - nb];
  return f.delay_s;
}

/// A value with its standard uncertainty, labelled u, digits as GUM 7.2.6 (format_with_u).
std::string with_u(double v, double u, std::string_view unit = "") { return format_with_u(v, u, unit); }

/// The value and u cells of a table row (GUM 7.2.6 digits); "-" for both when not finite.
void add_value_u(std::vector<std::string>& row, double v, double u) {
  if (!std::isfinite(v)) {
    row.insert(row.end(), {"-", "-"});
    return;
  }
  const ValueText t = format_value_u(v, u);
  row.insert(row.end(), {t.value, t.u});
}

/// "[lo, hi]" rounded to the decimal place of u (the column header states level and k).
std::string interval_cell(double lo, double hi, double u) {
  return "[" + format_value_u(lo, u).value + ", " + format_value_u(hi, u).value + "]";
}

/// A value with its standard uncertainty, stated as everywhere else (format_with_u: GUM
/// digits, "value unit, u = u unit"); "u undefined" where first-order theory gives none.
std::string with_u(double v, double u, bool defined, const char* unit = "") {
  if (defined && std::isfinite(u)) return format_with_u(v, u, unit);
  return sig(v) + (*unit ? std::string(" ") + unit : std::string()) + ", u undefined";
}

constexpr double kRadToHz = 1 / (2 * std::numbers::pi);

struct RootCells {
  std::string kind, freq, damping, q, tau;
};

RootCells root_cells(const Root& p, const char* hz, const char* s) {
  const bool d = p.uncertainty_defined;
  RootCells c;
  if (p.is_real) {
    c.kind = p.value.real() == 0 ? "real, at s = 0" : "real";
    c.freq = with_u(std::abs(p.value.real()) * kRadToHz, p.re_u * kRadToHz, d, hz);
    c.tau = p.time_constant_s != 0 ? with_u(p.time_constant_s, p.time_constant_u_s, d, s) : "-";
    c.damping = c.q = "-";
  } else {
    c.kind = "complex pair";
    c.freq = with_u(p.natural_frequency_rad_s * kRadToHz, p.natural_frequency_u_rad_s * kRadToHz, d, hz);
    c.damping = with_u(p.damping_ratio, p.damping_ratio_u, d);
    c.q = p.damping_ratio != 0 ? with_u(p.q_factor, p.q_factor_u, d) : std::string("infinite (ζ = 0)");
    c.tau = "-";
  }
  return c;
}

}  // namespace

void IdentifyOptions::validate() const {
  if (input_channel.empty()) throw OptionError("input_channel", "\"\"", "must name a channel");
  if (!(f0_hz >= 0) || !std::isfinite(f0_hz))
    throw OptionError("f0_hz", format_shortest(f0_hz), "must be finite and >= 0 (0 = estimate)");
  if (!(f0_hint_hz >= 0) || !std::isfinite(f0_hint_hz))
    throw OptionError("f0_hint_hz", format_shortest(f0_hint_hz), "must be finite and >= 0 (0 = none)");
  if (max_harmonic < 0)
    throw OptionError("max_harmonic", std::to_string(max_harmonic), "must be >= 0 (0 = automatic)");
  if (samples_per_period != 0 && samples_per_period < 2 * std::max(max_harmonic, 1) + 2)
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

nlohmann::ordered_json identify_json(const IdentifyResult& r) {
  json j;
  j["f0_hz"] = io::json_number(r.fundamental.f0_hz);
  j["f0_u_hz"] = io::json_number(r.fundamental.f0_u_hz);
  j["f0_method"] = r.fundamental.method;
  j["status"] = r.status;
  j["input"] = json{{"source", r.input_source}, {"channel", r.input_channel}, {"unit", r.input_unit}};
  j["output"] = json{{"source", r.output_source}, {"channel", r.output_channel}, {"unit", r.output_unit}};
  j["h_unit"] = h_unit(r);
  j["sample_rate_hz"] = io::json_number(r.sample_rate_hz);
  j["periods"] = r.frf.periods;
  j["samples_per_period"] = r.samples_per_period;
  j["max_harmonic"] = r.frf.max_harmonic;
  j["skew_s"] = io::json_number(r.skew_s);
  j["frf_method"] = r.frf.method;
  j["frf_dof"] = r.frf.dof;
  j["confidence"] = io::json_number(r.frf.confidence);
  j["coverage_factor"] = io::json_number(r.frf.coverage_factor);
  j["quantile"] = r.frf.quantile;
  json frf = json::array();
  for (const auto& p : r.frf.points) {
    frf.push_back(json{{"n", p.n},
                       {"freq_hz", io::json_number(p.freq_hz)},
                       {"re", io::json_number(p.re)},
                       {"im", io::json_number(p.im)},
                       {"mag", io::json_number(p.mag)},
                       {"mag_db", io::json_number(p.mag_db)},
                       {"phase_deg", io::json_number(p.phase_deg)},
                       {"mag_u", io::json_number(p.mag_u)},
                       {"phase_u_deg", io::json_number(p.phase_u_deg)},
                       {"mag_db_u", io::json_number(p.mag_db_u)},
                       {"mag_lo", io::json_number(p.mag_lo)},
                       {"mag_hi", io::json_number(p.mag_hi)},
                       {"phase_lo_deg", io::json_number(p.phase_lo_deg)},
                       {"phase_hi_deg", io::json_number(p.phase_hi_deg)},
                       {"phase_defined", p.phase_defined},
                       {"phase_note", p.phase_defined ? json(nullptr) : json("undefined: |H| consistent with 0")},
                       {"var_re", io::json_number(p.var_re)},
                       {"var_im", io::json_number(p.var_im)},
                       {"cov_re_im", io::json_number(p.cov_re_im)},
                       {"input_snr_db", io::json_number(p.input_snr_db)}});
  }
  j["frf"] = frf;
  json lin;
  lin["status"] = r.linearity.status;
  lin["reason"] = r.linearity.reason;
  lin["nonlinear"] = r.linearity.nonlinear;
  lin["method"] = r.linearity.method;
  lin["tested"] = r.linearity.tested;
  lin["dof"] = r.linearity.dof;
  lin["threshold_db"] = io::json_number(r.linearity.threshold_db);
  lin["level_db"] = optional_number(r.linearity.level_db);
  lin["odd_level_db"] = optional_number(r.linearity.odd_level_db);
  lin["even_level_db"] = optional_number(r.linearity.even_level_db);
  lin["odd"] = json::array();
  for (const auto& l : r.linearity.odd) lin["odd"].push_back(line_json(l));
  lin["even"] = json::array();
  for (const auto& l : r.linearity.even) lin["even"].push_back(line_json(l));
  j["linearity"] = lin;
  if (r.model) {
    const RationalFitResult& f = *r.model;
    json m;
    m["order"] = order_text(f.order);
    m["order_decided_by"] = f.order_decided_by;
    m["num"] = json::array();
    for (double v : f.model.num) m["num"].push_back(io::json_number(v));
    m["den"] = json::array();
    for (double v : f.model.den) m["den"].push_back(io::json_number(v));
    m["delay_s"] = io::json_number(f.delay_s);
    m["delay_u_s"] = io::json_number(f.delay_u_s);
    m["delay_estimated"] = f.model.delay_estimated;
    m["poles"] = json::array();
    for (const auto& p : f.poles) m["poles"].push_back(root_json(p));
    m["zeros"] = json::array();
    for (const auto& z : f.zeros) m["zeros"].push_back(root_json(z));
    m["dc_gain"] = f.dc_gain_defined ? io::json_number(f.dc_gain) : json(nullptr);
    m["dc_gain_u"] = f.dc_gain_defined ? io::json_number(f.dc_gain_u) : json(nullptr);
    m["cost"] = io::json_number(f.cost);
    m["dof"] = f.dof;
    m["chi2_lower"] = io::json_number(f.chi2_lower);
    m["chi2_upper"] = io::json_number(f.chi2_upper);
    m["cost_expected"] = io::json_number(f.cost_expected);
    m["band_method"] = f.band_method;
    m["adequate"] = f.adequate;
    m["unstable"] = f.unstable;
    // The parameter covariance carries the estimated-weights inflation, so the normal quantile
    // gives the interval (ident/cost_band.hpp, covariance_inflation).
    const double k_model = coverage_factor(r.model_confidence, 0);
    m["parameters"] = json::array();
    for (std::size_t i = 0; i < f.parameter_names.size(); ++i) {
      const double value = parameter_value(f, i);
      const double u = i < f.parameter_u.size() ? f.parameter_u[i] : std::nan("");
      m["parameters"].push_back(json{{"name", f.parameter_names[i]},
                                     {"value", io::json_number(value)},
                                     {"u", io::json_number(u)},
                                     {"lo", io::json_number(value - k_model * u)},
                                     {"hi", io::json_number(value + k_model * u)}});
    }
    m["covariance"] = json::array();
    for (const auto& row : f.model.covariance) {
      json jr = json::array();
      for (double v : row) jr.push_back(io::json_number(v));
      m["covariance"].push_back(jr);
    }
    m["coverage_factor"] = io::json_number(k_model);
    m["covariance_inflation"] = io::json_number(f.covariance_inflation);
    m["condition_number"] = io::json_number(f.condition_number);
    m["method"] = f.method;
    m["fit_status"] = to_string(f.status);
    if (!f.order_trials.empty()) {
      m["order_trials"] = json::array();
      for (const auto& t : f.order_trials)
        m["order_trials"].push_back(json{{"order", order_text(t.order)},
                                         {"parameters", t.parameters},
                                         {"cost", t.failed ? json(nullptr) : io::json_number(t.cost)},
                                         {"dof", t.dof},
                                         {"chi2_upper", io::json_number(t.chi2_upper)},
                                         {"passed", t.passed},
                                         {"failed", t.failed},
                                         {"note", t.note}});
    }
    j["model"] = m;
  } else {
    j["model"] = nullptr;
  }
  j["flags"] = r.flags;
  return j;
}

std::string format_identify_report(const IdentifyResult& r) {
  std::string out;
  const std::string unit = h_unit(r);
  std::vector<std::pair<std::string, std::string>> head{
      {"input", r.input_source + " \"" + r.input_channel + "\"" + (r.input_unit.empty() ? "" : " [" + r.input_unit + "]")},
      {"output", r.output_source + " \"" + r.output_channel + "\"" + (r.output_unit.empty() ? "" : " [" + r.output_unit + "]")},
      {"f0", (r.fundamental.f0_u_hz > 0 ? with_u(r.fundamental.f0_hz, r.fundamental.f0_u_hz, "Hz")
                                         : sig(r.fundamental.f0_hz, 9) + " Hz") +
                 " (" + r.fundamental.method + ")"},
      {"grid", std::to_string(r.frf.periods) + " periods × " + std::to_string(r.samples_per_period) +
                   " samples, harmonics 1…" + std::to_string(r.frf.max_harmonic)},
      {"frf", r.frf.method + ", dof " + std::to_string(r.frf.dof) + ", " +
                  format_fixed(100 * r.frf.confidence, 0) + " % intervals with k = " +
                  format_fixed(r.frf.coverage_factor, 3) + " (" + r.frf.quantile + ")"}};
  if (r.skew_s != 0) head.push_back({"skew", format_shortest(r.skew_s) + " s (output lag removed)"});
  out += render_key_values(head);
  out += "\nfrequency response" + (unit.empty() ? std::string() : " [" + unit + "]") + "\n";
  // u(…) columns are standard uncertainties; the interval columns are the expanded intervals
  // at the level and k of the "frf" line, their level in the header.
  const std::string pct = format_fixed(100 * r.frf.confidence, 0) + " %";
  Table t({{"n"}, {"freq_Hz"}, {"|H|"}, {"u(|H|)"}, {"|H|_dB"}, {"phase_deg"}, {"u(phase)"},
           {"|H| " + pct + " interval", Table::Align::left}, {"phase " + pct + " interval", Table::Align::left},
           {"SNR_in_dB"}});
  for (const auto& p : r.frf.points) {
    std::vector<std::string> row{std::to_string(p.n), sig(p.freq_hz, 7)};
    add_value_u(row, p.mag, p.mag_u);
    row.push_back(format_fixed(p.mag_db, 3));
    add_value_u(row, p.phase_deg, p.phase_u_deg);
    row.push_back(interval_cell(p.mag_lo, p.mag_hi, p.mag_u));
    row.push_back(p.phase_defined ? interval_cell(p.phase_lo_deg, p.phase_hi_deg, p.phase_u_deg)
                                  : std::string("phase undefined (|H| consistent with 0)"));
    row.push_back(format_fixed(p.input_snr_db, 1));
    t.add_row(std::move(row));
  }
  out += t.render(2);

  out += "\nlinearity: " + r.linearity.status;
  if (r.linearity.status != "untested")
    out += " (" + std::to_string(r.linearity.tested) + " unexcited harmonics tested, threshold " +
           format_fixed(r.linearity.threshold_db, 1) + " dB above the output noise floor)";
  else if (!r.linearity.reason.empty())
    out += ": " + r.linearity.reason;
  out += "\n";
  const auto lines = [&](const char* parity, const std::vector<DistortionLine>& ls,
                         const std::optional<double>& level) {
    if (ls.empty()) return;
    std::vector<int> ns;
    for (const auto& l : ls) ns.push_back(l.n);
    out += std::string("  ") + parity + " harmonics " + list_harmonics(ns) + ": " +
           format_fixed(level.value_or(0), 1) + " dB relative to the excited output power\n";
  };
  lines("even", r.linearity.even, r.linearity.even_level_db);
  lines("odd", r.linearity.odd, r.linearity.odd_level_db);

  if (r.model) {
    const RationalFitResult& f = *r.model;
    out += "\nmodel " + order_text(f.order) + " (" + f.order_decided_by + "), " + f.method + "\n";
    Table pt({{"parameter", Table::Align::left}, {"value"}, {"u"}});
    for (std::size_t i = 0; i < f.parameter_names.size(); ++i) {
      const double value = parameter_value(f, i);
      std::vector<std::string> row{f.parameter_names[i]};
      if (i < f.parameter_u.size())
        add_value_u(row, value, f.parameter_u[i]);
      else
        row.insert(row.end(), {sig(value, 8), "-"});
      pt.add_row(std::move(row));
    }
    out += pt.render(2);
    out += "  a" + std::to_string(f.model.den.size() - 1) + " = 1 (monic); s in rad/s\n";
    out += "  dc gain   " + (f.dc_gain_defined ? with_u(f.dc_gain, f.dc_gain_u, unit) : std::string("infinite (pole at 0)")) + "\n";
    out += "  delay     " + (f.model.delay_estimated ? with_u(f.delay_s, f.delay_u_s, "s") : sig(f.delay_s) + " s (not estimated)") + "\n";
    const auto roots = [&](const char* title, const std::vector<Root>& rs) {
      if (rs.empty()) return;
      out += std::string("\n") + title + "\n" + format_roots_table(rs);
    };
    roots("poles", f.poles);
    roots("zeros", f.zeros);
    out += "\ncost " + sig(f.cost) + ", dof " + std::to_string(f.dof) + ", " +
           format_fixed(100 * r.model_confidence, 0) + " % band [" + sig(f.chi2_lower) + ", " +
           sig(f.chi2_upper) + "] (" + band_text(f.band_method) + ", expected " + sig(f.cost_expected) +
           "): " + (f.adequate ? "adequate" : "NOT adequate") + "\n";
  }
  std::string flags;
  for (std::size_t i = 0; i < r.flags.size(); ++i) flags += (i ? ", " : "") + r.flags[i];
  out += "\nflags: " + (flags.empty() ? std::string("none") : flags);
  out += "\n";
  return out;
}

std::string format_roots_table(const std::vector<Root>& roots) {
  Table t({{"root", Table::Align::left},
           {"freq_Hz", Table::Align::left},
           {"damping_ratio", Table::Align::left},
           {"Q", Table::Align::left},
           {"time_constant_s", Table::Align::left}});
  for (const Root& p : roots) {
    if (!p.is_real && p.value.imag() < 0) continue;  // a conjugate pair is one row
    const RootCells c = root_cells(p, "", "");
    t.add_row({c.kind, c.freq, c.damping, c.q, c.tau});
  }
  return t.render(2);
}

std::string root_summary(const Root& root) {
  const RootCells c = root_cells(root, "Hz", "s");
  if (root.is_real)
    return c.kind + ": corner frequency " + c.freq + (c.tau == "-" ? std::string() : ", time constant " + c.tau);
  return c.kind + ": natural frequency " + c.freq + ", damping ratio " + c.damping + ", Q " + c.q;
}

}  // namespace periodfit::ident
