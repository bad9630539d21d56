#include "predict/superposition.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <limits>
#include <numbers>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "core/number_format.hpp"
#include "ident/system_expression.hpp"

namespace periodfit::predict {

namespace {

constexpr double kPi = std::numbers::pi;
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
/// A pole counts as unstable when Re p > −this × max(1, |p|max): rounding of the companion
/// eigenvalues is ~1e-15 relative, so 1e-12 only catches true imaginary-axis poles.
constexpr double kMarginalPoleRelative = 1e-12;
/// rate/f0 within this relative distance of an integer M counts as M samples per period.
constexpr double kIntegerRateRelative = 1e-9;
// Memory per predicted sample: value and uncertainty (16 B) plus its CSV line, three shortest
// round-trip doubles with separators (≤ 3·24 B); counted against core/memory_budget.hpp.
constexpr double kBytesPerPredictedSample = 16 + 72;
/// Ripple grid: at least this many points per period of the highest output harmonic.
constexpr int kDensePointsPerHighestHarmonic = 8;
constexpr int kDenseMaxPoints = 1 << 22;

std::string num(double v) { return format_shortest(v); }
/// Frequencies in messages for people: 9 significant digits hide the rounding of ω/(2π).
std::string hz(double v) { return format_significant(v, 9); }

/// One period of y at t_k = k/(M·f0): the folded inverse DFT of dsp::sample_period.
std::vector<double> folded_period(const std::vector<std::complex<double>>& y, int m) {
  return dsp::sample_period(dsp::FourierSeries{1, y}, m);
}

/// θ = 2π·frac(f0·t), reduced before multiplying by n so large t keeps its accuracy.
double angle(double f0_hz, double t_s) {
  const double c = f0_hz * t_s;
  return 2 * kPi * (c - std::floor(c));
}

/// y(θ) and its first two derivatives with respect to t.
struct Point {
  double y = 0, dy = 0, d2y = 0;
};
Point evaluate(const std::vector<std::complex<double>>& y, double omega0, double theta) {
  Point p;
  p.y = y.empty() ? 0 : y[0].real();
  for (std::size_t n = 1; n < y.size(); ++n) {
    if (y[n] == 0.0) continue;
    const double dn = static_cast<double>(n);
    const std::complex<double> z = y[n] * std::polar(1.0, dn * theta);
    p.y += z.real();
    p.dy += -dn * omega0 * z.imag();
    p.d2y += -dn * dn * omega0 * omega0 * z.real();
  }
  return p;
}

/// Per-harmonic system data: gain, where it came from, and what carries its uncertainty.
struct Term {
  int n = 0;
  std::complex<double> x, h, y;
  bool measured = false;
  std::vector<std::complex<double>> g;  ///< model: ∂Y/∂θ = X·∂H/∂θ
  double var_re = 0, var_im = 0, cov = 0;  ///< measured: covariance of (Re H, Im H)
  double x_rr = 0, x_ii = 0, x_ri = 0;     ///< input: covariance of (Re X, Im X)
};

/// ∂Q with respect to the real pairs (Re Y_n, Im Y_n), n ≥ 1 (indexed like terms), plus ∂Q/∂Y_0.
struct Sensitivity {
  double dc = 0;
  std::vector<double> re, im;
};

/// var + u² from the model parameters, gradᵀ·C·grad (grad = ∂Q/∂θ), added term by term.
double add_model_variance(double var, const std::vector<double>& grad, const std::vector<std::vector<double>>& cov) {
  for (std::size_t k = 0; k < grad.size(); ++k)
    for (std::size_t l = 0; l < grad.size(); ++l) var += grad[k] * cov[k][l] * grad[l];
  return var;
}

/// u² from a measured point's (Re H, Im H) covariance, given ∂Q/∂Re Y and ∂Q/∂Im Y.
double measured_variance(const Term& t, double q_re, double q_im) {
  // δY = X·δH: ∂Q/∂Re H, ∂Q/∂Im H from ∂Q/∂Re Y, ∂Q/∂Im Y.
  const double dr = q_re * t.x.real() + q_im * t.x.imag();
  const double di = -q_re * t.x.imag() + q_im * t.x.real();
  return dr * dr * t.var_re + di * di * t.var_im + 2 * dr * di * t.cov;
}

/// u² from the input phasor's (Re X, Im X) covariance, given ∂Q/∂Re Y and ∂Q/∂Im Y.
double input_variance(const Term& t, double q_re, double q_im) {
  // δY = H·δX: ∂Q/∂Re X, ∂Q/∂Im X (JCGM 100 §5.1.2, input and system independent).
  const double dr = q_re * t.h.real() + q_im * t.h.imag();
  const double di = -q_re * t.h.imag() + q_im * t.h.real();
  return dr * dr * t.x_rr + di * di * t.x_ii + 2 * dr * di * t.x_ri;
}

/// `dc_input_var`: u²(Y_0) from the input's dc, H(0)²·u²(X_0). O(terms·p + p²).
double propagate(const Sensitivity& s, const std::vector<Term>& terms,
                 const std::vector<std::complex<double>>& dc_g,
                 const std::vector<std::vector<double>>& cov, double dc_input_var) {
  double var = s.dc * s.dc * dc_input_var;
  const std::size_t p = cov.size();
  if (p > 0) {
    std::vector<double> grad(p, 0.0);
    for (std::size_t k = 0; k < p && k < dc_g.size(); ++k) grad[k] += s.dc * dc_g[k].real();
    for (std::size_t i = 0; i < terms.size(); ++i) {
      if (terms[i].measured) continue;
      for (std::size_t k = 0; k < p; ++k)
        grad[k] += s.re[i] * terms[i].g[k].real() + s.im[i] * terms[i].g[k].imag();
    }
    var = add_model_variance(var, grad, cov);
  }
  for (std::size_t i = 0; i < terms.size(); ++i)
    if (terms[i].measured) var += measured_variance(terms[i], s.re[i], s.im[i]);
  for (std::size_t i = 0; i < terms.size(); ++i) var += input_variance(terms[i], s.re[i], s.im[i]);
  return std::max(0.0, var);
}

/// propagate() for a quantity that depends on one output phasor Y_n only (its amplitude or
/// phase), with ∂Q/∂Re Y_n = q_re, ∂Q/∂Im Y_n = q_im: O(p²), not O(terms·p). Called once per
/// harmonic, the dense form made the harmonic table O(N²) (a square wave's automatic count,
/// ~4e5 harmonics, ran for many minutes). The skipped terms of the dense sum are exact zeros,
/// so the value is the same to the last bit.
double propagate_one(const Term& t, double q_re, double q_im, const std::vector<std::vector<double>>& cov) {
  double var = 0;
  if (!cov.empty()) {
    std::vector<double> grad(cov.size(), 0.0);
    if (!t.measured)
      for (std::size_t k = 0; k < grad.size(); ++k) grad[k] = q_re * t.g[k].real() + q_im * t.g[k].imag();
    var = add_model_variance(var, grad, cov);
  }
  if (t.measured) var += measured_variance(t, q_re, q_im);
  var += input_variance(t, q_re, q_im);
  return std::max(0.0, var);
}

/// Sensitivity of y(t) at angle θ: y = Y_0 + Σ Re Y_n cos nθ − Im Y_n sin nθ.
Sensitivity sample_sensitivity(const std::vector<Term>& terms, double theta) {
  Sensitivity s;
  s.dc = 1;
  s.re.resize(terms.size());
  s.im.resize(terms.size());
  for (std::size_t i = 0; i < terms.size(); ++i) {
    const double a = terms[i].n * theta;
    s.re[i] = std::cos(a);
    s.im[i] = -std::sin(a);
  }
  return s;
}

}  // namespace

double phase_deg(std::complex<double> z) {
  const double d = std::arg(z) * 180 / kPi;
  return d <= -180 ? d + 360 : d;
}

PredictSystem system_from_expression(std::string_view text, double delay_s, std::string source) {
  ident::SystemExpressionOptions so;
  so.source = std::move(source);
  const ident::SystemExpressionResult parsed = ident::parse_system_expression(text, so);
  PredictSystem sys;
  sys.model = model_from_coefficients(parsed.model.num, parsed.model.den, delay_s);
  return sys;
}

ident::RationalModel model_from_coefficients(std::vector<double> num_c, std::vector<double> den_c,
                                             double delay_s) {
  const auto list = [](const std::vector<double>& v) {
    std::string s;
    for (std::size_t i = 0; i < v.size(); ++i) s += (i ? "," : "") + num(v[i]);
    return s.empty() ? std::string("(empty)") : s;
  };
  if (num_c.empty()) throw OptionError("num", "(empty)", "needs at least one coefficient b0");
  if (den_c.empty()) throw OptionError("den", "(empty)", "needs at least one coefficient a0");
  for (double v : num_c)
    if (!std::isfinite(v)) throw OptionError("num", list(num_c), "coefficients must be finite");
  for (double v : den_c)
    if (!std::isfinite(v)) throw OptionError("den", list(den_c), "coefficients must be finite");
  const double lead = den_c.back();
  if (lead == 0)
    throw OptionError("den", list(den_c),
                      "the highest-power coefficient a" + std::to_string(den_c.size() - 1) +
                          " must be nonzero; drop trailing zeros to lower the order");
  if (!(std::isfinite(delay_s) && delay_s >= 0)) throw OptionError("delay_s", num(delay_s), "must be >= 0");
  for (const auto& [coefficients, field] : {std::pair{&num_c, "num"}, std::pair{&den_c, "den"}})
    if (coefficients->size() > ident::kMaxModelDegree + 1)
      throw OptionError(field, std::to_string(coefficients->size()) + " coefficients",
                        "at most " + std::to_string(ident::kMaxModelDegree + 1) + " (degree " +
                            std::to_string(ident::kMaxModelDegree) + ", the highest periodfit evaluates)");
  ident::RationalModel m;
  for (double& v : num_c) v /= lead;
  for (double& v : den_c) v /= lead;
  den_c.back() = 1;
  m.num = std::move(num_c);
  m.den = std::move(den_c);
  m.delay_s = delay_s;
  return m;
}

std::vector<std::complex<double>> model_poles(const ident::RationalModel& model) {
  return ident::polynomial_roots(model.den);
}

void PredictOptions::validate() const {
  truncation.validate();
  if (periods < 1) throw OptionError("periods", std::to_string(periods), "must be >= 1");
  if (!(std::isfinite(rate_hz) && rate_hz >= 0))
    throw OptionError("rate_hz", num(rate_hz), "must be > 0, or 0 for the default");
  if (default_samples_per_period < 2)
    throw OptionError("default_samples_per_period", std::to_string(default_samples_per_period), "must be >= 2");
  if (dense_min_points < 16 || dense_min_points > kDenseMaxPoints)
    throw OptionError("dense_min_points", std::to_string(dense_min_points),
                      "must be in [16, " + std::to_string(kDenseMaxPoints) + "]");
  if (!(frf_match_rel_tolerance > 0 && frf_match_rel_tolerance < 0.1))
    throw OptionError("frf_match_rel_tolerance", num(frf_match_rel_tolerance), "must be in (0, 0.1)");
  if (!(max_direct_terms > 0)) throw OptionError("max_direct_terms", num(max_direct_terms), "must be > 0");
}

namespace {

/// An output beyond the double range (an amplitude near 1e308 through a gain above 1, or its
/// squares in the uncertainty propagation) would print inf: it is refused instead.
void check_finite(const PredictResult& r) {
  bool ok = std::isfinite(r.dc) && std::isfinite(r.dc_u) && std::isfinite(r.rms) && std::isfinite(r.rms_u) &&
            std::isfinite(r.min) && std::isfinite(r.max) && std::isfinite(r.ripple_pp) &&
            std::isfinite(r.ripple_pp_u) && std::isfinite(r.thd) && std::isfinite(r.thd_u);
  for (const auto& h : r.harmonics_out)
    ok = ok && std::isfinite(h.amplitude) && std::isfinite(h.amplitude_u) && std::isfinite(h.phase_u_deg);
  for (double v : r.value) ok = ok && std::isfinite(v);
  for (double v : r.value_u) ok = ok && std::isfinite(v);
  if (!ok)
    throw AnalysisError("the predicted output exceeds the range of double precision numbers (about "
                        "1.8e308, squares included); give the input amplitude in a larger unit");
}

}  // namespace

namespace {

/// The model to use (null when the system has measured points only), checked for a periodic
/// steady state; `params` receives its free-parameter count when it carries a covariance.
const ident::RationalModel* checked_model(const PredictSystem& system, std::size_t& params) {
  params = 0;
  const ident::RationalModel* model = system.model && !system.model->den.empty() ? &*system.model : nullptr;
  if (!model && system.measured.empty())
    throw AnalysisError("no system to pass the input through: give a model or measured FRF points");
  if (!model) return nullptr;
  const auto poles = model_poles(*model);
  double scale = 1;
  for (const auto& q : poles) scale = std::max(scale, std::abs(q));
  for (const auto& p : poles) {
    if (p.real() > -kMarginalPoleRelative * scale)
      throw AnalysisError("the model has a pole at " + num(p.real()) + (p.imag() < 0 ? "" : "+") + num(p.imag()) +
                          "j rad/s, not in the open left half-plane: it has no periodic steady state");
  }
  if (!model->covariance.empty()) {
    params = model->parameter_count();
    bool square = model->covariance.size() == params;
    for (const auto& row : model->covariance) square = square && row.size() == params;
    if (!square)
      throw AnalysisError("the model covariance is not " + std::to_string(params) + "×" + std::to_string(params) +
                          " (one row and column per free parameter)");
  }
  return model;
}

/// Measured FRF points sorted by frequency, looked up at the harmonics.
struct MeasuredPoints {
  std::vector<ident::FrfPoint> points;
  double rel_tolerance = 0;

