#pragma once
/// Fitting a rational model with dead time, H(s) = B(s)/A(s)·e^{−sT}, to measured frequency-
/// response points {ω_k, H_k, Cov(Re H_k, Im H_k)}.
///
/// Noise model: each H_k carries independent (over k) Gaussian errors with the given 2×2
/// covariance C_k of (Re, Im) (frequency-domain maximum likelihood with known noise: Pintelon &
/// Schoukens, System Identification: A Frequency Domain Approach, 2nd ed., ch. 9). The cost is
///   V(θ) = Σ_k e_kᵀ C_k⁻¹ e_k,   e_k = [Re, Im](H_k − Ĥ(jω_k; θ)),
/// which at the optimum of a correct model follows χ² with dof = 2K − n_θ degrees of freedom
/// (K points, n_θ free parameters). For circular noise (C_k = σ_k²/2·I, σ_k² = E|ΔH_k|²) it is
/// V = Σ 2|H_k − Ĥ_k|²/σ_k². The model is adequate when V lies in the central `confidence` band
/// of that χ² (Boost.Math quantiles).
///
/// Method (all in scaled frequency x = ω/ω_ref, ω_ref = sqrt(ω_min·ω_max), so the monomial
/// columns stay O(1); every linear solve is a column-equilibrated Householder QR):
///  1. Levy (1959): linearised equation error Σ |B(jx) − H A(jx)|²/σ² with A monic.
///  2. Sanathanan–Koerner (1963): the same, weighted by 1/|A_prev(jx)|, iterated to a fixed point.
///  3. Weighted nonlinear least squares (the Levenberg–Marquardt engine, ident/least_squares.hpp)
///     of V(θ) with the analytic Jacobian; parameters b_0…b_M, a_0…a_{N−1} (a_N = 1) and T.
/// With `estimate_delay`, T starts from the best of a grid of delays over one turn of ω_base =
/// min(ω_min, smallest gap between the ω_k) (harmonic data cannot tell T from T + 2π/ω₀), each
/// grid point scored by an SK fit of H·e^{jωT}.
/// Covariance of θ = (JᵀJ)⁻¹ of the whitened residuals (not rescaled by V/dof), times the
/// inflation for estimated weights (ident/cost_band.hpp: m/(m − 5) for covariances from P = m + 1
/// periods; 1 for known ones), so ±1.96σ intervals cover about 95 % from P ≈ 10 on.
/// Roots are companion-matrix eigenvalues (in scaled frequency, then ×ω_ref); their 1σ come from
/// ∂p/∂a_i = −p^i/A'(p) (∂z/∂b_i = −z^i/B'(z)) applied to the covariance; time constants,
/// natural frequencies, damping ratios and Q are propagated from the roots to first order.
///
/// Covariances estimated from P periods are themselves uncertain (P − 1 degrees of freedom), which
/// raises and widens the spread of V (by 1.5× in the mean at P = 10); the adequacy band allows for
/// this when the points say how their covariances were estimated (FrfPoint::covariance_dof;
/// ident/cost_band.hpp), and so does the parameter covariance (below). Misuse warning: with
/// weights from fewer than 7 periods the parameters' covariance does not exist to first order
/// (`covariance_defined` false; identify flags it). Root uncertainties are first order and are not
/// defined at repeated roots (flagged `uncertainty_defined = false`; the _u fields are then 0
/// and meaningless). Delays beyond one period of the fundamental cannot be identified, and with
/// odd harmonics only, T and T + half a period differ only by the sign of the gain.
///
/// Usage:
///   std::vector<FrfPoint> pts = …;                        // ω in rad/s, H_k, Cov(Re, Im)
///   RationalFitOptions o; o.order = {0, 2};               // or o.auto_order = true
///   RationalFitResult fit = fit_rational(pts, o);         // throws AnalysisError if singular
///   fit.model.den; fit.poles[0].natural_frequency_rad_s; fit.adequate;
#include <complex>
#include <string>
#include <string_view>
#include <vector>

#include "ident/least_squares.hpp"
#include "ident/model.hpp"

