#pragma once
// Deterministic standard normal draws for Monte Carlo tests: Box–Muller written out on
// std::mt19937_64, whose output sequence the C++ standard fixes, so the draws (and every
// figure a test prints from them) do not depend on the library's distribution code.
#include <cmath>
#include <cstdint>
#include <numbers>
#include <random>

namespace periodfit::test {

class Gaussian {
 public:
  explicit Gaussian(std::uint64_t seed) : gen_(seed) {}
  double operator()() {
    const double u1 = (static_cast<double>(gen_() >> 11) + 1) * 0x1p-53;
    const double u2 = static_cast<double>(gen_() >> 11) * 0x1p-53;
    return std::sqrt(-2 * std::log(u1)) * std::cos(2 * std::numbers::pi * u2);
  }

 private:
  std::mt19937_64 gen_;
};

}  // namespace periodfit::test
