#include "ident/least_squares.hpp"

#include <Eigen/Dense>

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>

#include "core/error.hpp"
#include "core/number_format.hpp"

namespace periodfit::ident {

namespace {

using Eigen::Index;
using Eigen::MatrixXd;
using Eigen::VectorXd;
using RowMatrix = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;

constexpr double kEps = std::numeric_limits<double>::epsilon();

void require(bool ok, const char* field, double value, const char* constraint) {
  if (!ok) throw OptionError(field, format_shortest(value), constraint);
}

/// Residual and Jacobian evaluation, analytic or by central differences, with finiteness checks.
class Evaluator {
 public:
  Evaluator(const LeastSquaresProblem& problem, const LeastSquaresOptions& options)
      : problem_(problem), options_(options),
        m_(static_cast<Index>(problem.residual_count)), n_(static_cast<Index>(problem.parameter_count)) {}

  bool residuals(const VectorXd& x, VectorXd& r) {
    ++evaluations;
    return raw_residuals(x, r);
  }

  bool jacobian(const VectorXd& x, MatrixXd& jac) {
    if (!problem_.numeric_jacobian) {
      RowMatrix j_row(m_, n_);
      VectorXd r(m_);
      const bool ok = problem_.evaluate(std::span<const double>(x.data(), static_cast<std::size_t>(n_)),
                                        std::span<double>(r.data(), static_cast<std::size_t>(m_)),
                                        std::span<double>(j_row.data(), static_cast<std::size_t>(m_ * n_)));
      if (!ok || !j_row.allFinite()) return false;
      jac = j_row;
      return true;
    }
    // Central differences: truncation error O(h²), rounding O(ε/h); h ≈ ε^{1/3}·scale balances them.
    jac.resize(m_, n_);
    VectorXd xp = x, rp(m_), rm(m_);
    for (Index j = 0; j < n_; ++j) {
      const double h = options_.numeric_step * std::max(std::abs(x(j)), 1e-3);
      xp(j) = x(j) + h;
      const double hp = xp(j) - x(j);  // the step actually representable
      if (!raw_residuals(xp, rp)) return false;
      xp(j) = x(j) - h;
      const double hm = x(j) - xp(j);
      if (!raw_residuals(xp, rm)) return false;
      xp(j) = x(j);
      jac.col(j) = (rp - rm) / (hp + hm);
    }
    return true;
  }

  int evaluations = 0;

 private:
  bool raw_residuals(const VectorXd& x, VectorXd& r) {
    r.resize(m_);
    const bool ok = problem_.evaluate(std::span<const double>(x.data(), static_cast<std::size_t>(n_)),
                                      std::span<double>(r.data(), static_cast<std::size_t>(m_)), {});
    return ok && r.allFinite();
  }

  const LeastSquaresProblem& problem_;
  const LeastSquaresOptions& options_;
  Index m_;
  Index n_;
};

/// Solution of min ‖Js z + r‖² + λ‖z‖² in the SVD basis of the column-scaled Jacobian
/// Js = U S Vᵀ: z = −V diag(s/(s² + λ)) Uᵀr over the numerical rank.
struct ScaledStep {
  VectorXd z;          ///< step in scaled variables (D p)
  double lambda = 0;   ///< Levenberg–Marquardt parameter
  double norm = 0;     ///< ‖z‖ = ‖D p‖
  double jz_norm = 0;  ///< ‖Js z‖ = ‖S Vᵀ z‖
};

class TrustRegionSolver {
 public:
  TrustRegionSolver(const MatrixXd& js, const VectorXd& r, double rank_tolerance)
      : svd_(js, Eigen::ComputeThinU | Eigen::ComputeThinV) {
    s_ = svd_.singularValues();
    b_ = svd_.matrixU().transpose() * r;
    const double s_max = s_.size() > 0 ? s_(0) : 0;
    rank_ = 0;
    for (Index i = 0; i < s_.size(); ++i)
      if (s_(i) > rank_tolerance * s_max && s_(i) > 0) ++rank_;
  }