  /// The point within rel_tolerance·ω of ω, or null.
  const ident::FrfPoint* find(double omega) const {
    const double tol = rel_tolerance * omega;
    auto it = std::lower_bound(points.begin(), points.end(), omega - tol,
                               [](const auto& p, double w) { return p.omega_rad_s < w; });
    if (it != points.end() && std::abs(it->omega_rad_s - omega) <= tol) return &*it;
    return nullptr;
  }
  /// "N points from … Hz to … Hz", for messages.
  std::string span() const {
    return std::to_string(points.size()) + " points from " + hz(points.front().omega_rad_s / (2 * kPi)) +
           " Hz to " + hz(points.back().omega_rad_s / (2 * kPi)) + " Hz";
  }
};

/// The superposition sum: every input term with its gain and what carries its uncertainty,
/// the output phasors Y_n, and what the uncertainty propagation needs.
struct Superposition {
  double f0 = 0;
  double x0 = 0, h0 = 0;                  ///< input dc and the dc gain
  std::vector<std::complex<double>> dc_g;  ///< ∂Y_0/∂θ
  std::vector<Term> terms;                ///< n ≥ 1 where X_n ≠ 0
  std::vector<std::complex<double>> y;    ///< output phasors, indexed by harmonic number
  std::size_t params = 0;                 ///< model parameters with a covariance (0 = none)
  bool any_model = false, any_measured = false;
  bool measured_var = false, input_var = false;
  double dc_input_var = 0;                ///< H(0)²·u²(X_0)
  const std::vector<std::vector<double>>* cov = nullptr;

