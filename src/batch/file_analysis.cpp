#include "batch/file_analysis.hpp"

#include <cmath>
#include <optional>
#include <numbers>

#include "core/error.hpp"
#include "output/analysis_output.hpp"
#include "ident/frf.hpp"
#include "ident/identify.hpp"
#include "output/identify_output.hpp"
#include "io/capture_reader.hpp"
#include "core/number_format.hpp"
#include "report/result_plots.hpp"
#include "report/figures.hpp"

namespace periodfit::batch {

namespace {

// Normal 97.5 % quantile: the coverage factor for estimates with many degrees of freedom.
constexpr double kNormal95 = 1.959963984540054;

std::string sig(double v) {
  if (!std::isfinite(v)) return std::isnan(v) ? "n/a" : (v > 0 ? "inf" : "-inf");
  return format_significant(v == 0 ? 0.0 : v, 6);
}

std::string with_unit(const std::string& number, const std::string& unit) {
  return unit.empty() ? number : number + " " + unit;
}

// A value with its standard uncertainty, as the terminal prints it (issue 13: one convention,
// u labelled, GUM 7.2.6 digits); the 95 % intervals are in the limit table and summary.
std::string pm(double value, double u, const std::string& unit) {
  if (!std::isfinite(u)) return with_unit(sig(value), unit);
  return format_with_u(value, u, unit);
}

Quantity db_quantity(double mag, double lo, double hi) {
  const auto db = [](double m) {
    return m > 0 ? 20 * std::log10(m) : -std::numeric_limits<double>::infinity();
  };
  return {db(mag), db(lo), db(hi)};
}

void add_key(FileAnalysis& a, std::string name, std::string label, double value,
             const std::string& unit) {
  const bool ok = std::isfinite(value);
  a.keys.push_back({std::move(name), std::move(label), ok ? format_shortest(value) : "",
                    ok ? with_unit(sig(value), unit) : ""});
}

void add_key_text(FileAnalysis& a, std::string name, std::string label, std::string text) {
  a.keys.push_back({std::move(name), std::move(label), text, text});
}

// A yes/no key: `true`/`false` for machines, yes/no for people; nullopt = `none_text` for
// people and an empty cell for machines.
void add_key_bool(FileAnalysis& a, std::string name, std::string label, std::optional<bool> value,
                  const std::string& none_text) {
  a.keys.push_back({std::move(name), std::move(label),
                    value ? (*value ? "true" : "false") : "",
                    value ? (*value ? "yes" : "no") : none_text});
}

// H and 95 % intervals of |H| and ∠H from a fitted model at f, u by first-order propagation of
// the parameter covariance: var|H| = gᵀCg with g_i = Re(H̄·∂H/∂θ_i)/|H|, var∠H = hᵀCh with
// h_i = Im(H̄·∂H/∂θ_i)/|H|² (the linearisation of |H| and arg H; GUM, JCGM 100 §5.1.2).
struct ModelPoint {
  std::complex<double> h;
  double mag_u = std::nan("");
  double phase_u_rad = std::nan("");
};

ModelPoint model_point(const ident::RationalModel& model, double f_hz) {
  const double w = 2 * std::numbers::pi * f_hz;
  ModelPoint p;
  p.h = model.response(w);
  const auto& c = model.covariance;
  const std::size_t n = model.parameter_count();
  if (c.size() != n || std::abs(p.h) == 0) return p;
  const auto grad = model.response_gradient(w);
  if (grad.size() != n) return p;
  const double mag = std::abs(p.h);
  std::vector<double> g(n), h(n);
  for (std::size_t i = 0; i < n; ++i) {
    const std::complex<double> t = std::conj(p.h) * grad[i];
    g[i] = t.real() / mag;
    h[i] = t.imag() / (mag * mag);
  }
  double vm = 0, vp = 0;
  for (std::size_t i = 0; i < n; ++i)
    for (std::size_t j = 0; j < n; ++j) {
      vm += g[i] * c[i][j] * g[j];
      vp += h[i] * c[i][j] * h[j];
    }
  p.mag_u = std::sqrt(std::max(vm, 0.0));
  p.phase_u_rad = std::sqrt(std::max(vp, 0.0));
  return p;
}

// The poles of the fitted model, numbered in the fit's order (a complex pair counts once): a
// real pole's time constant and corner frequency, a pair's natural frequency, damping and Q.
void measure_poles(const ident::RationalFitResult& fit, double k, MeasurementSet& m) {
  int entry = 0;
  for (const auto& pole : fit.poles) {
    if (!pole.is_real && pole.value.imag() < 0) continue;  // a pair counts once
    ++entry;
    const auto q = [&](double v, double u) {
      return pole.uncertainty_defined ? Quantity::from_u(v, u, k) : Quantity{v};
    };
    const double to_hz = 1 / (2 * std::numbers::pi);
    if (pole.is_real) {
      m.set(measurement_key("time_constant_s", {}, {}, {}, entry),
            q(pole.time_constant_s, pole.time_constant_u_s));
      m.set(measurement_key("natural_frequency_hz", {}, {}, {}, entry),
            q(std::abs(pole.value.real()) * to_hz, pole.re_u * to_hz));
    } else {
      m.set(measurement_key("natural_frequency_hz", {}, {}, {}, entry),
            q(pole.natural_frequency_rad_s * to_hz, pole.natural_frequency_u_rad_s * to_hz));
      m.set(measurement_key("damping", {}, {}, {}, entry), q(pole.damping_ratio, pole.damping_ratio_u));
      m.set(measurement_key("q_factor", {}, {}, {}, entry), q(pole.q_factor, pole.q_factor_u));
    }
  }
}

// The fitted model at every frequency a limit names (freq_hz), with first-order uncertainties.
void measure_model_at_limits(const ident::RationalFitResult& fit, const BatchConfig& config, double k,
                             MeasurementSet& m) {
  for (const auto& limit : config.limits) {
    if (!limit.freq_hz) continue;
    const ModelPoint p = model_point(fit.model, *limit.freq_hz);
    const double mag = std::abs(p.h);
    const double mu = k * p.mag_u;
    m.set(measurement_key("mag", {}, {}, limit.freq_hz), Quantity::from_u(mag, p.mag_u, k));
    Quantity db = std::isfinite(mu) ? db_quantity(mag, mag - mu, mag + mu) : Quantity{db_quantity(mag, 0, 0).value};
    if (std::isfinite(mu) && mag > 0) {
      db.u = 20 / std::numbers::ln10 * p.mag_u / mag;  // first-order dB of the linear u
      db.k = k;
    }
    m.set(measurement_key("mag_db", {}, {}, limit.freq_hz), db);
    m.set(measurement_key("phase_deg", {}, {}, limit.freq_hz),
          Quantity::from_u(std::arg(p.h) * 180 / std::numbers::pi, p.phase_u_rad * 180 / std::numbers::pi, k));
  }
}

FileAnalysis analyse_identify(const Capture& capture, const BatchConfig& config) {
  const ident::IdentifyResult r = ident::identify(capture, config.identify);
  FileAnalysis a;
  MeasurementSet& m = a.measurements;
  const double k = model_coverage_factor();

  const double f0 = r.fundamental.f0_hz;
  m.set("f0_hz", Quantity::from_u(f0, r.fundamental.f0_u_hz, kNormal95));
  const double kf = r.frf.coverage_factor;
  for (const auto& p : r.frf.points) {
    m.set(measurement_key("mag", {}, p.n), {p.mag, p.mag_lo, p.mag_hi, p.mag_u, kf});
    Quantity db = db_quantity(p.mag, p.mag_lo, p.mag_hi);
    db.u = p.mag_db_u;  // the dB interval maps the linear one; u is that of the dB value
    db.k = kf;
    m.set(measurement_key("mag_db", {}, p.n), db);
    m.set(measurement_key("phase_deg", {}, p.n),
          {p.phase_deg, p.phase_lo_deg, p.phase_hi_deg, p.phase_u_deg, kf});
  }
  if (r.linearity.status != LinearityStatus::untested) m.set("linear", Quantity::exact(r.linearity.nonlinear ? 0 : 1));

  std::string order_text;
  if (r.model) {
    const ident::RationalFitResult& fit = *r.model;
    order_text = ident::order_text(fit.order);
    if (fit.dc_gain_defined) m.set("dc_gain", Quantity::from_u(fit.dc_gain, fit.dc_gain_u, k));
    m.set("delay_s", Quantity::from_u(fit.delay_s, fit.delay_u_s, k));
    // Over the cost a right model is expected to reach (dof with known weights, more when the
    // weights were estimated from few periods), so ≈ 1 means "as good as the noise allows".
    if (fit.dof > 0 && fit.cost_expected > 0)
      m.set("model_cost_ratio", Quantity::exact(fit.cost / fit.cost_expected));
    m.set("model_adequate", Quantity::exact(fit.adequate ? 1 : 0));
    measure_poles(fit, k, m);
    measure_model_at_limits(fit, config, k, m);
  }

  add_key(a, "f0_hz", "f0", f0, "Hz");
  add_key(a, "excited", "excited", static_cast<double>(r.frf.points.size()), "");
  add_key_text(a, "order", "model", order_text);
  const auto value_of = [&](const char* key) {
    const Quantity* q = m.find(key);
    return q ? q->value : std::nan("");
  };
  add_key(a, "dc_gain", "dc gain", value_of("dc_gain"), "");
  add_key(a, "delay_s", "delay", r.model ? value_of("delay_s") : std::nan(""), "s");
  add_key(a, "cost_ratio", "cost/expected", value_of("model_cost_ratio"), "");
  // Machine columns write booleans as true/false (docs/batch-output.md); people read yes/no.
  add_key_bool(a, "adequate", "adequate",
               r.model ? std::optional<bool>(r.model->adequate) : std::nullopt, "");
  add_key_bool(a, "linear", "linear",
               r.linearity.status == LinearityStatus::untested ? std::nullopt : std::optional<bool>(!r.linearity.nonlinear),
               "untested");

  a.result_rows = output::identify_summary_rows(r, capture);

  a.flags = codes(r.flags);
  for (const auto& f : a.flags) a.messages.push_back("flag: " + f);
  a.figures = report::identify_figures(capture, r);
  a.result_json = output::identify_json(r);
  return a;
}

void measure_channel(const dsp::ChannelAnalysis& c, const std::string& channel, MeasurementSet& m) {
  const double k = ident::coverage_factor(0.95, c.noise_dof);
  const auto put = [&](const char* name, Quantity q, std::optional<int> n = {}) {
    if (std::isfinite(q.value)) m.set(measurement_key(name, channel, n), q);
  };
  m.set_channel_unit(channel, c.unit);
  put("f0_hz", Quantity::from_u(c.fundamental.f0_hz, c.fundamental.f0_u_hz, kNormal95));
  put("dc", Quantity::from_u(c.dc, c.dc_u, k));
  put("rms", Quantity{c.rms});
  put("thd", Quantity{c.distortion.thd});
  put("thd_n", Quantity{c.distortion.thd_n});
  put("sinad_db", Quantity{c.distortion.sinad_db});
  put("snr_db", Quantity{c.distortion.snr_db});
  put("enob_bits", Quantity{c.distortion.enob_bits});
  put("crest_factor", Quantity{c.crest_factor});
  for (const auto& h : c.harmonics) {
    // Amplitude: its u with the Rice interval (≥ 0, docs/methods.md) as the 95 % bounds.
    put("amplitude", Quantity{h.amplitude, h.amplitude_lo, h.amplitude_hi, h.amplitude_u, k}, h.n);
    put("phase_deg", Quantity::from_u(h.phase_deg, h.phase_u_deg, k), h.n);
  }
}

FileAnalysis analyse_channels(const Capture& capture, const BatchConfig& config) {
  dsp::AnalyzeOptions options;
  options.lock = config.analyze.lock;
  const dsp::AnalyzeReport report = dsp::analyze_capture(capture, config.analyze.channels, options);
  FileAnalysis a;
  for (std::size_t i = 0; i < report.channels.size(); ++i) {
    const auto& c = report.channels[i];
    measure_channel(c, c.name, a.measurements);
    if (i == 0) measure_channel(c, "", a.measurements);  // limits without a channel: the first
    a.result_rows.emplace_back(c.name + ": fundamental",
                               pm(c.fundamental.f0_hz, c.fundamental.f0_u_hz, "Hz") + " (" +
                                   std::string(code(c.fundamental.method)) + "), " + sig(c.periods) + " periods");
    a.result_rows.emplace_back(c.name + ": dc, rms", pm(c.dc, c.dc_u, c.unit) + ", " + with_unit(sig(c.rms), c.unit));
    a.result_rows.emplace_back(c.name + ": distortion",
                               "THD " + sig(c.distortion.thd) + ", THD+N " + sig(c.distortion.thd_n) +
                                   ", SINAD " + sig(c.distortion.sinad_db) + " dB, SNR " +
                                   sig(c.distortion.snr_db) + " dB, ENOB " +
                                   (std::isfinite(c.distortion.enob_bits) ? sig(c.distortion.enob_bits)
                                                                          : "not reported (" + c.enob_note + ")"));
    if (!c.harmonics.empty())
      a.result_rows.emplace_back(c.name + ": fundamental line",
                                 pm(c.harmonics[0].amplitude, c.harmonics[0].amplitude_u, c.unit) + " at " +
                                     pm(c.harmonics[0].phase_deg, c.harmonics[0].phase_u_deg, "\xC2\xB0"));
    for (const auto& f : c.flags) {
      a.flags.push_back(c.name + ": " + std::string(code(f.flag)));
      a.messages.push_back(c.name + ": " + f.message);
    }
    a.figures.push_back(report::analyze_spectrum_figure(c));
    a.figures.push_back(report::analyze_waveform_figure(capture, c));
  }
  if (!report.channels.empty()) {
    const auto& c = report.channels.front();
    add_key_text(a, "channel", "channel", c.name);
    add_key(a, "f0_hz", "f0", c.fundamental.f0_hz, "Hz");
    add_key(a, "rms", "rms", c.rms, c.unit);
    add_key(a, "thd", "THD", c.distortion.thd, "");
    add_key(a, "sinad_db", "SINAD", c.distortion.sinad_db, "dB");
  }
  a.result_json = output::analyze_json(report);
  return a;
}

}  // namespace

namespace {
nlohmann::ordered_json quantity_json(const Quantity& q) {
  nlohmann::ordered_json j;
  j["value"] = q.value;
  j["lo95"] = q.has_interval() ? nlohmann::ordered_json(q.lo95) : nlohmann::ordered_json(nullptr);
  j["hi95"] = q.has_interval() ? nlohmann::ordered_json(q.hi95) : nlohmann::ordered_json(nullptr);
  j["u"] = std::isfinite(q.u) ? nlohmann::ordered_json(q.u) : nlohmann::ordered_json(nullptr);
  j["k"] = std::isfinite(q.k) ? nlohmann::ordered_json(q.k) : nlohmann::ordered_json(nullptr);
  return j;
}
}  // namespace

// An ordered_json object looks a key up by linear search on every insertion (it keeps insertion
// order in a vector), so filling one key by key is quadratic: 35 000 measurements of an
// 800-channel capture cost seconds. The keys come unique and sorted from the MeasurementSet's
// std::map, so they are appended to the underlying vector directly: linear, same order.
nlohmann::ordered_json measurements_json(const MeasurementSet& set) {
  nlohmann::ordered_json out = nlohmann::ordered_json::object();
  auto& object = out.get_ref<nlohmann::ordered_json::object_t&>();
  using Entries = nlohmann::ordered_json::object_t::Container;
  auto& entries = static_cast<Entries&>(object);
  entries.reserve(set.values().size());
  for (const auto& [key, q] : set.values()) entries.emplace_back(key, quantity_json(q));
  return out;
}

// The model covariance already allows for weights estimated from P periods
// (ident::covariance_inflation), so the normal quantile applies, not Student-t on the FRF dof.
double model_coverage_factor() { return ident::coverage_factor(0.95, 0); }

FileAnalysis analyse_file(const std::string& path, const BatchConfig& config) {
  const Capture capture = io::read_capture(path, config.read);
  FileAnalysis a;
  if (config.mode == AnalysisMode::identify)
    a = analyse_identify(capture, config);
  else
    a = analyse_channels(capture, config);
  a.metadata = capture.metadata;
  return a;
}

std::vector<std::string> analysis_key_names(const BatchConfig& config) {
  if (config.mode == AnalysisMode::identify)
    return {"f0_hz", "excited", "order", "dc_gain", "delay_s", "cost_ratio", "adequate", "linear"};
  return {"channel", "f0_hz", "rms", "thd", "sinad_db"};
}

std::vector<std::pair<std::string, std::string>> analysis_settings_rows(const BatchConfig& config) {
  std::vector<std::pair<std::string, std::string>> rows;
  const auto f0 = [&](double f0_hz, double hint, int harmonics) {
    rows.emplace_back("fundamental", f0_hz > 0 ? format_shortest(f0_hz) + " Hz (forced)"
                                     : hint > 0 ? "estimated near " + format_shortest(hint) + " Hz"
                                                : "estimated");
    rows.emplace_back("harmonics", harmonics > 0 ? std::to_string(harmonics) : "automatic");
  };
  if (config.mode == AnalysisMode::identify) {
    const auto& o = config.identify;
    rows.emplace_back("input \xE2\x86\x92 output", o.input_channel + " \xE2\x86\x92 " + (o.output_channel.empty() ? "#1" : o.output_channel));
    rows.emplace_back("model order", o.order.empty() ? "none" : o.order);
    rows.emplace_back("delay", o.estimate_delay ? "estimated" : "none");
    rows.emplace_back("min SNR", format_shortest(o.frf.min_snr_db) + " dB");
    f0(o.lock.f0_hz, o.lock.f0_hint_hz, o.lock.max_harmonic);
  } else {
    const auto& o = config.analyze;
    std::string channels;
    for (const auto& c : o.channels) channels += (channels.empty() ? "" : ", ") + c;
    rows.emplace_back("channels", channels.empty() ? "all" : channels);
    f0(o.lock.f0_hz, o.lock.f0_hint_hz, o.lock.max_harmonic);
  }
  return rows;
}

}  // namespace periodfit::batch