  /// Moré (1978) §5: λ = 0 when the Gauss–Newton step fits in the trust region (within 10 %);
  /// otherwise Newton's method on 1/‖z(λ)‖ − 1/Δ, which is concave and increasing in λ, so
  /// iterates from λ = 0 rise monotonically to the root.
  ScaledStep step(double delta) const {
    ScaledStep out;
    double lambda = 0;
    double psi = norm_at(0);
    if (psi > 1.1 * delta) {
      for (int it = 0; it < 50; ++it) {
        double d = 0;
        for (Index i = 0; i < rank_; ++i) {
          const double q = s_(i) * s_(i) + lambda;
          d += s_(i) * s_(i) * b_(i) * b_(i) / (q * q * q);
        }
        if (d <= 0) break;
        lambda += (psi - delta) / delta * psi * psi / d;
        psi = norm_at(lambda);
        if (std::abs(psi - delta) <= 0.1 * delta) break;
      }
    }
    VectorXd c = VectorXd::Zero(s_.size());
    double jz2 = 0;
    for (Index i = 0; i < rank_; ++i) {
      c(i) = -s_(i) * b_(i) / (s_(i) * s_(i) + lambda);
      jz2 += (s_(i) * c(i)) * (s_(i) * c(i));
    }
    out.z = svd_.matrixV() * c;
    out.lambda = lambda;
    out.norm = c.norm();
    out.jz_norm = std::sqrt(jz2);
    return out;
  }

 private:
  double norm_at(double lambda) const {
    double sum = 0;
    for (Index i = 0; i < rank_; ++i) {
      const double zi = s_(i) * b_(i) / (s_(i) * s_(i) + lambda);
      sum += zi * zi;
    }
    return std::sqrt(sum);
  }

