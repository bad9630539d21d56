#pragma once
/// CONTRACT HEADER (shared by ident, predict and batch). Owner: ident. Fields may be added.
///
/// A rational transfer function with dead time, H(s) = B(s)/A(s)·e^{−sT}, B(s) = Σ b_i s^i
/// (i = 0…M), A(s) = Σ a_i s^i (i = 0…N) with a_N = 1 (monic). Coefficients are in ascending
/// powers of s with s in rad/s (SI), whatever scaling the fit used internally.
#include <complex>
#include <cstddef>
#include <string>
#include <vector>

namespace periodfit::ident {

/// Highest polynomial degree of B(s) or A(s) accepted from a file or the command line. Poles
/// come from the eigenvalues of A's companion matrix, O(N³) (Golub & Van Loan, Matrix
/// Computations, §7.5): degree 2000 took over 60 s (issue 11, class 5), degree 100 takes
/// milliseconds. Coefficients in powers of s are hopelessly ill-conditioned long before
/// degree 100 (the fit itself stops at 12 for an automatic order), so no real model is refused.
inline constexpr std::size_t kMaxModelDegree = 100;

/// Roots of c_0 + c_1 s + … + c_n s^n (c_n ≠ 0), as the eigenvalues of the companion matrix,
/// sorted by |p| then Im p; empty for a constant. The one root finder of B(s) and A(s).
std::vector<std::complex<double>> polynomial_roots(const std::vector<double>& c);

struct RationalModel {
  std::vector<double> num;   ///< b_0 … b_M
  std::vector<double> den;   ///< a_0 … a_N, a_N == 1
  double delay_s = 0;        ///< T
  /// Covariance of the free parameters in the order [b_0…b_M, a_0…a_{N−1}, T (only when
  /// delay_estimated)]; empty when unknown (e.g. a model typed on the command line).
  std::vector<std::vector<double>> covariance;
  bool delay_estimated = false;

  std::size_t parameter_count() const { return num.size() + (den.empty() ? 0 : den.size() - 1) + (delay_estimated ? 1 : 0); }
  /// H(jω) at angular frequency `omega_rad_s`.
  std::complex<double> response(double omega_rad_s) const;
  /// ∂H(jω)/∂θ for each free parameter, in covariance order.
  std::vector<std::complex<double>> response_gradient(double omega_rad_s) const;
};

}  // namespace periodfit::ident