  double variance(const Sensitivity& s) const { return propagate(s, terms, dc_g, *cov, dc_input_var); }
};

/// One input term X_n through the system: a measured point where one serves (and is
/// preferred), else the model; refused when neither can.
Term pass_term(std::size_t n, std::complex<double> x, const ident::RationalModel* model, std::size_t params,
               const MeasuredPoints* measured, double f0) {
  Term t;
  t.n = static_cast<int>(n);
  t.x = x;
  const double omega = 2 * kPi * f0 * static_cast<double>(n);
  const ident::FrfPoint* p = measured ? measured->find(omega) : nullptr;
  if (p) {
    t.measured = true;
    t.h = p->h;
    t.var_re = p->var_re;
    t.var_im = p->var_im;
    t.cov = p->cov_re_im;
  } else if (model) {
    t.h = model->response(omega);
    if (params > 0) {
      t.g = model->response_gradient(omega);
      for (auto& g : t.g) g *= t.x;
    }
  } else {
    throw AnalysisError("the measured FRF holds no point at " + hz(f0 * static_cast<double>(n)) + " Hz (harmonic " +
                        std::to_string(n) + " of the input) and there is no model to fill it (it holds " +
                        measured->span() + "); give a model or limit the harmonic count");
  }
  return t;
}

Superposition superpose(const dsp::SeriesTruncation& input, const PredictSystem& system,
                        const PredictOptions& options, const InputUncertainty& input_u) {
  Superposition sp;
  sp.f0 = input.series.f0_hz;
  const ident::RationalModel* model = checked_model(system, sp.params);
  MeasuredPoints measured{system.measured, options.frf_match_rel_tolerance};
  std::sort(measured.points.begin(), measured.points.end(),
            [](const auto& a, const auto& b) { return a.omega_rad_s < b.omega_rad_s; });
  const bool use_measured = !measured.points.empty() && (system.prefer_measured || !model);

  // dc term: measured points have ω > 0, so a dc input needs the model.
  sp.x0 = input.series.dc();
  if (sp.x0 != 0) {
    if (!model)
      throw AnalysisError("the measured FRF holds no point at 0 Hz but the input has a dc of " + num(sp.x0) +
                          " (it holds " + measured.span() + "); give a model or remove the dc");
    sp.h0 = model->response(0).real();
    if (!std::isfinite(sp.h0))
      throw AnalysisError("the system's response is not finite at 0 Hz (its dc gain): check the model's coefficients");
    if (sp.params > 0)
      for (const auto& g : model->response_gradient(0)) sp.dc_g.push_back(g * sp.x0);
  }

  const auto& xs = input.series.phasors;
  for (std::size_t n = 1; n < xs.size(); ++n) {
    if (xs[n] == 0.0) continue;  // the series has no term here: no gain needed
    Term t = pass_term(n, xs[n], model, sp.params, use_measured ? &measured : nullptr, sp.f0);
    (t.measured ? sp.any_measured : sp.any_model) = true;
    if (n < input_u.phasor_cov.size()) {
      t.x_rr = input_u.phasor_cov[n][0];
      t.x_ii = input_u.phasor_cov[n][1];
      t.x_ri = input_u.phasor_cov[n][2];
    }
    t.y = t.h * t.x;
    if (!std::isfinite(t.y.real()) || !std::isfinite(t.y.imag()))
      throw AnalysisError("the system's response is not finite at " + hz(sp.f0 * static_cast<double>(n)) +
                          " Hz (harmonic " + std::to_string(n) + "): check the model's coefficients");
    sp.terms.push_back(std::move(t));
  }
  if (sp.x0 != 0) sp.any_model = true;
  for (const auto& t : sp.terms) sp.measured_var = sp.measured_var || (t.measured && (t.var_re > 0 || t.var_im > 0));
  sp.input_var = sp.x0 != 0 && input_u.dc_var > 0;
  for (const auto& t : sp.terms) sp.input_var = sp.input_var || t.x_rr > 0 || t.x_ii > 0;
  sp.dc_input_var = sp.x0 != 0 ? sp.h0 * sp.h0 * input_u.dc_var : 0.0;
  static const std::vector<std::vector<double>> no_cov;
  sp.cov = sp.params > 0 ? &model->covariance : &no_cov;

  sp.y.assign(xs.size(), 0.0);
  sp.y[0] = sp.h0 * sp.x0;
  for (const auto& t : sp.terms) sp.y[static_cast<std::size_t>(t.n)] = t.y;
  return sp;
}

/// Method and uncertainty sources of the result.
void describe_sources(const Superposition& sp, PredictResult& r) {
  r.method = sp.any_measured && sp.any_model ? "superposition (measured FRF + model)"
             : sp.any_measured               ? "superposition (measured FRF)"
                                             : "superposition (model)";
  r.has_uncertainty = (sp.params > 0 && sp.any_model) || sp.measured_var || sp.input_var;
  if (sp.params > 0 && sp.any_model) r.uncertainty_sources.push_back("model covariance");
  if (sp.measured_var) r.uncertainty_sources.push_back("measured FRF covariance");
  if (sp.input_var) r.uncertainty_sources.push_back("input harmonics");
}

/// The harmonic table with amplitude and phase uncertainties.
void harmonic_table(const Superposition& sp, PredictResult& r) {
  for (const Term& t : sp.terms) {
    PredictedHarmonic h;
    h.n = t.n;
    h.freq_hz = sp.f0 * t.n;
    h.input = t.x;
    h.gain = t.h;
    h.output = t.y;
    h.amplitude = std::abs(t.y);
    h.phase_deg = phase_deg(t.y);
    h.source = t.measured ? "measured" : "model";
    if (r.has_uncertainty && h.amplitude > 0) {
      // |Y|: ∂/∂(Re, Im) = (Re Y, Im Y)/|Y|;  ∠Y: (−Im Y, Re Y)/|Y|².
      h.amplitude_u = std::sqrt(propagate_one(t, t.y.real() / h.amplitude, t.y.imag() / h.amplitude, *sp.cov));
      h.phase_u_deg =
          std::sqrt(propagate_one(t, -t.y.imag() / std::norm(t.y), t.y.real() / std::norm(t.y), *sp.cov)) * 180 / kPi;
    }
    r.harmonics_out.push_back(std::move(h));
  }
}

/// dc, RMS, THD and their uncertainties.
void level_figures(const Superposition& sp, PredictResult& r) {
  const std::vector<Term>& terms = sp.terms;
  r.dc = sp.y[0].real();
  double distortion = 0;
  std::complex<double> y1 = 0;
  for (const auto& t : terms) {
    if (t.n == 1) y1 = t.y;
    else distortion += std::norm(t.y);
  }
  // Sums of squares overflow for amplitudes beyond ~1e154: RMS and THD are computed on the
  // phasors divided by the largest of them (a power of two, exact), then scaled back.
  double largest = std::abs(r.dc);
  for (const auto& t : terms) largest = std::max(largest, std::abs(t.y));
  const int unit_exp = largest > 0 && std::isfinite(largest) ? std::ilogb(largest) + 1 : 0;
  {
    double ac_s = 0, distortion_s = 0;
    for (const auto& t : terms) {
      const std::complex<double> ys{std::ldexp(t.y.real(), -unit_exp), std::ldexp(t.y.imag(), -unit_exp)};
      ac_s += std::norm(ys) / 2;
      if (t.n != 1) distortion_s += std::norm(ys);
    }
    const double dc_s = std::ldexp(r.dc, -unit_exp);
    r.rms = std::ldexp(std::sqrt(dc_s * dc_s + ac_s), unit_exp);
    r.thd_defined = std::abs(y1) > 0;
    r.thd = r.thd_defined ? std::sqrt(distortion_s) / std::ldexp(std::abs(y1), -unit_exp) : 0;
  }
  if (!r.thd_defined) {
    r.flags.push_back(Flag::no_fundamental);
  }
  if (!r.has_uncertainty) return;
  Sensitivity s;
  s.re.assign(terms.size(), 0.0);
  s.im.assign(terms.size(), 0.0);
  s.dc = 1;
  // (the dc input's part enters through dc_input_var)
  r.dc_u = std::sqrt(sp.variance(s));
  if (r.rms > 0) {
    s.dc = r.dc / r.rms;
    for (std::size_t i = 0; i < terms.size(); ++i) {
      s.re[i] = terms[i].y.real() / (2 * r.rms);
      s.im[i] = terms[i].y.imag() / (2 * r.rms);
    }
    r.rms_u = std::sqrt(sp.variance(s));
  }
  if (r.thd_defined && distortion > 0) {
    // THD = sqrt(D)/|Y1|: ∂/∂Y_n = THD·Y_n/D (n ≥ 2), ∂/∂Y_1 = −THD·Y_1/|Y_1|².
    s.dc = 0;
    for (std::size_t i = 0; i < terms.size(); ++i) {
      const double f = terms[i].n == 1 ? -r.thd / std::norm(y1) : r.thd / distortion;
      s.re[i] = f * terms[i].y.real();
      s.im[i] = f * terms[i].y.imag();
    }
    r.thd_u = std::sqrt(sp.variance(s));
  }
}

/// Extremes over one period: dense folded grid, then Newton on y'(t) = 0.
void extremes(const Superposition& sp, const PredictOptions& options, PredictResult& r) {
  const std::vector<std::complex<double>>& y = sp.y;
  std::size_t highest = 0;
  for (const auto& t : sp.terms) highest = std::max(highest, static_cast<std::size_t>(t.n));
  const int dense = static_cast<int>(std::min<std::size_t>(
      kDenseMaxPoints,
      std::max<std::size_t>(static_cast<std::size_t>(options.dense_min_points), kDensePointsPerHighestHarmonic * highest)));
  r.dense_points = dense;
  const std::vector<double> grid = folded_period(y, dense);
  const auto [lo, hi] = std::minmax_element(grid.begin(), grid.end());
  const double step = 2 * kPi / dense;
  const auto refine = [&](std::size_t k, double sign) {
    double theta = step * static_cast<double>(k);
    Point p = evaluate(y, 1.0, theta);
    for (int it = 0; it < 8; ++it) {
      if (sign * p.d2y >= 0) break;  // not a local extremum in the sense sought
      double delta = -p.dy / p.d2y;
      delta = std::clamp(delta, -step, step);
      const Point q = evaluate(y, 1.0, theta + delta);
      if (sign * q.y <= sign * p.y) break;
      theta += delta;
      p = q;
      if (std::abs(delta) < 1e-15 * 2 * kPi) break;
    }
    return std::pair{theta, p.y};
  };
  const auto [theta_max, vmax] = refine(static_cast<std::size_t>(hi - grid.begin()), 1);
  const auto [theta_min, vmin] = refine(static_cast<std::size_t>(lo - grid.begin()), -1);
  r.max = vmax;
  r.min = vmin;
  r.ripple_pp = vmax - vmin;
  if (r.has_uncertainty) {
    Sensitivity a = sample_sensitivity(sp.terms, theta_max), b = sample_sensitivity(sp.terms, theta_min);
    a.dc = 0;
    for (std::size_t i = 0; i < sp.terms.size(); ++i) a.re[i] -= b.re[i], a.im[i] -= b.im[i];
    r.ripple_pp_u = std::sqrt(sp.variance(a));
  }
}

/// Variance of the samples y_k, k < m, of one period at t_k = k/(m·f0), through the folded
/// DFT of each parameter's sensitivity (model) and term by term (measured points, input).
std::vector<double> folded_sample_variance(const Superposition& sp, std::size_t m) {
  const auto& cov = *sp.cov;
  std::vector<std::vector<double>> jac;
  for (std::size_t p = 0; p < sp.params && sp.any_model; ++p) {
    std::vector<std::complex<double>> g(sp.y.size(), 0.0);
    if (p < sp.dc_g.size()) g[0] = sp.dc_g[p];
    for (const auto& t : sp.terms)
      if (!t.measured) g[static_cast<std::size_t>(t.n)] = t.g[p];
    jac.push_back(folded_period(g, static_cast<int>(m)));
  }
  std::vector<double> var(m, sp.dc_input_var);
  for (std::size_t k = 0; k < m; ++k) {
    for (std::size_t p = 0; p < jac.size(); ++p)
      for (std::size_t q = 0; q < jac.size(); ++q) var[k] += jac[p][k] * cov[p][q] * jac[q][k];
    if (sp.measured_var) {
      for (const auto& t : sp.terms) {
        if (!t.measured) continue;
        const std::complex<double> z =
            t.x * std::polar(1.0, 2 * kPi * static_cast<double>((static_cast<std::size_t>(t.n) * k) % m) /
                                      static_cast<double>(m));
        var[k] += z.real() * z.real() * t.var_re + z.imag() * z.imag() * t.var_im - 2 * z.real() * z.imag() * t.cov;
      }
    }
    if (sp.input_var) {
      // y_k = Re(H·X·e^{jnθ_k}): ∂y/∂Re X = Re z, ∂y/∂Im X = −Im z with z = H·e^{jnθ_k}.
      for (const auto& t : sp.terms) {
        const std::complex<double> z =
            t.h * std::polar(1.0, 2 * kPi * static_cast<double>((static_cast<std::size_t>(t.n) * k) % m) /
                                      static_cast<double>(m));
        var[k] += z.real() * z.real() * t.x_rr + z.imag() * z.imag() * t.x_ii - 2 * z.real() * z.imag() * t.x_ri;
      }
    }
  }
  return var;
}

/// The samples y(k/rate) over the periods asked for, with their uncertainties: one folded
/// inverse DFT when a period holds a whole number of samples, else the direct sum.
void samples(const Superposition& sp, const PredictOptions& options, PredictResult& r) {
  const double f0 = sp.f0;
  const double rate = options.rate_hz > 0 ? options.rate_hz : options.default_samples_per_period * f0;
  r.rate_hz = rate;
  const double per_period = rate / f0;
  const double m_round = std::round(per_period);
  const bool folded = m_round >= 1 && std::abs(per_period - m_round) <= kIntegerRateRelative * per_period &&
                      m_round * options.periods <= 1e9;
  std::size_t count = 0;
  // Bounded before allocation (issue 11, class 5).
  const auto check_samples = [&](double samples) {
    if (const auto over = over_memory_budget(samples * kBytesPerPredictedSample))
      throw OptionError(options.rate_hz > 0 ? "rate_hz" : "periods",
                        options.rate_hz > 0 ? num(rate) : std::to_string(options.periods),
                        format_significant(samples, 3) + " samples need " + *over);
  };
  if (folded) {
    check_samples(m_round * options.periods);
    const auto m = static_cast<std::size_t>(m_round);
    count = m * static_cast<std::size_t>(options.periods);
    r.sampling_method = "folded-dft";
    const std::vector<double> period = folded_period(sp.y, static_cast<int>(m));
    r.value.resize(count);
    for (std::size_t k = 0; k < count; ++k) r.value[k] = period[k % m];
    if (r.has_uncertainty) {
      const std::vector<double> var = folded_sample_variance(sp, m);
      r.value_u.resize(count);
      for (std::size_t k = 0; k < count; ++k) r.value_u[k] = std::sqrt(std::max(0.0, var[k % m]));
    }
  } else {
    // Counted in double first: a rate like 1e21 Hz gives more samples than size_t holds, and
    // the cast of such a value is undefined (it gave 0, a header-only CSV; issue 11, class 7).
    const double count_d = std::ceil(options.periods * per_period - 1e-9);
    check_samples(count_d);
    if (!(count_d <= options.max_direct_terms))
      throw AnalysisError("the rate " + num(rate) + " Hz asks for " + num(count_d) + " samples over " +
                          std::to_string(options.periods) + " period(s) of " + num(f0) + " Hz, more than the " +
                          num(options.max_direct_terms) +
                          " that can be evaluated; choose a lower rate or fewer periods");
    count = static_cast<std::size_t>(count_d);
    const double work = static_cast<double>(count) * static_cast<double>(sp.terms.size() + 1) *
                        static_cast<double>(1 + (r.has_uncertainty ? sp.params + 1 : 0));
    if (work > options.max_direct_terms)
      throw AnalysisError("evaluating " + std::to_string(count) + " samples of " + std::to_string(sp.terms.size()) +
                          " harmonics directly is too slow; choose a rate that is a whole multiple of f0 (" +
                          num(f0) + " Hz) or fewer harmonics");
    r.sampling_method = "direct";
    r.value.resize(count);
    if (r.has_uncertainty) r.value_u.resize(count);
    const dsp::FourierSeries ys{f0, sp.y};
    for (std::size_t k = 0; k < count; ++k) {
      const double t = static_cast<double>(k) / rate;
      r.value[k] = ys.value(t);
      if (r.has_uncertainty) r.value_u[k] = std::sqrt(sp.variance(sample_sensitivity(sp.terms, angle(f0, t))));
    }
  }
  r.time_s.resize(count);
  for (std::size_t k = 0; k < count; ++k) r.time_s[k] = static_cast<double>(k) / rate;
}

}  // namespace

PredictResult predict_steady_state(const dsp::SeriesTruncation& input, const PredictSystem& system,
                                   const PredictOptions& options, const InputUncertainty& input_u) {
  options.validate();
  const double f0 = input.series.f0_hz;
  if (!(std::isfinite(f0) && f0 > 0)) throw OptionError("f0_hz", num(f0), "must be > 0");
  const Superposition sp = superpose(input, system, options, input_u);
  PredictResult r;
  r.f0_hz = f0;
  r.harmonics = input.harmonics;
  r.harmonic_count_method = input.method;
  r.input_left_out_fraction = input.left_out_fraction;
  r.output_tail_estimate = kNaN;
  describe_sources(sp, r);
  harmonic_table(sp, r);
  level_figures(sp, r);
  extremes(sp, options, r);
  samples(sp, options, r);
  check_finite(r);
  return r;
}

}  // namespace periodfit::predict
