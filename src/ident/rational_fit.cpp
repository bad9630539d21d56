#include "ident/rational_fit.hpp"

#include <Eigen/Dense>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <limits>
#include <numbers>
#include <utility>

#include "core/error.hpp"
#include "ident/cost_band.hpp"
#include "core/number_format.hpp"

namespace periodfit::ident {

namespace {

using Eigen::Index;
using Eigen::MatrixXd;
using Eigen::VectorXd;
using cplx = std::complex<double>;

int parameter_count(ModelOrder o, bool delay) { return o.num + 1 + o.den + (delay ? 1 : 0); }

/// The FRF in scaled frequency x = ω/ω_ref, with the Cholesky factor of each 2×2 covariance
/// (whitening e ↦ L⁻¹e) and the scalar σ_k = sqrt(Var Re + Var Im) used by the linear starts.
struct ScaledData {
  double omega_ref = 1;
  std::vector<double> x;
  std::vector<cplx> h;
  std::vector<double> l11, l21, l22, sigma;
  std::vector<FrfPoint> points;  ///< as given (the cost band needs how each covariance was estimated)
  std::size_t size() const { return x.size(); }
};

ScaledData scale(const std::vector<FrfPoint>& points) {
  ScaledData d;
  double w_min = std::numeric_limits<double>::infinity(), w_max = 0;
  for (std::size_t k = 0; k < points.size(); ++k) {
    const FrfPoint& p = points[k];
    const std::string where = "FRF point " + std::to_string(k + 1) + " (omega = " + format_shortest(p.omega_rad_s) +
                              " rad/s)";
    if (!(std::isfinite(p.omega_rad_s) && p.omega_rad_s > 0))
      throw AnalysisError(where + ": the frequency must be finite and > 0");
    if (!(std::isfinite(p.h.real()) && std::isfinite(p.h.imag())))
      throw AnalysisError(where + ": the response is not finite");
    const double det = p.var_re * p.var_im - p.cov_re_im * p.cov_re_im;
    if (!(std::isfinite(det) && p.var_re > 0 && p.var_im > 0 && det > 0))
      throw AnalysisError(where + ": the covariance of (Re, Im) is not positive definite (var_re = " +
                          format_shortest(p.var_re) + ", var_im = " + format_shortest(p.var_im) +
                          ", cov = " + format_shortest(p.cov_re_im) + ")");
    w_min = std::min(w_min, p.omega_rad_s);
    w_max = std::max(w_max, p.omega_rad_s);
  }
  d.omega_ref = std::sqrt(w_min * w_max);
  d.points = points;
  for (const FrfPoint& p : points) {
    d.x.push_back(p.omega_rad_s / d.omega_ref);
    d.h.push_back(p.h);
    const double l11 = std::sqrt(p.var_re);
    const double l21 = p.cov_re_im / l11;
    d.l11.push_back(l11);
    d.l21.push_back(l21);
    d.l22.push_back(std::sqrt(p.var_im - l21 * l21));
    d.sigma.push_back(std::sqrt(p.var_re + p.var_im));
  }
  return d;
}

cplx polyval(const double* c, int degree, cplx s) {
  cplx v = 0;
  for (int i = degree; i >= 0; --i) v = v * s + c[i];
  return v;
}

/// Scaled parameters θ' = [b'_0…b'_M, a'_0…a'_{N−1}, (T')], a'_N = 1, T' = ω_ref·T.
struct ScaledModel {
  ModelOrder order;
  std::vector<double> b;  ///< M + 1
  std::vector<double> a;  ///< N + 1, a.back() == 1
  double delay = 0;       ///< T'
  cplx at(double x) const {
    const cplx s(0, x);
    return polyval(b.data(), order.num, s) / polyval(a.data(), order.den, s) * std::exp(-s * delay);
  }
};

/// V = Σ e_kᵀ C_k⁻¹ e_k of a model (the header's cost).
double cost_of(const ScaledData& d, const ScaledModel& m) {
  double v = 0;
  for (std::size_t k = 0; k < d.size(); ++k) {
    const cplx e = d.h[k] - m.at(d.x[k]);
    const double w1 = e.real() / d.l11[k];
    const double w2 = (e.imag() - d.l21[k] * w1) / d.l22[k];
    v += w1 * w1 + w2 * w2;
  }
  return v;
}

/// Levy (1959) / Sanathanan–Koerner (1963) linearised fit at a fixed delay T': minimises
/// Σ |B(jx) − G A(jx)|² / (σ² |A_prev(jx)|²), G = H·e^{jxT'}, A monic, by column-equilibrated
/// Householder QR with column pivoting. SK iterates keep the one with the lowest true cost V.
struct LinearStart {
  ScaledModel model;
  double cost = std::numeric_limits<double>::infinity();
  int iterations = 0;  ///< SK iterations done
  bool singular = false;
  Index rank = 0;
  Index columns = 0;
};

LinearStart linear_start(const ScaledData& d, ModelOrder order, double delay, int max_sk, double sk_tol) {
  const int M = order.num, N = order.den;
  const auto K = static_cast<Index>(d.size());
  const Index cols = M + 1 + N;
  LinearStart out;
  out.columns = cols;
  std::vector<cplx> g(d.size());
  for (std::size_t k = 0; k < d.size(); ++k) g[k] = d.h[k] * std::exp(cplx(0, d.x[k] * delay));
  std::vector<double> a_prev;  // empty = Levy (weights 1)
  VectorXd u_prev;
  for (int it = 0; it <= max_sk; ++it) {
    MatrixXd A(2 * K, cols);
    VectorXd rhs(2 * K);
    for (Index k = 0; k < K; ++k) {
      const auto uk = static_cast<std::size_t>(k);
      const cplx s(0, d.x[uk]);
      double w = 1 / d.sigma[uk];
      if (!a_prev.empty()) w /= std::abs(polyval(a_prev.data(), N, s));
      cplx p = 1;
      for (int i = 0; i <= M; ++i, p *= s) {
        A(2 * k, i) = w * p.real();
        A(2 * k + 1, i) = w * p.imag();
      }
      p = 1;
      for (int i = 0; i < N; ++i, p *= s) {
        const cplx c = -g[uk] * p;
        A(2 * k, M + 1 + i) = w * c.real();
        A(2 * k + 1, M + 1 + i) = w * c.imag();
      }
      cplx sn = 1;
      for (int i = 0; i < N; ++i) sn *= s;
      const cplx r = w * g[uk] * sn;
      rhs(2 * k) = r.real();
      rhs(2 * k + 1) = r.imag();
    }
    VectorXd norms(cols);
    for (Index j = 0; j < cols; ++j) {
      norms(j) = A.col(j).norm();
      if (norms(j) == 0) norms(j) = 1;
    }
    const MatrixXd As = A * norms.cwiseInverse().asDiagonal();
    Eigen::ColPivHouseholderQR<MatrixXd> qr(As);
    qr.setThreshold(1e-13);
    out.rank = qr.rank();
    if (qr.rank() < cols) {
      if (it == 0) out.singular = true;
      break;
    }
    const VectorXd u = qr.solve(rhs).cwiseQuotient(norms);
    if (!u.allFinite()) {
      if (it == 0) out.singular = true;
      break;
    }
    ScaledModel m;
    m.order = order;
    m.delay = delay;
    m.b.assign(u.data(), u.data() + M + 1);
    m.a.assign(u.data() + M + 1, u.data() + cols);
    m.a.push_back(1);
    const double v = cost_of(d, m);
    if (std::isfinite(v) && v < out.cost) {
      out.cost = v;
      out.model = m;
    }
    out.iterations = it;
    if (it > 0 && (u - u_prev).norm() <= sk_tol * u.norm()) break;
    u_prev = u;
    a_prev = m.a;
  }
  return out;
}


/// One root p' (scaled) of the polynomial with coefficients `c` whose free coefficients occupy
/// parameters [first, first + free) of θ'; fills value, 1σ and the derived quantities.
Root describe_root(cplx p, const std::vector<double>& c, std::size_t first, std::size_t free, const MatrixXd& cov,
                   double omega_ref) {
  Root out;
  out.value = p * omega_ref;
  out.is_real = p.imag() == 0;
  // ∂p/∂c_i = −p^i / P'(p): implicit differentiation of P(p; c) = 0 (simple root).
  cplx dp = 0, pw = 1;
  double ref = 0;
  for (std::size_t i = 1; i < c.size(); ++i, pw *= p) {
    dp += static_cast<double>(i) * c[i] * pw;
    ref += static_cast<double>(i) * std::abs(c[i]) * std::abs(pw);
  }
  const auto n = cov.rows();
  MatrixXd G = MatrixXd::Zero(2, n);
  pw = 1;
  for (std::size_t i = 0; i < free; ++i, pw *= p) {
    const cplx g = -pw / dp;
    G(0, static_cast<Index>(first + i)) = g.real();
    G(1, static_cast<Index>(first + i)) = g.imag();
  }
  const Eigen::Matrix2d c2 = G * cov * G.transpose() * (omega_ref * omega_ref);
  out.uncertainty_defined = std::abs(dp) > 1e-6 * ref && c2.allFinite();
  const double var_re = out.uncertainty_defined ? std::max(c2(0, 0), 0.0) : 0;
  const double var_im = out.uncertainty_defined ? std::max(c2(1, 1), 0.0) : 0;
  out.re_u = std::sqrt(var_re);
  out.im_u = out.is_real ? 0 : std::sqrt(var_im);
  const double sr = out.value.real(), wd = out.value.imag();
  if (out.is_real) {
    if (sr != 0) {
      out.time_constant_s = -1 / sr;
      out.time_constant_u_s = out.re_u / (sr * sr);  // |dτ/dp| = 1/p²
    }
    return out;
  }
  const double wn = std::abs(out.value);
  out.natural_frequency_rad_s = wn;
  out.damping_ratio = -sr / wn;
  // First-order propagation from (Re p, Im p) with their 2×2 covariance.
  const Eigen::Vector2d g_wn(sr / wn, wd / wn);
  const Eigen::Vector2d g_z(-wd * wd / (wn * wn * wn), sr * wd / (wn * wn * wn));
  const Eigen::Matrix2d cp = out.uncertainty_defined ? Eigen::Matrix2d(c2) : Eigen::Matrix2d::Zero();
  out.natural_frequency_u_rad_s = std::sqrt(std::max(0.0, g_wn.dot(cp * g_wn)));
  out.damping_ratio_u = std::sqrt(std::max(0.0, g_z.dot(cp * g_z)));
  if (out.damping_ratio != 0) {
    out.q_factor = 1 / (2 * out.damping_ratio);
    out.q_factor_u = out.damping_ratio_u / (2 * out.damping_ratio * out.damping_ratio);
  }
  return out;
}

/// SK iterations per delay-grid point: enough to rank the delays (the winner is refitted with
/// the full SK count), cheap enough for grids of thousands of points.
constexpr int kGridSkIterations = 2;

/// The result of a fit the data cannot determine: no model, the status and why.
RationalFitResult singular_fit(ModelOrder order, LeastSquaresStatus status, std::string message) {
  RationalFitResult r;
  r.order = order;
  r.status = status;
  r.message = std::move(message);
  return r;
}

/// The linear start of one order and the delay-grid size it searched (0 for a fixed delay).
struct DelayedStart {
  LinearStart start;
  int grid_points = 0;
};

/// The linear start at the fixed delay, or, when the delay is estimated, at the best point of a
/// grid over one turn of its ambiguity, refitted there with the full SK count.
DelayedStart delayed_start(const ScaledData& d, ModelOrder order, const RationalFitOptions& o) {
  DelayedStart out;
  LinearStart& start = out.start;
  if (!o.estimate_delay) {
    start = linear_start(d, order, o.delay_s * d.omega_ref, o.max_sk_iterations, o.sk_tolerance);
    return out;
  }
  // The delay is ambiguous modulo 2π/ω_base where ω_base is the largest frequency all ω_k are
  // multiples of; min(ω_min, smallest gap between distinct ω_k) bounds it from above, so one
  // turn of it covers every distinguishable delay (harmonics 1…n: ω_base = ω_1).
  std::vector<double> xs = d.x;
  std::sort(xs.begin(), xs.end());
  double base = xs.front();
  for (std::size_t k = 1; k < xs.size(); ++k)
    if (xs[k] - xs[k - 1] > 1e-9 * xs[k]) base = std::min(base, xs[k] - xs[k - 1]);
  const double span = 2 * std::numbers::pi / base;
  out.grid_points = o.delay_grid_points > 0
                        ? o.delay_grid_points
                        : static_cast<int>(std::clamp(std::ceil(8 * xs.back() / base), 16.0, 4000.0));
  LinearStart last;
  for (int i = 0; i < out.grid_points; ++i) {
    const double t = span * i / out.grid_points;
    last = linear_start(d, order, t, std::min(o.max_sk_iterations, kGridSkIterations), o.sk_tolerance);
    if (!last.singular && last.cost < start.cost) start = last;
  }
  if (!std::isfinite(start.cost)) {
    start = last;  // every grid point singular: report the last one's rank
    start.singular = true;
  } else {
    start = linear_start(d, order, start.model.delay, o.max_sk_iterations, o.sk_tolerance);
  }
  return out;
}

/// Weighted nonlinear least squares of the whitened residuals L_k⁻¹(H_k − Ĥ(jx_k)) in the
/// scaled parameters θ', with the analytic Jacobian.
LeastSquaresProblem ml_problem(const ScaledData& d, ModelOrder order, bool with_delay, double fixed_delay) {
  const int M = order.num, N = order.den;
  const auto n = static_cast<std::size_t>(parameter_count(order, with_delay));
  LeastSquaresProblem problem;
  problem.residual_count = 2 * d.size();
  problem.parameter_count = n;
  problem.evaluate = [&d, M, N, with_delay, fixed_delay, n](std::span<const double> th, std::span<double> r,
                                                             std::span<double> jac) {
    std::vector<double> a(th.begin() + M + 1, th.begin() + M + 1 + N);
    a.push_back(1);
    const double t = with_delay ? th[n - 1] : fixed_delay;
    std::vector<cplx> grad(n);
    for (std::size_t k = 0; k < d.size(); ++k) {
      const cplx s(0, d.x[k]);
      const cplx av = polyval(a.data(), N, s);
      const cplx e = std::exp(-s * t);
      const cplx hh = polyval(th.data(), M, s) / av * e;
      const cplx err = d.h[k] - hh;
      const double w1 = err.real() / d.l11[k];
      r[2 * k] = w1;
      r[2 * k + 1] = (err.imag() - d.l21[k] * w1) / d.l22[k];
      if (jac.empty()) continue;
      cplx p = 1;
      for (int i = 0; i <= M; ++i, p *= s) grad[static_cast<std::size_t>(i)] = p / av * e;
      p = 1;
      for (int i = 0; i < N; ++i, p *= s) grad[static_cast<std::size_t>(M + 1 + i)] = -hh * p / av;
      if (with_delay) grad[n - 1] = -s * hh;
      for (std::size_t j = 0; j < n; ++j) {
        const double d1 = -grad[j].real() / d.l11[k];
        jac[2 * k * n + j] = d1;
        jac[(2 * k + 1) * n + j] = (-grad[j].imag() - d.l21[k] * d1) / d.l22[k];
      }
    }
    return true;
  };
  return problem;
}

/// The model in SI units with its parameters' covariance and standard uncertainties, from the
/// scaled parameters θ' and their covariance: b_i = b'_i ω_ref^{N−i}, a_i = a'_i ω_ref^{N−i}
/// (dividing B'(s/ω_ref), A'(s/ω_ref) by the leading ω_ref^{−N} keeps A monic), T = T'/ω_ref.
void set_si_model(RationalFitResult& out, const std::vector<double>& th, const MatrixXd& cov, double omega_ref,
                  bool with_delay, double fixed_delay_s) {
  const int M = out.order.num, N = out.order.den;
  const std::size_t n = th.size();
  std::vector<double> factor(n);
  for (int i = 0; i <= M; ++i) factor[static_cast<std::size_t>(i)] = std::pow(omega_ref, N - i);
  for (int i = 0; i < N; ++i) factor[static_cast<std::size_t>(M + 1 + i)] = std::pow(omega_ref, N - i);
  if (with_delay) factor[n - 1] = 1 / omega_ref;
  RationalModel& model = out.model;
  for (int i = 0; i <= M; ++i) {
    model.num.push_back(th[static_cast<std::size_t>(i)] * factor[static_cast<std::size_t>(i)]);
    out.parameter_names.push_back("b" + std::to_string(i));
  }
  for (int i = 0; i < N; ++i) {
    model.den.push_back(th[static_cast<std::size_t>(M + 1 + i)] * factor[static_cast<std::size_t>(M + 1 + i)]);
    out.parameter_names.push_back("a" + std::to_string(i));
  }
  model.den.push_back(1);
  model.delay_estimated = with_delay;
  model.delay_s = with_delay ? th[n - 1] / omega_ref : fixed_delay_s;
  if (with_delay) out.parameter_names.push_back("T");
  model.covariance.assign(n, std::vector<double>(n));
  for (std::size_t i = 0; i < n; ++i) {
    for (std::size_t j = 0; j < n; ++j)
      model.covariance[i][j] = cov(static_cast<Index>(i), static_cast<Index>(j)) * factor[i] * factor[j];
    out.parameter_u.push_back(std::sqrt(std::max(0.0, model.covariance[i][i])));
  }
  out.delay_s = model.delay_s;
  out.delay_u_s = with_delay ? out.parameter_u[n - 1] : 0;
}

/// Poles, zeros and the dc gain with their uncertainties, from the scaled parameters θ'.
void set_roots_and_dc_gain(RationalFitResult& out, const std::vector<double>& th, const MatrixXd& cov,
                           double omega_ref) {
  const int M = out.order.num, N = out.order.den;
  // Roots in scaled frequency (coefficients O(1)), reported ×ω_ref.
  std::vector<double> a_s(th.begin() + M + 1, th.begin() + M + 1 + N);
  a_s.push_back(1);
  const std::vector<double> b_s(th.begin(), th.begin() + M + 1);
  for (cplx p : polynomial_roots(a_s)) out.poles.push_back(describe_root(p, a_s, static_cast<std::size_t>(M + 1), static_cast<std::size_t>(N), cov, omega_ref));
  if (M >= 1 && b_s.back() != 0)
    for (cplx z : polynomial_roots(b_s)) out.zeros.push_back(describe_root(z, b_s, 0, static_cast<std::size_t>(M + 1), cov, omega_ref));
  for (const Root& p : out.poles) out.unstable = out.unstable || p.value.real() >= 0;

  // dc gain b_0/a_0 (the ω_ref factors cancel), gradient (1/a'_0, −b'_0/a'_0²).
  const double b0 = th[0], a0 = th[static_cast<std::size_t>(M + 1)];
  out.dc_gain_defined = a0 != 0;
  if (out.dc_gain_defined) {
    out.dc_gain = b0 / a0;
    const double g0 = 1 / a0, g1 = -b0 / (a0 * a0);
    const auto ia = static_cast<Index>(M + 1);
    const double var = g0 * g0 * cov(0, 0) + 2 * g0 * g1 * cov(0, ia) + g1 * g1 * cov(ia, ia);
    out.dc_gain_u = std::sqrt(std::max(0.0, var));
  }
}

/// The full fit at one order: linear start (with the delay grid when T is free), then the
/// weighted nonlinear least squares. A fit the data cannot determine is a singular result.
RationalFitResult fit_order(const ScaledData& d, ModelOrder order, const RationalFitOptions& o) {
  const bool with_delay = o.estimate_delay;
  const auto n = static_cast<std::size_t>(parameter_count(order, with_delay));
  const std::string what = "the rational fit of order " + order_text(order) + (with_delay ? " with delay" : "");

  const DelayedStart delayed = delayed_start(d, order, o);
  const LinearStart& start = delayed.start;
  if (start.singular || !std::isfinite(start.cost))
    return singular_fit(order, LeastSquaresStatus::singular,
                        what + " is singular: the linearised start has rank " + std::to_string(start.rank) + " < " +
                            std::to_string(start.columns) + " (the data cannot determine this many coefficients; " +
                            "lower the order)");

  const LeastSquaresProblem problem = ml_problem(d, order, with_delay, o.delay_s * d.omega_ref);
  std::vector<double> theta0 = start.model.b;
  theta0.insert(theta0.end(), start.model.a.begin(), start.model.a.end() - 1);
  if (with_delay) theta0.push_back(start.model.delay);
  const LeastSquaresResult ls = solve_least_squares(problem, theta0, o.least_squares);
  if (ls.status == LeastSquaresStatus::singular || ls.status == LeastSquaresStatus::failed)
    return singular_fit(order, ls.status,
                        what + " is singular: " + ls.message + " (the data cannot determine this many parameters; " +
                            "lower the order)");

  RationalFitResult out;
  out.order = order;
  out.omega_ref_rad_s = d.omega_ref;
  out.status = ls.status;
  out.iterations = ls.iterations;
  out.sk_iterations = start.iterations;
  out.cost = ls.cost;
  out.dof = ls.dof;
  out.rank = ls.rank;
  out.condition_number = ls.condition_number;
  out.method = std::string(with_delay ? "delay-grid(" + std::to_string(delayed.grid_points) + ")+" : "") +
               "levy+sk(" + std::to_string(start.iterations) + ")+ml-lm(" + std::to_string(ls.iterations) + ")";

  // Estimated weights widen the parameters' spread beyond (JᵀŴJ)⁻¹ (ident/cost_band.hpp).
  const CovarianceInflation inflation = covariance_inflation(d.points);
  out.covariance_inflation = inflation.factor;
  out.covariance_defined = inflation.defined;
  const MatrixXd cov = inflation.factor *
      Eigen::Map<const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>>(
          ls.covariance_unscaled.data(), static_cast<Index>(n), static_cast<Index>(n));
  set_si_model(out, ls.parameters, cov, d.omega_ref, with_delay, o.delay_s);
  set_roots_and_dc_gain(out, ls.parameters, cov, d.omega_ref);

  if (out.dof > 0) {
    const CostBand band = cost_band(d.points, out.dof, o.confidence);
    out.chi2_lower = band.lower;
    out.chi2_upper = band.upper;
    out.cost_expected = band.expected;
    out.band_method = band.method;
    out.adequate = out.cost >= out.chi2_lower && out.cost <= out.chi2_upper;
  }
  for (double x : d.x) out.fitted.push_back(out.model.response(x * d.omega_ref));
  return out;
}

void require(bool ok, const char* field, const std::string& value, const char* constraint) {
  if (!ok) throw OptionError(field, value, constraint);
}

}  // namespace

std::string order_text(ModelOrder o) { return std::to_string(o.num) + "/" + std::to_string(o.den); }

ModelOrder parse_model_order(std::string_view text, std::string_view field) {
  ModelOrder o;
  const auto slash = text.find('/');
  auto parse_int = [](std::string_view s, int& v) {
    if (s.empty()) return false;
    const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), v);
    return ec == std::errc() && end == s.data() + s.size();
  };
  if (slash == std::string_view::npos || !parse_int(text.substr(0, slash), o.num) ||
      !parse_int(text.substr(slash + 1), o.den) || o.num < 0 || o.den < 1)
    throw OptionError(field, text, "must be M/N with M >= 0 and N >= 1, e.g. 1/2");
  if (static_cast<std::size_t>(o.num) > kMaxModelDegree || static_cast<std::size_t>(o.den) > kMaxModelDegree)
    throw OptionError(field, text, "degrees must be at most " + std::to_string(kMaxModelDegree) + " (ident/model.hpp)");
  return o;
}

