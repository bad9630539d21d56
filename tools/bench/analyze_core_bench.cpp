// Times the analysis core (no import) on a synthetic channel: periodfit::dsp::analyze_channel
// on N samples of a distorted sine in noise, one thread. Built and run by analyze_speed.sh.
// Usage: analyze_core_bench N [repeats]
#include <chrono>
#include <ctime>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <numbers>
#include <random>

#include "dsp/harmonics.hpp"

int main(int argc, char** argv) {
  const std::size_t n = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 10000000;
  const int repeats = argc > 2 ? std::atoi(argv[2]) : 3;
  const double fs = 1e6, f0 = 997.123;  // 1002.9 samples per period, 9971 periods at 10M
  periodfit::Channel c;
  c.name = "bench";
  c.samples.resize(n);
  std::mt19937_64 rng(1);
  std::normal_distribution<double> noise(0.0, 1e-3);
  for (std::size_t k = 0; k < n; ++k) {
    const double w = 2 * std::numbers::pi * f0 * static_cast<double>(k) / fs;
    c.samples[k] = std::cos(w + 0.3) + 0.01 * std::cos(2 * w) + 0.003 * std::cos(3 * w + 1) + noise(rng);
  }
  double best = 1e300, best_cpu = 1e300;
  periodfit::dsp::ChannelAnalysis a;
  for (int r = 0; r < repeats; ++r) {
    const auto t0 = std::chrono::steady_clock::now();
    const std::clock_t c0 = std::clock();
    a = periodfit::dsp::analyze_channel(c, fs, 0);
    const double cpu = static_cast<double>(std::clock() - c0) / CLOCKS_PER_SEC;
    const double s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    best = std::min(best, s);
    best_cpu = std::min(best_cpu, cpu);
  }
  std::printf("core: samples %zu  harmonics %d  best of %d: wall %.3f s  cpu %.3f s  f0 %.9f Hz  thd %.6g\n",
              n, a.fundamental.harmonics_fitted, repeats, best, best_cpu, a.fundamental.f0_hz,
              a.distortion.thd);
  return 0;
}
