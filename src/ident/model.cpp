#include "ident/model.hpp"

#include <Eigen/Eigenvalues>
#include <algorithm>

#include <cassert>

namespace periodfit::ident {

namespace {
std::complex<double> polyval(const std::vector<double>& c, std::complex<double> s) {
  std::complex<double> v = 0;
  for (auto it = c.rbegin(); it != c.rend(); ++it) v = v * s + *it;  // Horner
  return v;
}
}  // namespace

std::complex<double> RationalModel::response(double omega_rad_s) const {
  assert(!den.empty());
  const std::complex<double> s(0, omega_rad_s);
  return polyval(num, s) / polyval(den, s) * std::exp(-s * delay_s);
}

std::vector<std::complex<double>> RationalModel::response_gradient(double omega_rad_s) const {
  const std::complex<double> s(0, omega_rad_s);
  const std::complex<double> a = polyval(den, s);
  const std::complex<double> delay = std::exp(-s * delay_s);
  const std::complex<double> h = polyval(num, s) / a * delay;
  std::vector<std::complex<double>> g;
  g.reserve(parameter_count());
  std::complex<double> power = 1;
  for (std::size_t i = 0; i < num.size(); ++i, power *= s) g.push_back(power / a * delay);
  power = 1;
  for (std::size_t i = 0; i + 1 < den.size(); ++i, power *= s) g.push_back(-h * power / a);
  if (delay_estimated) g.push_back(-s * h);
  return g;
}

// The companion matrix of the monic polynomial (Golub & Van Loan, Matrix Computations, §7.4.6);
// its eigenvalues are the roots, to the backward stability of the QR algorithm.
std::vector<std::complex<double>> polynomial_roots(const std::vector<double>& c) {
  const auto n = static_cast<Eigen::Index>(c.size()) - 1;
  if (n < 1) return {};
  const double lead = c.back();
  Eigen::MatrixXd comp = Eigen::MatrixXd::Zero(n, n);
  for (Eigen::Index i = 1; i < n; ++i) comp(i, i - 1) = 1;
  for (Eigen::Index i = 0; i < n; ++i) comp(i, n - 1) = -c[static_cast<std::size_t>(i)] / lead;
  Eigen::EigenSolver<Eigen::MatrixXd> es(comp, false);
  std::vector<std::complex<double>> r;
  for (Eigen::Index i = 0; i < n; ++i) r.push_back(es.eigenvalues()(i));
  std::sort(r.begin(), r.end(), [](std::complex<double> p, std::complex<double> q) {
    if (std::abs(p) != std::abs(q)) return std::abs(p) < std::abs(q);
    return p.imag() < q.imag();
  });
  return r;
}

}  // namespace periodfit::ident
