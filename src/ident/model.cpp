#include "ident/model.hpp"

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

}  // namespace periodfit::ident
