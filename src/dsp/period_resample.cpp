// Locking onto whole periods: the fitted model at the grid times plus the band-limited
// interpolation of the residual. Method and sources: period_lock.hpp, step 4.
#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>
#include <vector>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "dsp/period_lock.hpp"
#include "core/number_format.hpp"

namespace periodfit::dsp {
namespace {

constexpr double kPi = std::numbers::pi;
constexpr double kTwoPi = 2 * std::numbers::pi;
// Residual interpolation kernel: Kaiser-windowed sinc (Kaiser 1974; Oppenheim & Schafer,
// Discrete-Time Signal Processing, §7.5.3 design formulas: β = 6 gives ≈ 63 dB stop-band
// attenuation; with 32 taps the transition band is ≈ 0.12·fs wide around fs/2).
constexpr int kKernelHalfWidth = 16;
constexpr double kKaiserBeta = 6.0;
constexpr int kKernelPhases = 1024;  ///< table resolution in fractional delay (linear interp)

std::string str(double v) { return format_shortest(v); }

}  // namespace

namespace {

struct KernelTable {
  std::vector<double> t;  // (kKernelPhases + 1) × 2L
  KernelTable() {
    constexpr int L = kKernelHalfWidth;
    t.resize(static_cast<std::size_t>(kKernelPhases + 1) * 2 * L);
    auto bessel_i0 = [](double v) {
      double sum = 1, term = 1;
      for (int k = 1; k < 60; ++k) {
        term *= (v / (2 * k)) * (v / (2 * k));
        sum += term;
        if (term < 1e-17 * sum) break;
      }
      return sum;
    };
    const double i0b = bessel_i0(kKaiserBeta);
    for (int q = 0; q <= kKernelPhases; ++q) {
      const double mu = static_cast<double>(q) / kKernelPhases;
      for (int tap = 0; tap < 2 * L; ++tap) {
        const int j = tap - L + 1;
        const double d = mu - j;
        double v = 0;
        if (q == 0)
          v = j == 0 ? 1 : 0;
        else if (q == kKernelPhases)
          v = j == 1 ? 1 : 0;
        else if (std::abs(d) < L) {
          const double r = d / L;
          v = std::sin(kPi * d) / (kPi * d) * bessel_i0(kKaiserBeta * std::sqrt(1 - r * r)) / i0b;
        }
        t[static_cast<std::size_t>(q) * 2 * L + static_cast<std::size_t>(tap)] = v;
      }
    }
  }
};

const KernelTable& kernel_table() {
  static const KernelTable table;
  return table;
}

/// Model value at time t for a fit (direct sin/cos, Chebyshev over n).
double model_at(const HarmonicFit& fit, double t) {
  const double theta = kTwoPi * fit.fundamental.f0_hz * (t - fit.tc_s);
  const double c1 = std::cos(theta), s1 = std::sin(theta);
  double cp = 1, sp = 0, cc = c1, sc = s1, v = fit.a[0];
  for (int m = 1; m <= fit.harmonics(); ++m) {
    const auto i = static_cast<std::size_t>(m);
    v += fit.a[i] * cc + fit.b[i] * sc;
    const double cn = 2 * c1 * cc - cp, sn = 2 * c1 * sc - sp;
    cp = cc;
    cc = cn;
    sp = sc;
    sc = sn;
  }
  return v;
}

}  // namespace

PeriodGrid resample_fitted(std::span<const double> residual, const HarmonicFit& fit, int m) {
  const std::size_t n = residual.size();
  const double fs = fit.fs_hz, f0 = fit.fundamental.f0_hz;
  if (m < 2) throw OptionError("samples_per_period", std::to_string(m), "must be >= 2");
  // The record's N sample intervals span N·f0/fs periods; the grid holds the whole ones. Its
  // last point may lie up to one sample interval past the last sample, where the residual is
  // interpolated one-sidedly (the model part is exact everywhere).
  // (1e-3 period of slack: a capture of exactly one period whose fitted f0 is a hair low.)
  const double cycles = static_cast<double>(n) * f0 / fs;
  const int periods = static_cast<int>(std::floor(cycles + 1e-3));
  if (periods < 1)
    throw AnalysisError("the record spans " + format_significant(cycles, 4) +
                        " periods of f0 = " + str(f0) + " Hz: less than one whole period to lock onto");
  // Bounded before allocation (issue 11, class 5): the grid (P·M doubles), one period's model
  // and the per-period transforms of period_spectra (M complex values), counted as four doubles
  // per grid sample, a margin for what the caller derives from the grid.
  const double grid_bytes = 4.0 * 8.0 * static_cast<double>(m) * static_cast<double>(periods);
  if (const auto over = over_memory_budget(grid_bytes))
    throw OptionError("samples_per_period", std::to_string(m),
                      "the locked grid of " + std::to_string(periods) + " periods × " + std::to_string(m) +
                          " samples needs " + *over);
  PeriodGrid g;
  g.f0_hz = f0;
  g.samples_per_period = m;
  g.periods = periods;
  g.start_s = fit.t0_s;
  g.source_rate_hz = fs;
  const auto M = static_cast<std::size_t>(m);
  std::vector<double> model(M);
  for (std::size_t k = 0; k < M; ++k)
    model[k] = model_at(fit, fit.t0_s + static_cast<double>(k) / (m * f0));
  const std::size_t total = M * static_cast<std::size_t>(periods);
  g.samples.resize(total);
  constexpr int L = kKernelHalfWidth;
  const double* table = kernel_table().t.data();
  const double ratio = fs / (m * f0);  // input samples per grid sample
  const auto last = static_cast<long>(n) - 1;
  for (std::size_t idx = 0; idx < total; ++idx) {
    const double u = static_cast<double>(idx) * ratio;
    const double fl = std::floor(u);
    const auto i0 = static_cast<long>(fl);
    const double qpos = (u - fl) * kKernelPhases;
    const int q = std::min(static_cast<int>(qpos), kKernelPhases - 1);
    const double alpha = qpos - q;
    const double* t0 = table + static_cast<std::size_t>(q) * 2 * L;
    const double* t1 = t0 + 2 * L;
    double s = 0;
    if (i0 - L + 1 >= 0 && i0 + L <= last) {
      const double* r = residual.data() + (i0 - L + 1);
      // Four partial sums: the taps' additions are independent, not one latency-bound chain.
      double p0 = 0, p1 = 0, p2 = 0, p3 = 0;
      for (int tap = 0; tap < 2 * L; tap += 4) {
        p0 += (t0[tap] + alpha * (t1[tap] - t0[tap])) * r[tap];
        p1 += (t0[tap + 1] + alpha * (t1[tap + 1] - t0[tap + 1])) * r[tap + 1];
        p2 += (t0[tap + 2] + alpha * (t1[tap + 2] - t0[tap + 2])) * r[tap + 2];
        p3 += (t0[tap + 3] + alpha * (t1[tap + 3] - t0[tap + 3])) * r[tap + 3];
      }
      s = (p0 + p1) + (p2 + p3);
    } else {
      for (int tap = 0; tap < 2 * L; ++tap) {
        const long i = i0 - L + 1 + tap;
        if (i < 0 || i > last) continue;
        s += (t0[tap] + alpha * (t1[tap] - t0[tap])) * residual[static_cast<std::size_t>(i)];
      }
    }
    g.samples[idx] = model[idx % M] + s;
  }
  return g;
}

}  // namespace periodfit::dsp