int required_points(ModelOrder order, bool estimate_delay) {
  // 2K equations for n_θ parameters, and at least one degree of freedom: 2K ≥ n_θ + 1.
  return parameter_count(order, estimate_delay) / 2 + 1;
}

void RationalFitOptions::validate() const {
  if (!auto_order) {
    require(order.num >= 0, "order", order_text(order), "numerator degree M must be >= 0");
    require(order.den >= 1, "order", order_text(order), "denominator degree N must be >= 1");
  }
  require(auto_max_den_order >= 1 && auto_max_den_order <= 12, "auto_max_den_order",
          std::to_string(auto_max_den_order), "must be in 1…12");
  require(std::isfinite(delay_s) && delay_s >= 0, "delay_s", format_shortest(delay_s), "must be finite and >= 0");
  require(confidence > 0 && confidence < 1, "confidence", format_shortest(confidence), "must be in (0, 1)");
  require(max_sk_iterations >= 0, "max_sk_iterations", std::to_string(max_sk_iterations), "must be >= 0");
  require(sk_tolerance > 0 && std::isfinite(sk_tolerance), "sk_tolerance", format_shortest(sk_tolerance),
          "must be finite and > 0");
  require(delay_grid_points >= 0 && delay_grid_points <= 100000, "delay_grid_points",
          std::to_string(delay_grid_points), "must be in 0…100000");
  least_squares.validate();
}

