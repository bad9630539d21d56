#pragma once
/// The one nonlinear least-squares engine of periodfit: Levenberg–Marquardt as a trust-region
/// method with Moré's scaling (J. J. Moré, "The Levenberg–Marquardt algorithm: implementation
/// and theory", Numerical Analysis, LNM 630, 1978 — the algorithm of MINPACK lmder). Every fit
/// in the project (rational FRF model, sine fits, …) is a client of this engine.
///
/// Model: minimise the cost C(x) = Σ_i r_i(x)² over x ∈ ℝⁿ, r ∈ ℝᵐ, m ≥ n. (No ½: for whitened
/// residuals C is the χ² statistic.)
///
/// Each step solves the damped linear problem  min ‖J p + r‖² + λ‖D p‖²  through the SVD of the
/// column-scaled Jacobian J·D⁻¹ (never the normal equations JᵀJ, which square the condition
/// number); λ ≥ 0 is chosen by Moré's rule so that ‖D p‖ equals the trust radius Δ, Δ grows or
/// shrinks with the ratio of actual to predicted reduction. D_j = max over iterations of
/// ‖J_{:,j}‖ (Moré's scaling), which makes the method invariant to the units of each parameter.
///
/// At the optimum the parameter covariance is formed from the same SVD,
///   (JᵀJ)⁻¹ = D⁻¹ V Σ⁻² Vᵀ D⁻¹   (unscaled: residuals already whitened, noise known), and
///   s²(JᵀJ)⁻¹ with s² = C/(m − n)  (scaled: noise level estimated from the residual),
/// singular values below `rank_tolerance`·σ_max are treated as zero (rank < n is reported and
/// the covariance is then the pseudo-inverse: do not trust it). condition_number is σ_max/σ_min
/// of the column-scaled Jacobian J·D⁻¹ (equilibrated, so it reflects the problem, not units).
///
/// Misuse warning: the covariance is the first-order (Jacobian) one. It is right when the
/// residuals are independent with the stated (or common) variance and the model is nearly
/// linear over ±σ of the parameters; it does not cover systematic model error.
///
/// Usage:
///   LeastSquaresProblem p{m, n, [&](std::span<const double> x, std::span<double> r,
///                                   std::span<double> jac) { …fill r, and jac if !jac.empty()…
///                                   return true; }};
///   LeastSquaresResult fit = solve_least_squares(p, {1.0, 0.5});
///   if (fit.converged()) use(fit.parameters, fit.covariance);
#include <functional>
#include <span>
#include <string>
#include <vector>

namespace periodfit::ident {

/// Residuals (and optionally the Jacobian) at `x`. `residuals` has m entries. `jacobian` is
/// either empty (not wanted this call) or has m·n entries, row-major: jacobian[i·n + j] =
/// ∂r_i/∂x_j. Return false when the model cannot be evaluated at x (the step is rejected and the
/// trust region shrinks).
using ResidualFunction =
    std::function<bool(std::span<const double> x, std::span<double> residuals, std::span<double> jacobian)>;

struct LeastSquaresProblem {
  std::size_t residual_count = 0;   ///< m
  std::size_t parameter_count = 0;  ///< n (≤ m)
  ResidualFunction evaluate;
  /// false = the callback fills the Jacobian analytically; true = it only fills residuals and
  /// the engine forms the Jacobian by central differences (slower, ~6–8 digits).
  bool numeric_jacobian = false;
};

struct LeastSquaresOptions {
  int max_iterations = 1000;           ///< steps tried (accepted + rejected); MGH09 start 1 needs ~410
  double function_tolerance = 1e-15;   ///< stop when actual and predicted relative cost reduction ≤ this
  double parameter_tolerance = 1e-15;  ///< stop when Δ ≤ this·‖D x‖ (relative step size)
  double gradient_tolerance = 1e-15;   ///< stop when max_j |cos(angle(r, J_{:,j}))| ≤ this
  double initial_trust_factor = 100;   ///< Δ₀ = factor·‖D x₀‖ (or factor when x₀ = 0), MINPACK's default
  double rank_tolerance = 1e-13;       ///< σ_i < this·σ_max counts as zero (rank and covariance)
  double numeric_step = 6e-6;          ///< central-difference step relative to max(|x_j|, 1e-3)
  void validate() const;               ///< OptionError naming the field
};

enum class LeastSquaresStatus {
  converged_cost,      ///< relative cost reduction below function_tolerance
  converged_step,      ///< trust radius below parameter_tolerance·‖D x‖
  converged_gradient,  ///< gradient orthogonal to the residual within gradient_tolerance
  max_iterations,      ///< iteration cap reached: the parameters are the best found, not an optimum
  singular,            ///< the Jacobian at the optimum has rank < n: parameters not identifiable
  failed,              ///< the model could not be evaluated at the start point (or gave non-finite values)
};

/// "converged (relative cost change)", "maximum iterations reached", … for messages.
std::string to_string(LeastSquaresStatus);

struct LeastSquaresResult {
  LeastSquaresStatus status = LeastSquaresStatus::failed;
  std::string message;               ///< one line saying why it stopped
  std::vector<double> parameters;    ///< best x found
  double cost = 0;                   ///< Σ r² at `parameters`
  double initial_cost = 0;           ///< Σ r² at x₀
  int iterations = 0;                ///< steps tried (accepted or not)
  int evaluations = 0;               ///< residual evaluations (without finite-difference ones)
  int dof = 0;                       ///< m − n
  int rank = 0;                      ///< numerical rank of the Jacobian at the optimum
  double condition_number = 0;       ///< σ_max/σ_min of J·D⁻¹ (infinite when rank < n)
  /// n×n row-major (JᵀJ)⁻¹: the covariance when residuals are whitened with known noise.
  std::vector<double> covariance_unscaled;
  /// n×n row-major s²(JᵀJ)⁻¹, s² = cost/dof: the covariance when the noise level is estimated.
  /// Empty (and standard_errors too) when dof = 0: no noise estimate exists.
  std::vector<double> covariance;
  std::vector<double> standard_errors;  ///< sqrt of the diagonal of `covariance`
  std::vector<double> residuals;        ///< r at `parameters`
  bool converged() const {
    return status == LeastSquaresStatus::converged_cost || status == LeastSquaresStatus::converged_step ||
           status == LeastSquaresStatus::converged_gradient;
  }
};

/// Minimises Σ r(x)² from `x0` (size n). Never throws for numerical trouble: the status says.
/// Throws OptionError for invalid options; asserts on size mismatches (programmer errors).
LeastSquaresResult solve_least_squares(const LeastSquaresProblem& problem, std::vector<double> x0,
                                       const LeastSquaresOptions& options = {});

}  // namespace periodfit::ident