namespace periodfit::ident {

/// One measured frequency-response point.
struct FrfPoint {
  double omega_rad_s = 0;         ///< angular frequency, > 0
  std::complex<double> h;         ///< H(jω)
  double var_re = 0;              ///< Var(Re H)
  double var_im = 0;              ///< Var(Im H)
  double cov_re_im = 0;           ///< Cov(Re H, Im H)
  /// Degrees of freedom of the covariance estimate; 0 = known exactly. Sets the law of this
  /// point's term in the cost, hence the adequacy band (ident/cost_band.hpp).
  int covariance_dof = 0;
  /// With covariance_dof = m > 0: true when the covariance is a 2×2 sample covariance of m + 1
  /// per-period deviations (divided by their count), false when it is circular, σ̂²/2·I with σ̂²
  /// on m real degrees of freedom.
  bool covariance_sampled_2x2 = false;
  /// A point with circular noise of total variance E|ΔH|² = `variance` (half in Re, half in Im).
  static FrfPoint circular(double omega_rad_s, std::complex<double> h, double variance) {
    return {omega_rad_s, h, variance / 2, variance / 2, 0};
  }
};

/// Model order M/N: numerator degree M, denominator degree N.
struct ModelOrder {
  int num = 0;  ///< M ≥ 0
  int den = 1;  ///< N ≥ 1
};

/// Parses "M/N" (e.g. "1/2"); throws OptionError naming `field` otherwise. "auto" is not an order:
/// callers check for it first.
ModelOrder parse_model_order(std::string_view text, std::string_view field = "order");

/// "M/N", the one spelling of an order in messages, reports and outputs (parse_model_order's input).
std::string order_text(ModelOrder order);

enum class InformationCriterion {
  aic,  ///< Akaike: V + 2·n_θ
  mdl,  ///< Rissanen's minimum description length: V + n_θ·ln(2K)
};

struct RationalFitOptions {
  ModelOrder order;                 ///< used when auto_order is false
  bool auto_order = false;          ///< true = search orders (see auto_max_den_order)
  int auto_max_den_order = 4;       ///< auto: try N = 1…this, M = 0…N, by increasing n_θ
  /// auto: when no tried order passes the χ² test, the order minimising this criterion wins.
  InformationCriterion fallback_criterion = InformationCriterion::mdl;
  bool estimate_delay = false;      ///< true = T is a free parameter
  double delay_s = 0;               ///< fixed T when !estimate_delay (≥ 0)
  double confidence = 0.95;         ///< χ² band for the adequacy verdict, in (0, 1)
  int max_sk_iterations = 30;       ///< Sanathanan–Koerner iterations (0 = Levy start only)
  double sk_tolerance = 1e-10;      ///< SK stop: relative change of the coefficients
  int delay_grid_points = 0;        ///< delay start grid size; 0 = 8 per turn of the top frequency (16…4000)
  LeastSquaresOptions least_squares;  ///< the final weighted nonlinear fit
  void validate() const;            ///< OptionError naming the field
};

/// A pole or zero with its uncertainty and the quantities engineers read from it.
struct Root {
  std::complex<double> value;       ///< rad/s
  double re_u = 0;                  ///< 1σ of Re
  double im_u = 0;                  ///< 1σ of Im
  bool is_real = true;              ///< Im exactly 0 (real Schur block of the companion matrix)
  bool uncertainty_defined = true;  ///< false at a (numerically) repeated root
  /// Real root p ≠ 0: time constant τ = −1/p (s; negative for an unstable root). 0 otherwise.
  double time_constant_s = 0;
  double time_constant_u_s = 0;
  /// Complex root p = σ ± jω_d (values shared by both members of the pair); 0 for real roots.
  double natural_frequency_rad_s = 0;  ///< ω_n = |p|
  double natural_frequency_u_rad_s = 0;
  double damping_ratio = 0;            ///< ζ = −σ/|p|
  double damping_ratio_u = 0;
  double q_factor = 0;                 ///< Q = 1/(2ζ)
  double q_factor_u = 0;
};

/// How one tried order scored (for auto order and for reports).
struct OrderTrial {
  ModelOrder order;
  int parameters = 0;       ///< n_θ
  double cost = 0;          ///< V at the optimum
  int dof = 0;              ///< 2K − n_θ
  double chi2_upper = 0;    ///< upper edge of the cost band for dof (see RationalFitResult)
  double aic = 0;          ///< cost·dof/cost_expected + 2·n_θ (the cost on the χ² scale)
  double mdl = 0;          ///< cost·dof/cost_expected + n_θ·ln(2K)
  bool passed = false;      ///< cost ≤ chi2_upper
  bool failed = false;      ///< the fit was singular or did not converge (cost meaningless)
  std::string note;         ///< why it failed, when it did
};

/// How a cost band was found (ident/cost_band.hpp gives the rules): χ² with known weights, a
/// scaled χ² for estimated weights, or Monte Carlo when their law has heavy tails. Declared here
/// because RationalFit carries it; the table (ident/cost_band.cpp) gives each its code, as the
/// JSON's band_method writes it ("chi2", "scaled-chi2", "monte-carlo"), and the words of the text report.
enum class CostBandMethod { chi2, scaled_chi2, monte_carlo };

/// "chi2", "scaled-chi2", "monte-carlo".
std::string_view code(CostBandMethod method);

/// For people: "chi-square", "chi-square scaled for estimated weights", "Monte Carlo, estimated weights".
std::string_view description(CostBandMethod method);

struct RationalFitResult {
  RationalModel model;                 ///< SI, ascending powers of s, den monic, covariance filled
  std::vector<std::string> parameter_names;  ///< "b0"…"bM", "a0"…"a{N-1}", "T": covariance order
  std::vector<double> parameter_u;     ///< 1σ of each parameter (sqrt of the covariance diagonal)
  std::vector<Root> poles;             ///< roots of A, sorted by |p| then Im
  std::vector<Root> zeros;             ///< roots of B
  bool dc_gain_defined = false;        ///< false when a_0 = 0 (integrator): dc gain infinite
  double dc_gain = 0;                  ///< b_0/a_0
  double dc_gain_u = 0;
  double delay_s = 0;                  ///< T (estimated or the fixed one)
  double delay_u_s = 0;                ///< 0 when T was fixed
  double cost = 0;                     ///< V at the optimum (see header)
  int dof = 0;                         ///< 2K − n_θ
  /// Central `confidence` band of the cost for a right model (ident/cost_band.hpp): χ²(dof)
  /// with known covariances, wider and higher when they were estimated from few periods.
  double chi2_lower = 0;
  double chi2_upper = 0;
  double cost_expected = 0;            ///< E[cost] for a right model (dof with known covariances)
  CostBandMethod band_method = CostBandMethod::chi2;  ///< how the band was found
  bool adequate = false;               ///< chi2_lower ≤ cost ≤ chi2_upper
  bool unstable = false;               ///< some pole has Re p ≥ 0
  /// Factor applied to (JᵀŴJ)⁻¹ for estimated weights (1 = weights known).
  double covariance_inflation = 1;
  /// false: weights from ≤ 6 periods (or ≤ 4 noise dof), whose parameter covariance has no
  /// finite second moment; the reported one then carries only the first-moment correction.
  bool covariance_defined = true;
  double condition_number = 0;         ///< of the column-scaled Jacobian at the optimum (scaled ω)
  int rank = 0;                        ///< numerical rank of that Jacobian
  double omega_ref_rad_s = 0;          ///< frequency scale used internally
  ModelOrder order;                    ///< order fitted
  std::string order_decided_by;        ///< "requested", "chi2", "aic" or "mdl"
  std::vector<OrderTrial> order_trials;  ///< auto: every order tried, in the order tried
  LeastSquaresStatus status = LeastSquaresStatus::failed;  ///< of the final nonlinear fit
  /// singular / failed: why (rank of the linear start or of the Jacobian, "lower the order");
  /// the numbers above are then meaningless. Empty otherwise.
  std::string message;
  std::string method;                  ///< e.g. "levy+sk(12)+ml-lm(7)": a description, not a decision
  int sk_iterations = 0;
  int iterations = 0;                  ///< LM iterations of the final fit
  std::vector<std::complex<double>> fitted;  ///< Ĥ(jω_k) at the input points
  /// A model came out: the fit was neither singular nor failed (it may still not have converged).
  bool fitted_model() const {
    return status != LeastSquaresStatus::singular && status != LeastSquaresStatus::failed;
  }
  /// The final nonlinear fit reached an optimum (else `status` says why not; numbers are the best found).
  bool converged() const {
    return status == LeastSquaresStatus::converged_cost || status == LeastSquaresStatus::converged_step ||
           status == LeastSquaresStatus::converged_gradient;
  }
};

/// Fits the model (see the header). A fit the data cannot determine (rank-deficient linear
/// start or Jacobian) is a result: status singular (or failed) with `message`, no model
/// (fitted_model() false). Throws AnalysisError when there are too few points for the order
/// (the message says how many are needed) or a point is invalid (ω ≤ 0, non-finite values, a
/// covariance that is not positive definite; the message names the point), and OptionError
/// for invalid options.
/// Auto order: orders are tried by increasing n_θ (then lower N), M ≤ N ≤ auto_max_den_order;
/// the first whose cost ≤ chi2_upper wins ("chi2"), else the lowest fallback criterion; when
/// every order is singular the result is singular, its message naming the first failure.
RationalFitResult fit_rational(const std::vector<FrfPoint>& points, const RationalFitOptions& options = {});

/// Minimum number of FRF points for `order` (2 real equations per point, n_θ parameters, at
/// least one degree of freedom left for the χ² verdict).
int required_points(ModelOrder order, bool estimate_delay);

}  // namespace periodfit::ident