namespace {

/// Auto's candidates: proper models only (M ≤ N), by increasing parameter count, then lower N.
std::vector<ModelOrder> auto_orders(int max_den) {
  std::vector<ModelOrder> orders;
  for (int den = 1; den <= max_den; ++den)
    for (int num = 0; num <= den; ++num) orders.push_back({num, den});
  std::stable_sort(orders.begin(), orders.end(), [](ModelOrder p, ModelOrder q) {
    return p.num + p.den != q.num + q.den ? p.num + p.den < q.num + q.den : p.den < q.den;
  });
  return orders;
}

/// One row of the auto-order table from the fit at that order, with K FRF points.
OrderTrial order_trial(const RationalFitResult& r, ModelOrder order, bool estimate_delay, int K) {
  OrderTrial t;
  t.order = order;
  t.parameters = parameter_count(order, estimate_delay);
  if (!r.fitted_model()) {
    t.failed = true;
    t.note = r.message;
    return t;
  }
  t.cost = r.cost;
  t.dof = r.dof;
  t.chi2_upper = r.chi2_upper;
  // On the χ² scale: estimated weights inflate the cost by cost_expected/dof, which would
  // otherwise weigh against the parameter penalty.
  const double chi2_scale = r.cost_expected > 0 ? r.dof / r.cost_expected : 1.0;
  t.aic = r.cost * chi2_scale + 2 * t.parameters;
  t.mdl = r.cost * chi2_scale + t.parameters * std::log(2.0 * K);
  t.passed = r.cost <= r.chi2_upper;
  return t;
}

/// The order auto picks: the first trial that passes the χ² test, else the lowest score of the
/// fallback criterion among those fitted; trials.size() when every fit was singular.
std::pair<std::size_t, std::string> chosen_order(const std::vector<OrderTrial>& trials,
                                                 InformationCriterion fallback) {
  for (std::size_t i = 0; i < trials.size(); ++i)
    if (trials[i].passed) return {i, "chi2"};
  const bool aic = fallback == InformationCriterion::aic;
  std::size_t best = trials.size();
  double best_score = std::numeric_limits<double>::infinity();
  for (std::size_t i = 0; i < trials.size(); ++i) {
    if (trials[i].failed) continue;
    const double score = aic ? trials[i].aic : trials[i].mdl;
    if (score < best_score) {
      best_score = score;
      best = i;
    }
  }
  return {best, aic ? "aic" : "mdl"};
}

}  // namespace