  Eigen::JacobiSVD<MatrixXd> svd_;
  VectorXd s_;
  VectorXd b_;
  Index rank_ = 0;
};

VectorXd column_norms(const MatrixXd& jac) {
  VectorXd n(jac.cols());
  for (Index j = 0; j < jac.cols(); ++j) n(j) = jac.col(j).norm();
  return n;
}

/// Covariance, rank and condition from the SVD of the equilibrated Jacobian at the optimum.
void fill_covariance(const MatrixXd& jac, double rank_tolerance, LeastSquaresResult& out) {
  const Index n = jac.cols();
  VectorXd d = column_norms(jac);
  for (Index j = 0; j < n; ++j)
    if (d(j) == 0) d(j) = 1;
  const MatrixXd js = jac * d.cwiseInverse().asDiagonal();
  Eigen::JacobiSVD<MatrixXd> svd(js, Eigen::ComputeThinV);
  const VectorXd s = svd.singularValues();
  const double s_max = s.size() > 0 ? s(0) : 0;
  Index rank = 0;
  for (Index i = 0; i < s.size(); ++i)
    if (s(i) > rank_tolerance * s_max && s(i) > 0) ++rank;
  out.rank = static_cast<int>(rank);
  const double s_min = s.size() > 0 ? s(s.size() - 1) : 0;
  out.condition_number =
      rank == n && s_min > 0 ? s_max / s_min : std::numeric_limits<double>::infinity();

  MatrixXd w = MatrixXd::Zero(n, n);
  for (Index i = 0; i < rank; ++i) w(i, i) = 1 / (s(i) * s(i));
  const MatrixXd v = d.cwiseInverse().asDiagonal() * svd.matrixV();
  const MatrixXd cov = v * w * v.transpose();
  const auto un = static_cast<std::size_t>(n);
  out.covariance_unscaled.assign(un * un, 0);
  for (Index i = 0; i < n; ++i)
    for (Index j = 0; j < n; ++j)
      out.covariance_unscaled[static_cast<std::size_t>(i * n + j)] = 0.5 * (cov(i, j) + cov(j, i));
  if (out.dof > 0) {
    const double s2 = out.cost / out.dof;
    out.covariance.resize(out.covariance_unscaled.size());
    std::transform(out.covariance_unscaled.begin(), out.covariance_unscaled.end(), out.covariance.begin(),
                   [s2](double c) { return c * s2; });
    out.standard_errors.resize(un);
    for (std::size_t j = 0; j < un; ++j) out.standard_errors[j] = std::sqrt(out.covariance[j * un + j]);
  }
}

/// The point of the Levenberg–Marquardt iteration (Moré 1978; MINPACK lmder): parameters,
/// residuals and Jacobian there, ‖r‖, the scaling D, ‖D x‖ and the trust-region radius Δ.
struct LmState {
  VectorXd x;
  VectorXd r;
  MatrixXd jac;
  double fnorm = 0;
  VectorXd diag;
  double xnorm = 0;
  double delta = 0;
  bool first = true;  ///< no step accepted yet (the first step also bounds Δ)
};

/// The stopping tolerances, none below machine epsilon.
struct Tolerances {
  double ftol, xtol, gtol;
};

/// Largest cosine between r and a Jacobian column (MINPACK's gnorm) for the gradient test.
double gradient_cosine(const LmState& s, const VectorXd& norms) {
  const VectorXd g = s.jac.transpose() * s.r;
  double gnorm = 0;
  for (Index j = 0; j < s.jac.cols(); ++j)
    if (norms(j) > 0) gnorm = std::max(gnorm, std::abs(g(j)) / (norms(j) * s.fnorm));
  return gnorm;
}

/// What one trial step did: accepted or not, and the convergence test it met, if any.
struct TrialOutcome {
  bool accepted = false;
  bool stop = false;
  LeastSquaresStatus status = LeastSquaresStatus::max_iterations;
  std::string message;
};

/// One trial step of lmder's inner loop at radius Δ: updates Δ from the ratio of actual to
/// predicted reduction, moves to the trial point when that ratio is at least 1e-4 and the
/// Jacobian there is finite, and applies the cost and step convergence tests.
TrialOutcome trial_step(LmState& s, const TrustRegionSolver& solver, Evaluator& eval, const Tolerances& tol) {
  TrialOutcome outcome;
  const ScaledStep step = solver.step(s.delta);
  if (s.first) s.delta = std::min(s.delta, step.norm);
  const VectorXd p = step.z.cwiseQuotient(s.diag);
  const VectorXd x_new = s.x + p;
  VectorXd r_new;
  double fnorm_new = std::numeric_limits<double>::infinity();
  if (eval.residuals(x_new, r_new)) fnorm_new = r_new.norm();

  // Actual and predicted relative reductions (Moré 1978, eqs. 4.3–4.4; MINPACK lmder).
  const double fnorm = s.fnorm;
  const double actred = 0.1 * fnorm_new < fnorm ? 1 - (fnorm_new / fnorm) * (fnorm_new / fnorm) : -1;
  const double t1 = step.jz_norm / fnorm;
  const double t2 = std::sqrt(step.lambda) * step.norm / fnorm;
  const double prered = t1 * t1 + 2 * t2 * t2;
  const double dirder = -(t1 * t1 + t2 * t2);
  const double ratio = prered != 0 ? actred / prered : 0;

  if (ratio <= 0.25) {
    double t = actred >= 0 ? 0.5 : 0.5 * dirder / (dirder + 0.5 * actred);
    if (0.1 * fnorm_new >= fnorm || t < 0.1) t = 0.1;
    s.delta = t * std::min(s.delta, step.norm / 0.1);
  } else if (step.lambda == 0 || ratio >= 0.75) {
    s.delta = step.norm / 0.5;
  }

  if (ratio >= 1e-4) {
    MatrixXd jac_new;
    if (eval.jacobian(x_new, jac_new)) {
      s.x = x_new;
      s.r = r_new;
      s.fnorm = fnorm_new;
      s.jac = std::move(jac_new);
      s.xnorm = s.diag.cwiseProduct(s.x).norm();
      outcome.accepted = true;
      s.first = false;
    } else {
      s.delta *= 0.1;  // treat a non-finite Jacobian like a failed step
    }
  }
  if (std::abs(actred) <= tol.ftol && prered <= tol.ftol && 0.5 * ratio <= 1) {
    outcome = {outcome.accepted, true, LeastSquaresStatus::converged_cost,
               "relative cost change below " + format_shortest(tol.ftol)};
  } else if (s.delta <= tol.xtol * s.xnorm) {
    outcome = {outcome.accepted, true, LeastSquaresStatus::converged_step,
               "relative step below " + format_shortest(tol.xtol)};
  }
  return outcome;
}

}  // namespace

void LeastSquaresOptions::validate() const {
  require(max_iterations >= 1, "max_iterations", max_iterations, "must be >= 1");
  require(function_tolerance >= 0 && std::isfinite(function_tolerance), "function_tolerance", function_tolerance,
          "must be finite and >= 0");
  require(parameter_tolerance >= 0 && std::isfinite(parameter_tolerance), "parameter_tolerance",
          parameter_tolerance, "must be finite and >= 0");
  require(gradient_tolerance >= 0 && std::isfinite(gradient_tolerance), "gradient_tolerance", gradient_tolerance,
          "must be finite and >= 0");
  require(initial_trust_factor > 0 && std::isfinite(initial_trust_factor), "initial_trust_factor",
          initial_trust_factor, "must be finite and > 0");
  require(rank_tolerance > 0 && rank_tolerance < 1, "rank_tolerance", rank_tolerance, "must be in (0, 1)");
  require(numeric_step > 0 && numeric_step < 1, "numeric_step", numeric_step, "must be in (0, 1)");
}

std::string to_string(LeastSquaresStatus status) {
  switch (status) {
    case LeastSquaresStatus::converged_cost: return "converged (relative cost change)";
    case LeastSquaresStatus::converged_step: return "converged (relative step size)";
    case LeastSquaresStatus::converged_gradient: return "converged (gradient)";
    case LeastSquaresStatus::max_iterations: return "maximum iterations reached";
    case LeastSquaresStatus::singular: return "singular (parameters not identifiable)";
    case LeastSquaresStatus::failed: return "failed (model not evaluable)";
  }
  return "unknown";
}

LeastSquaresResult solve_least_squares(const LeastSquaresProblem& problem, std::vector<double> x0,
                                       const LeastSquaresOptions& options) {
  options.validate();
  assert(problem.evaluate);
  assert(x0.size() == problem.parameter_count);
  assert(problem.parameter_count >= 1 && problem.residual_count >= problem.parameter_count);

  const auto n = static_cast<Index>(problem.parameter_count);
  Evaluator eval(problem, options);
  LeastSquaresResult out;
  out.dof = static_cast<int>(problem.residual_count - problem.parameter_count);
  out.parameters = x0;

  LmState s;
  s.x = Eigen::Map<const VectorXd>(x0.data(), n);
  auto finish = [&](LeastSquaresStatus status, std::string message) {
    out.status = status;
    out.message = std::move(message);
    out.parameters.assign(s.x.data(), s.x.data() + n);
    out.evaluations = eval.evaluations;
    return out;
  };
  if (!eval.residuals(s.x, s.r))
    return finish(LeastSquaresStatus::failed, "the model is not finite at the start point");
  if (!eval.jacobian(s.x, s.jac))
    return finish(LeastSquaresStatus::failed, "the Jacobian is not finite at the start point");
  s.fnorm = s.r.norm();
  out.initial_cost = s.fnorm * s.fnorm;

  const Tolerances tol{std::max(options.function_tolerance, kEps), std::max(options.parameter_tolerance, kEps),
                       std::max(options.gradient_tolerance, kEps)};

  s.diag = column_norms(s.jac);
  for (Index j = 0; j < n; ++j)
    if (s.diag(j) == 0) s.diag(j) = 1;
  s.xnorm = (s.diag.cwiseProduct(s.x)).norm();
  s.delta = options.initial_trust_factor * s.xnorm;
  if (s.delta == 0) s.delta = options.initial_trust_factor;

  LeastSquaresStatus status = LeastSquaresStatus::max_iterations;
  std::string message = "stopped after " + std::to_string(options.max_iterations) + " iterations";
  bool done = false;
  while (!done && out.iterations < options.max_iterations) {
    if (s.fnorm == 0) {
      status = LeastSquaresStatus::converged_cost;
      message = "zero residual";
      break;
    }
    // Gradient test: the cosine between r and each Jacobian column.
    const VectorXd norms = column_norms(s.jac);
    if (gradient_cosine(s, norms) <= tol.gtol) {
      status = LeastSquaresStatus::converged_gradient;
      message = "gradient orthogonal to the residual";
      break;
    }
    // Moré's scaling: D_j = max over the iterations of the column norms.
    s.diag = s.diag.cwiseMax(norms);
    const TrustRegionSolver solver(s.jac * s.diag.cwiseInverse().asDiagonal(), s.r, options.rank_tolerance);
    while (out.iterations < options.max_iterations) {
      ++out.iterations;
      TrialOutcome trial = trial_step(s, solver, eval, tol);
      if (trial.stop) {
        status = trial.status;
        message = std::move(trial.message);
        done = true;
      }
      if (done || trial.accepted) break;
    }
  }

  out.cost = s.fnorm * s.fnorm;
  out.residuals.assign(s.r.data(), s.r.data() + s.r.size());
  fill_covariance(s.jac, options.rank_tolerance, out);
  if (out.rank < static_cast<int>(n) && status != LeastSquaresStatus::max_iterations) {
    status = LeastSquaresStatus::singular;
    message = "the Jacobian at the optimum has rank " + std::to_string(out.rank) + " < " + std::to_string(n) +
              " parameters (condition number " + format_significant(out.condition_number, 3) + ")";
  }
  return finish(status, std::move(message));
}

}  // namespace periodfit::ident