RationalFitResult fit_rational(const std::vector<FrfPoint>& points, const RationalFitOptions& options) {
  options.validate();
  const auto K = static_cast<int>(points.size());
  auto too_few = [&](ModelOrder order) {
    const int need = required_points(order, options.estimate_delay);
    return AnalysisError("a rational model of order " + order_text(order) +
                         (options.estimate_delay ? " with delay" : "") + " has " +
                         std::to_string(parameter_count(order, options.estimate_delay)) +
                         " parameters and needs at least " + std::to_string(need) +
                         " FRF points (2 equations each, one degree of freedom left for the chi-squared test); got " +
                         std::to_string(K));
  };
  if (!options.auto_order) {
    if (K < required_points(options.order, options.estimate_delay)) throw too_few(options.order);
    const ScaledData d = scale(points);
    RationalFitResult r = fit_order(d, options.order, options);
    r.order_decided_by = "requested";
    return r;
  }

  const std::vector<ModelOrder> orders = auto_orders(options.auto_max_den_order);
  if (K < required_points(orders.front(), options.estimate_delay)) throw too_few(orders.front());
  const ScaledData d = scale(points);
  std::vector<OrderTrial> trials;
  std::vector<RationalFitResult> fits;
  for (ModelOrder order : orders) {
    if (K < required_points(order, options.estimate_delay)) continue;
    fits.push_back(fit_order(d, order, options));
    trials.push_back(order_trial(fits.back(), order, options.estimate_delay, K));
    if (trials.back().passed) break;
  }
  const auto [best, decided] = chosen_order(trials, options.fallback_criterion);
  if (best == trials.size()) {
    RationalFitResult none = singular_fit(trials.front().order, LeastSquaresStatus::singular,
                                          "no model order up to " + std::to_string(options.auto_max_den_order) +
                                              " could be fitted: every fit was singular (first: " +
                                              trials.front().note + ")");
    none.order_trials = std::move(trials);
    return none;
  }
  RationalFitResult r = std::move(fits[best]);
  r.order_decided_by = decided;
  r.order_trials = std::move(trials);
  return r;
}

}  // namespace periodfit::ident
