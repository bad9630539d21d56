// Fundamental estimation and the multi-harmonic sine fit (the resampling onto whole periods is
// in period_resample.cpp, the per-period spectra in period_spectra.cpp). Method and sources:
// see period_lock.hpp.
#include "dsp/period_lock.hpp"

#include <Eigen/Dense>
#include <algorithm>
#include <atomic>
#include <cassert>
#include <cmath>
#include <cstddef>
#include <limits>
#include <memory>
#include <numbers>
#include <string>
#include <vector>

#include "core/error.hpp"
#include "dsp/fft_plan.hpp"
#include "dsp/internal/kernel_override.hpp"
#include "core/number_format.hpp"

namespace periodfit::dsp {
namespace {

constexpr double kPi = std::numbers::pi;
constexpr double kTwoPi = 2 * std::numbers::pi;
/// Default cap on H (the "at most 50").
constexpr int kDefaultMaxHarmonic = 50;
/// Harmonics fitted by the standalone resampler are capped: beyond that the residual kernel
/// carries them (ripple ≲ 1e-3), and the Cholesky of the Gram matrix stays cheap.
constexpr int kResampleMaxHarmonic = 1000;
/// The coarse search's local noise floor: the median of the bins within this many record bins
/// of a candidate line, its own ±kLocalGuardBins (the Hann main lobe is ±2 bins) left out.
constexpr double kLocalFloorBins = 32;
constexpr double kLocalGuardBins = 4;
/// Records shorter than this many periods get the 0.02-bin grid search after the FFT peak.
constexpr double kShortRecordPeriods = 12;
/// Records longer than twice this are first located on a prefix of this many samples.
constexpr std::size_t kPrefixSamples = std::size_t{1} << 20;
/// Records of at least this many periods go from the 3-harmonic fit straight to H.
constexpr double kLongRecordPeriods = 200;
/// Samples between exact sin/cos restarts of the rotation recurrence (error ≲ 512·ε).
constexpr std::size_t kRotationBlock = 512;  // kBlock in harmonic_kernel.inc


std::string str(double v) { return format_shortest(v); }

// ---- closed-form sums over s = k − (N−1)/2, k = 0…N−1 --------------------------------------
// D(u) = Σ cos(2us) = sin(Nu)/sin(u) (Dirichlet kernel); Σ s·sin(2us) = −D'(u)/2;
// Σ s²·cos(2us) = −D''(u)/4. The odd sums Σ sin(2us), Σ s·cos(2us) vanish by symmetry.
struct KernelSums {
  double d0 = 0;  ///< Σ cos(2us)
  double d1 = 0;  ///< Σ s·sin(2us)
  double d2 = 0;  ///< Σ s²·cos(2us)
};

KernelSums kernel_sums_direct(std::size_t n, double u) {
  const double centre = 0.5 * static_cast<double>(n - 1);
  long double d0 = 0, d1 = 0, d2 = 0;
  for (std::size_t k = 0; k < n; ++k) {
    const double s = static_cast<double>(k) - centre;
    const double c = std::cos(2 * u * s), sn = std::sin(2 * u * s);
    d0 += c;
    d1 += s * sn;
    d2 += s * s * c;
  }
  return {static_cast<double>(d0), static_cast<double>(d1), static_cast<double>(d2)};
}

KernelSums kernel_sums(std::size_t n_samples, double u) {
  const double n = static_cast<double>(n_samples);
  if (u == 0) return {n, 0, (n - 1) * n * (n + 1) / 12};
  const double su = std::sin(u);
  // Near u = kπ (k ≥ 1) the ratio form loses digits; there, and for less than ~0.6 cycles of
  // the product frequency over the record, sum directly (rare: only for forced odd inputs).
  if ((std::abs(su) < 1e-3 && std::abs(u) > 0.5) || std::abs(n * u) < 2)
    return kernel_sums_direct(n_samples, u);
  const double cu = std::cos(u), sn = std::sin(n * u), cn = std::cos(n * u);
  const double d = sn / su;
  const double dp = (n * cn * su - sn * cu) / (su * su);
  const double dpp =
      (-n * n * sn * su * su + sn * su * su - 2 * n * cu * cn * su + 2 * sn * cu * cu) /
      (su * su * su);
  return {d, -dp / 2, -dpp / 4};
}

// ---- the streamed pass over the data -------------------------------------------------------
// The hot loops (harmonic_kernel.inc) are compiled three times, for AVX-512, AVX2+FMA and the
// x86-64 baseline, and chosen once from the CPU's features (not its model name).
}  // namespace
}  // namespace periodfit::dsp

#pragma GCC push_options
#pragma GCC target("avx512f,avx512dq,avx512vl,avx512bw,fma")
#define PERIODFIT_KERNEL_NS periodfit_kernel_avx512
#define PERIODFIT_KERNEL_WIDTH 8
#include "dsp/harmonic_kernel.inc"
#undef PERIODFIT_KERNEL_NS
#undef PERIODFIT_KERNEL_WIDTH
#pragma GCC pop_options

#pragma GCC push_options
#pragma GCC target("avx2,fma")
#define PERIODFIT_KERNEL_NS periodfit_kernel_avx2
#define PERIODFIT_KERNEL_WIDTH 4
#include "dsp/harmonic_kernel.inc"
#undef PERIODFIT_KERNEL_NS
#undef PERIODFIT_KERNEL_WIDTH
#pragma GCC pop_options

#define PERIODFIT_KERNEL_NS periodfit_kernel_base
#define PERIODFIT_KERNEL_WIDTH 2
#include "dsp/harmonic_kernel.inc"
#undef PERIODFIT_KERNEL_NS
#undef PERIODFIT_KERNEL_WIDTH

namespace periodfit::dsp {
namespace {

enum class Isa { avx512, avx2, base };

std::atomic<int> forced_isa{-1};  // test hook: -1 = by CPU features

Isa cpu_isa() {
  const int forced = forced_isa.load(std::memory_order_relaxed);
  if (forced >= 0) return static_cast<Isa>(forced);
  static const Isa isa = [] {
    __builtin_cpu_init();
    if (__builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512dq") &&
        __builtin_cpu_supports("avx512vl") && __builtin_cpu_supports("avx512bw"))
      return Isa::avx512;
    if (__builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma")) return Isa::avx2;
    return Isa::base;
  }();
  return isa;
}

/// Sums for m = 0…h as sums[m·4 + q] (q as in harmonic_kernel.inc).
std::vector<double> data_sums(const double* x, std::size_t n, double nu, int h, bool with_z) {
  const auto H = static_cast<std::size_t>(h);
  constexpr std::size_t kMaxVec = 8;  // doubles per vector in the widest kernel
  std::vector<double> raw(4 * (H + 1) * 2 * kMaxVec + kMaxVec, 0.0);
  void* p = raw.data();
  std::size_t space = raw.size() * sizeof(double);
  double* acc = static_cast<double*>(std::align(64, 4 * (H + 1) * 2 * kMaxVec * sizeof(double), p, space));
  std::size_t width = 2;
  switch (cpu_isa()) {
    case Isa::avx512:
      periodfit_kernel_avx512::data_pass(x, n, nu, h, with_z, acc);
      width = 8;
      break;
    case Isa::avx2:
      periodfit_kernel_avx2::data_pass(x, n, nu, h, with_z, acc);
      width = 4;
      break;
    case Isa::base:
      periodfit_kernel_base::data_pass(x, n, nu, h, with_z, acc);
      break;
  }
  std::vector<double> sums(4 * (H + 1), 0.0);
  for (std::size_t j = 0; j < 4 * (H + 1); ++j)
    for (std::size_t i = 0; i < 2 * width; ++i) sums[j] += acc[j * 2 * width + i];
  return sums;
}

double residual_pass(const double* x, std::size_t n, double nu, int h, const double* a,
                     const double* b, double* r) {
  switch (cpu_isa()) {
    case Isa::avx512:
      return periodfit_kernel_avx512::residual_pass(x, n, nu, h, a, b, r);
    case Isa::avx2:
      return periodfit_kernel_avx2::residual_pass(x, n, nu, h, a, b, r);
    case Isa::base:
      break;
  }
  return periodfit_kernel_base::residual_pass(x, n, nu, h, a, b, r);
}

// ---- one evaluation of the variable-projection problem at ν --------------------------------
struct Evaluation {
  double nu = 0;
  Eigen::VectorXd a;        ///< a_0…a_H
  Eigen::VectorXd b;        ///< b_1…b_H (index n − 1)
  double projection = 0;    ///< ‖P_A x‖² = (A^T x)·c: larger is better
  double gradient = 0;      ///< d^T r (d = ∂model/∂ν), zero at the optimum
  double schur = 0;         ///< d^T d − e^T G^{-1} e: 1/var(ν) per unit σ²
  Eigen::VectorXd ga;       ///< G_c^{-1} e_c (for the covariance)
  Eigen::VectorXd gb;       ///< G_s^{-1} e_s
  Eigen::VectorXd inv_diag_c, inv_diag_s;  ///< diagonals of G_c^{-1}, G_s^{-1}
  double condition = 0;
  bool ok = false;
};

class SineFitter {
 public:
  explicit SineFitter(std::span<const double> x) : x_(x) {
    for (double v : x) sum_sq_ += v * v;
  }
  double sum_sq() const { return sum_sq_; }
  std::size_t size() const { return x_.size(); }

  /// Linear least squares at ν with `h` harmonics; with_frequency adds the ν-column terms.
  Evaluation evaluate(double nu, int h, bool with_frequency, bool with_covariance) const {
    const std::size_t n = x_.size();
    const auto H = static_cast<std::size_t>(h);
    const std::vector<double> acc = data_sums(x_.data(), n, nu, h, with_frequency);
    Eigen::VectorXd yc(h + 1), ys(h + 1), zc(h + 1), zs(h + 1);
    for (std::size_t m = 0; m <= H; ++m) {
      const double* q = acc.data() + m * 4;
      const auto mi = static_cast<Eigen::Index>(m);
      yc(mi) = q[0];
      ys(mi) = q[1];
      zc(mi) = q[2];
      zs(mi) = q[3];
    }
    // Kernel sums for j = 0…2H at u = j·ν/2 (θ = ν·s = 2·(ν/2)·s).
    std::vector<KernelSums> ks(2 * H + 1);
    for (std::size_t j = 0; j <= 2 * H; ++j) ks[j] = kernel_sums(n, static_cast<double>(j) * nu / 2);
    auto D0 = [&](long j) { return ks[static_cast<std::size_t>(std::abs(j))].d0; };
    auto C1 = [&](long j) {  // odd in j
      const double v = ks[static_cast<std::size_t>(std::abs(j))].d1;
      return j < 0 ? -v : v;
    };
    auto C2 = [&](long j) { return ks[static_cast<std::size_t>(std::abs(j))].d2; };

    Eigen::MatrixXd gc(h + 1, h + 1), gs(h, h);
    for (long p = 0; p <= h; ++p)
      for (long q = 0; q <= h; ++q) gc(p, q) = 0.5 * (D0(p - q) + D0(p + q));
    for (long p = 1; p <= h; ++p)
      for (long q = 1; q <= h; ++q) gs(p - 1, q - 1) = 0.5 * (D0(p - q) - D0(p + q));
    Evaluation e;
    e.nu = nu;
    Eigen::LLT<Eigen::MatrixXd> lc(gc), ls(gs);
    if (lc.info() != Eigen::Success || ls.info() != Eigen::Success) return e;
    e.a = lc.solve(yc);
    e.b = ls.solve(ys.tail(h));
    e.projection = yc.dot(e.a) + ys.tail(h).dot(e.b);
    e.ok = e.a.allFinite() && e.b.allFinite();
    if (with_covariance && h <= 200) {
      auto scaled_condition = [](const Eigen::MatrixXd& g) {
        const Eigen::VectorXd d = g.diagonal().cwiseSqrt().cwiseInverse();
        const Eigen::MatrixXd s = d.asDiagonal() * g * d.asDiagonal();
        Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> es(s, Eigen::EigenvaluesOnly);
        const auto& ev = es.eigenvalues();
        return ev.minCoeff() > 0 ? ev.maxCoeff() / ev.minCoeff() : std::numeric_limits<double>::infinity();
      };
      e.condition = std::max(scaled_condition(gc), scaled_condition(gs));
      e.inv_diag_c = lc.solve(Eigen::MatrixXd::Identity(h + 1, h + 1)).diagonal();
      e.inv_diag_s = ls.solve(Eigen::MatrixXd::Identity(h, h)).diagonal();
    }
    if (!with_frequency) return e;
    // e = A^T d with d = Σ_n n·s·(−a_n sin nθ + b_n cos nθ) (per-sample ν units).
    Eigen::VectorXd ec = Eigen::VectorXd::Zero(h + 1), es = Eigen::VectorXd::Zero(h);
    for (long m = 0; m <= h; ++m)
      for (long q = 1; q <= h; ++q)
        ec(m) += static_cast<double>(q) * (-e.a(q)) * 0.5 * (C1(q + m) + C1(q - m));
    for (long m = 1; m <= h; ++m)
      for (long q = 1; q <= h; ++q)
        es(m - 1) += static_cast<double>(q) * e.b(q - 1) * 0.5 * (C1(m + q) + C1(m - q));
    double dtd = 0;
    for (long p = 1; p <= h; ++p)
      for (long q = 1; q <= h; ++q) {
        const double w = static_cast<double>(p * q);
        dtd += w * (e.a(p) * e.a(q) * 0.5 * (C2(p - q) - C2(p + q)) +
                    e.b(p - 1) * e.b(q - 1) * 0.5 * (C2(p - q) + C2(p + q)));
      }
    double dty = 0;
    for (long q = 1; q <= h; ++q)
      dty += static_cast<double>(q) * (-e.a(q) * zs(q) + e.b(q - 1) * zc(q));
    e.gradient = dty - ec.dot(e.a) - es.dot(e.b);
    e.ga = lc.solve(ec);
    e.gb = ls.solve(es);
    e.schur = dtd - ec.dot(e.ga) - es.dot(e.gb);
    return e;
  }

 private:
  std::span<const double> x_;
  double sum_sq_ = 0;
};

struct GaussNewton {
  Evaluation last;
  int iterations = 0;
  bool converged = false;
};

/// Gauss–Newton on ν with the linear parameters projected out; step capped at `max_step`
/// and halved until the projection (the fit's explained energy) does not decrease.
GaussNewton gauss_newton(const SineFitter& fitter, double nu0, int h, const LockOptions& opt,
                         double max_step, bool with_covariance) {
  GaussNewton g;
  g.last = fitter.evaluate(nu0, h, true, with_covariance);
  for (int it = 0; it < opt.max_iterations && g.last.ok; ++it) {
    if (!(g.last.schur > 0)) break;
    double step = g.last.gradient / g.last.schur;
    step = std::clamp(step, -max_step, max_step);
    // Converged when the step is below the tolerance, or below 1e-3 of ν's own standard
    // uncertainty (σ² from the explained energy): the linear parameters, exact at the current
    // ν, then differ from those at the optimum by ≲ 1e-3 of their uncertainty, and one more
    // pass over the data would change nothing a reader could see.
    const double dof = static_cast<double>(fitter.size()) - (2.0 * h + 2);
    const double sigma2 = dof > 0 ? std::max(0.0, fitter.sum_sq() - g.last.projection) / dof : 0;
    const double u_nu = std::sqrt(sigma2 / g.last.schur);
    if (std::abs(step) <= opt.rel_tolerance * std::abs(g.last.nu) || std::abs(step) <= 1e-3 * u_nu) {
      g.converged = true;
      break;
    }
    ++g.iterations;
    bool accepted = false;
    for (int halving = 0; halving < 30; ++halving) {
      Evaluation trial = fitter.evaluate(g.last.nu + step, h, true, with_covariance);
      const double tol = 1e-13 * std::abs(g.last.projection);
      if (trial.ok && trial.projection >= g.last.projection - tol) {
        g.last = std::move(trial);
        accepted = true;
        break;
      }
      step /= 2;
      if (std::abs(step) <= opt.rel_tolerance * std::abs(g.last.nu)) break;
    }
    if (!accepted) {
      // No step improves the fit beyond rounding: we are at the optimum to working precision.
      g.converged = true;
      break;
    }
  }
  return g;
}

// ---- coarse estimate -----------------------------------------------------------------------
double log_parabola_offset(double a, double b, double c) {
  // Gaussian interpolation of a spectral peak (log-magnitudes): exact for a Gaussian lobe,
  // and much less biased than the plain parabola for a Hann lobe (common practice; e.g.
  // Gasior & Gonzalez 2004, CERN-AB-2004-023).
  if (!(a > 0 && b > 0 && c > 0)) return 0;
  const double la = std::log(a), lb = std::log(b), lc = std::log(c);
  const double den = la - 2 * lb + lc;
  if (!(den < 0)) return 0;
  return std::clamp(0.5 * (la - lc) / den, -0.5, 0.5);
}

/// The Hann-windowed power spectrum of a record, zero-padded for the coarse search.
struct PaddedSpectrum {
  std::vector<double> p;   ///< |X_k|², k = 0…nfft/2
  double bin_hz = 0;       ///< fs / nfft
  double record_bin = 0;   ///< padded bins per record bin
};

PaddedSpectrum hann_power_spectrum(std::span<const double> x, double fs) {
  const std::size_t n = x.size();
  const int pad = n <= 65536 ? 8 : (n <= (std::size_t{1} << 20) ? 2 : 1);
  const int nfft = fft_friendly_size(static_cast<int>(n) * pad);
  std::vector<double> buf(static_cast<std::size_t>(nfft), 0.0);
  // Hann window; subtract the window-weighted mean so the DC lobe is exactly zero at bin 0.
  double wsum = 0, wxsum = 0;
  std::vector<double> w(n);
  for (std::size_t k = 0; k < n; ++k) {
    w[k] = 0.5 - 0.5 * std::cos(kTwoPi * (static_cast<double>(k) + 0.5) / static_cast<double>(n));
    wsum += w[k];
    wxsum += w[k] * x[k];
  }
  const double mean = wxsum / wsum;
  for (std::size_t k = 0; k < n; ++k) buf[k] = w[k] * (x[k] - mean);
  std::vector<std::complex<double>> spec(static_cast<std::size_t>(nfft / 2 + 1));
  real_dft(buf, spec);
  PaddedSpectrum s;
  s.p.resize(spec.size());
  for (std::size_t k = 0; k < spec.size(); ++k) s.p[k] = std::norm(spec[k]);
  s.bin_hz = fs / nfft;
  s.record_bin = static_cast<double>(nfft) / static_cast<double>(n);
  return s;
}

/// Frequency of the peak at bin k, interpolated (log_parabola_offset).
double refined_hz(const PaddedSpectrum& s, std::size_t k) {
  return (static_cast<double>(k) + log_parabola_offset(s.p[k - 1], s.p[k], s.p[k + 1])) * s.bin_hz;
}

struct Peak {
  double f;
  double power;
};

/// The significant spectral lines between bins kmin and kmax, strongest first: a local maximum
/// within −50 dB of the strongest (bin kp), 25× above the median level (noise), and 20 dB above
/// the Hann sidelobe envelope |W(d)|/|W(0)| ≈ 1/(π·d·(d²−1)) of every stronger peak d record
/// bins away (Harris 1978), so a short record's sidelobes do not pass for lines.
std::vector<Peak> spectral_lines(const PaddedSpectrum& s, std::size_t kmin, std::size_t kmax, std::size_t kp,
                                 std::size_t n, double fs) {
  const std::vector<double>& p = s.p;
  std::vector<double> sorted(p.begin() + static_cast<long>(kmin), p.begin() + static_cast<long>(kmax) + 1);
  std::nth_element(sorted.begin(), sorted.begin() + static_cast<long>(sorted.size() / 2), sorted.end());
  const double median = sorted[sorted.size() / 2];
  const double level = std::max(1e-5 * p[kp], 25 * median);
  std::vector<Peak> candidates;
  // Local noise floor (issue 12: under 1/f or low-pass noise the noise hump's maxima passed the
  // record-wide median test and formed a comb at f0/4 … f0/20): a line must also stand
  // T_loc times above the median of the bins within ±kLocalFloorBins record bins of it (its own
  // ±kLocalGuardBins excluded). A Hann periodogram's noise bins are exponential, median = ln 2 ×
  // mean, so with T_loc = ln(M/0.01)/ln 2 over the M = N/2 record bins the chance of a noise
  // maximum passing anywhere in a noise-only record is about 0.01 (Bonferroni).
  const double t_local = std::max(25.0, std::log(0.5 * static_cast<double>(n) / 0.01) / std::log(2.0));
  const auto local_floor = [&](std::size_t k) {
    const auto half = static_cast<std::size_t>(std::ceil(kLocalFloorBins * s.record_bin));
    const auto guard = static_cast<std::size_t>(std::ceil(kLocalGuardBins * s.record_bin));
    std::vector<double> near;
    const std::size_t lo = k > half ? k - half : 1, hi = std::min(p.size() - 1, k + half);
    for (std::size_t j = lo; j <= hi; ++j)
      if (j + guard < k || j > k + guard) near.push_back(p[j]);
    if (near.empty()) return 0.0;
    std::nth_element(near.begin(), near.begin() + static_cast<long>(near.size() / 2), near.end());
    return near[near.size() / 2];
  };
  for (std::size_t k = std::max<std::size_t>(kmin, 1); k <= kmax; ++k)
    if (p[k] > level && p[k] > p[k - 1] && p[k] >= p[k + 1] && p[k] > t_local * local_floor(k))
      candidates.push_back({refined_hz(s, k), p[k]});
  std::sort(candidates.begin(), candidates.end(), [](const Peak& l, const Peak& r) { return l.power > r.power; });
  if (candidates.size() > 400) candidates.resize(400);
  const double record_bin_hz = fs / static_cast<double>(n);
  std::vector<Peak> lines;
  for (const auto& c : candidates) {
    bool sidelobe = false;
    for (const auto& l : lines) {
      const double d = std::abs(c.f - l.f) / record_bin_hz;
      const double env = d > 1.5 ? 1 / (kPi * d * (d * d - 1)) : 1.0;
      if (c.power < 100 * env * env * l.power) {
        sidelobe = true;
        break;
      }
    }
    if (!sidelobe) lines.push_back(c);
  }
  return lines;
}

/// Harmonic comb: the fundamental is the largest f/m of which every line is a harmonic. This finds
/// a fundamental weaker than its 2nd harmonic (full-wave rectifier with unequal halves) and that
/// of a multisine whose strongest line is any harmonic. `off_comb` as coarse_frequency's.
double comb_fundamental(const std::vector<Peak>& lines, double f, std::size_t n, double fs, bool* off_comb) {
  const double record_bin_hz = fs / static_cast<double>(n);
  const auto on_comb = [&](double fc, double fc_err) {
    for (const auto& l : lines) {
      const double j = std::round(l.f / fc);
      if (j < 1 || std::abs(l.f - j * fc) > 0.6 * record_bin_hz + j * fc_err) return false;
    }
    return true;
  };
  // A sub-multiple needs evidence beyond "every line sits near one of its harmonics" (issue 12:
  // 997 Hz with 50 Hz hum locked on 997/20 = 49.85 Hz; two incommensurate tones on a common
  // sub-multiple): the lines other than the strongest must carry ≥ 1 % of the line power (a
  // tone with a −40 dB neighbour is a tone plus interference), and a comb of fewer than 5
  // lines must fill ≥ 1/4 of its harmonic positions up to the highest (two or three lines at
  // high harmonic numbers with every lower position empty are not one periodic signal).
  const auto comb_has_evidence = [&](double fc) {
    double total = 0, strongest = 0;
    std::vector<long> positions;
    for (const auto& l : lines) {
      total += l.power;
      strongest = std::max(strongest, l.power);
      positions.push_back(std::lround(l.f / fc));
    }
    if (total - strongest < 0.01 * total) return false;
    std::sort(positions.begin(), positions.end());
    positions.erase(std::unique(positions.begin(), positions.end()), positions.end());
    const long highest = positions.empty() ? 0 : positions.back();
    return lines.size() >= 5 || 4 * static_cast<long>(positions.size()) >= highest;
  };
  if (off_comb) *off_comb = !on_comb(f, 0.1 * record_bin_hz);
  if (lines.size() <= 1 || f * static_cast<double>(n) / fs < 2 * kShortRecordPeriods) return f;
  // A sub-multiple must span at least 8 record bins (8 periods in the record): narrower, any
  // set of lines lies "near" some multiple of it by chance, and short records' lines are
  // not resolved well enough to judge (use --f0-hint there).
  const int m_max = static_cast<int>(std::min(2000.0, f / (8 * record_bin_hz)));
  for (int m = 1; m <= m_max; ++m) {
    const double fc = f / m;
    const double fc_err = 0.1 * record_bin_hz / m;  // interpolation error of f, shared by 1/m
    if (on_comb(fc, fc_err) && (m == 1 || comb_has_evidence(fc))) {
      if (off_comb) *off_comb = false;
      return fc;
    }
  }
  return f;
}

/// `off_comb` (when given) is set when a significant spectral line is not a harmonic of the
/// returned frequency: evidence of a longer period than the comb could reach.
double coarse_frequency(std::span<const double> x, double fs, double hint_hz, bool* off_comb = nullptr) {
  if (off_comb) *off_comb = false;
  const std::size_t n = x.size();
  const PaddedSpectrum s = hann_power_spectrum(x, fs);
  std::size_t kmin = static_cast<std::size_t>(std::ceil(0.7 * s.record_bin));  // ≥ 0.7 periods
  std::size_t kmax = s.p.size() - 2;
  if (hint_hz > 0) {
    kmin = std::max<std::size_t>(kmin, static_cast<std::size_t>(std::floor(hint_hz / 1.2 / s.bin_hz)));
    kmax = std::min<std::size_t>(kmax, static_cast<std::size_t>(std::ceil(hint_hz * 1.2 / s.bin_hz)));
  }
  kmin = std::max<std::size_t>(kmin, 1);
  if (kmin > kmax)
    throw AnalysisError("cannot search for f0: the record (" + std::to_string(n) +
                        " samples) is too short for the frequency range asked for");
  std::size_t kp = kmin;
  for (std::size_t k = kmin; k <= kmax; ++k)
    if (s.p[k] > s.p[kp]) kp = k;
  double f = refined_hz(s, kp);
  if (hint_hz > 0) return f;
  const std::vector<Peak> lines = spectral_lines(s, kmin, kmax, kp, n, fs);
  // The strongest bin may be the top of a coloured-noise hump: the strongest line that stands
  // out of its local floor is the one to start from.
  if (!lines.empty()) f = lines.front().f;
  return comb_fundamental(lines, f, n, fs, off_comb);
}

void check_samples(std::span<const double> x) {
  for (std::size_t k = 0; k < x.size(); ++k)
    if (!std::isfinite(x[k]))
      throw AnalysisError("sample " + std::to_string(k) + " is not a finite number");
}

int harmonic_limit(double fs, double f0, double fraction) {
  return static_cast<int>(std::floor(fraction * fs / f0 * (1 - 1e-12)));
}

int choose_harmonics(const LockOptions& opt, double fs, double f0, std::size_t n) {
  if (opt.max_harmonic > 0) {
    const int h = opt.max_harmonic;
    if (h * f0 >= 0.5 * fs)
      throw AnalysisError("harmonic " + std::to_string(h) + " of f0 = " + str(f0) + " Hz lies at " +
                          str(h * f0) + " Hz, not below fs/2 = " + str(0.5 * fs) +
                          " Hz; ask for at most " +
                          std::to_string(std::max(1, harmonic_limit(fs, f0, 0.5))) + " harmonics");
    if (2 * static_cast<std::size_t>(h) + 3 > n)
      throw AnalysisError("the record's " + std::to_string(n) + " samples cannot fit " +
                          std::to_string(h) + " harmonics (2H + 3 samples are needed)");
    return h;
  }
  const int h = default_harmonic_count(fs, f0, n);
  if (h < 1)
    throw AnalysisError("f0 = " + str(f0) + " Hz has no harmonic below 0.45·fs = " +
                        str(kBandFraction * fs) + " Hz");
  return h;
}

/// Short records: the coarse search takes the strongest spectral line for the fundamental, and
/// its harmonic comb, which corrects that, needs 24 periods and reaches only sub-multiples that
/// keep 8 periods in the record (coarse_frequency). A flat multisine over a few periods then
/// locked on whichever harmonic leaked strongest. The sub-multiples the comb could not judge are
/// tried here: ν/m replaces the fitted ν when its harmonic model (H_m harmonics as chosen for
/// ν/m itself) explains the record better by the Bayesian information criterion (Schwarz 1978),
///   N·ln(RSS_ν / RSS_m) − (p_m − p_ν)·ln N  >  2·ln 64 + 20
/// (the margin allows for the search over m, as the detection threshold in fit_harmonics does),
/// and the extra explained energy is at least 1e-4 of the record's ac energy, so unmodelled slow
/// effects (drift, a partial last period) at high SNR do not pass for a longer period. The models
/// are not nested when H_m·ν/m < H·ν, which is why the criterion is BIC and not an F test: a
/// dense comb of m·H lines would fit a drifting sine's residual and win an F test.
/// The test runs only when the coarse spectrum holds a resolved line that is not a harmonic of
/// ν (`off_comb`): a chirp's smeared line made a dense comb at ν/44 (100 periods) or ν/13 (20
/// periods) win by BIC otherwise. Of the candidates that pass, the largest criterion wins. Candidates need ≥ 1.5 periods in the
/// record, m ≤ 64, and a bounded cost (Σ N·H_m ≤ 4e9). Returns `fit.nu` when none wins.
/// Evidence that ν/m is one periodic signal and not a common divisor of unrelated lines (issue
/// 12: two tones at 100 and 141.42 Hz locked 3.449 Hz, their 29th and 41st harmonics; a 100 Hz
/// tone with 3 Hz AM locked 3.03 Hz, its 32nd–34th): the harmonics of the candidate that stand
/// out of the noise must fill at least a quarter of the positions up to the highest of them,
/// the rule the coarse search's comb applies (coarse_frequency). Significant: amplitude² over
/// its white-noise variance 2σ²/N beyond the χ²(2) quantile at 0.01/H (Bonferroni over the H
/// harmonics; σ² = RSS/(N − 2H − 2)), and within −30 dB of the strongest: at high SNR an
/// unrelated line a fraction of a bin off a harmonic leaks significant power into its
/// neighbours at −40 dB and below, which would fill the comb.
constexpr double kCombLevel = 1e-3;
bool comb_filled(const Evaluation& e, int h, double rss, std::size_t n) {
  const double dof = static_cast<double>(n) - (2.0 * h + 2);
  if (!(dof > 0)) return false;
  const double var = 2 * (rss / dof) / static_cast<double>(n);
  const double threshold = 2 * std::log(100.0 * h);  // −2·ln(0.01/H): χ²(2) tail e^{−z²/2}
  double strongest = 0;
  for (int k = 1; k <= h; ++k) strongest = std::max(strongest, e.a(k) * e.a(k) + e.b(k - 1) * e.b(k - 1));
  int count = 0, highest = 0;
  for (int k = 1; k <= h; ++k) {
    const double amp2 = e.a(k) * e.a(k) + e.b(k - 1) * e.b(k - 1);
    if (amp2 >= kCombLevel * strongest && (var > 0 ? amp2 / var > threshold : amp2 > 0)) {
      ++count;
      highest = k;
    }
  }
  return highest > 0 && 4 * count >= highest;
}

double sub_multiple_fundamental(const SineFitter& fitter, const Evaluation& fit, int h, const LockOptions& opt,
                                double fs, bool off_comb) {
  const std::size_t n = fitter.size();
  const double periods = fit.nu * static_cast<double>(n) / kTwoPi;
  // A longer period needs a resolved line off f's comb (one line smeared by drift is not that);
  // in records of ≥ 24 periods the comb has judged the sub-multiples with ≥ 8 periods.
  if (!off_comb) return fit.nu;
  const bool short_record = periods < 2 * kShortRecordPeriods;
  const int m_min = short_record ? 2 : static_cast<int>(std::floor(periods / 8)) + 1;
  const int m_max = std::min(64, static_cast<int>(std::floor(periods / 1.5)));
  if (m_max < m_min) return fit.nu;
  const double dc = fit.a.size() > 0 ? fit.a[0] : 0;
  const double ac_energy = fitter.sum_sq() - static_cast<double>(n) * dc * dc;
  const double rss_base = fitter.sum_sq() - fit.projection;
  if (!(rss_base > 0)) return fit.nu;  // an exact fit: nothing left to explain
  const double log_n = std::log(static_cast<double>(n));
  const double margin = 2 * std::log(64.0) + 20;
  double best_score = margin, best_nu = fit.nu;
  double budget = 4e9;
  for (int m = m_min; m <= m_max; ++m) {
    const double nu_m = fit.nu / m;
    const int h_m = choose_harmonics(opt, fs, nu_m * fs / kTwoPi, n);
    budget -= static_cast<double>(n) * h_m;
    if (budget < 0) break;
    if (static_cast<std::size_t>(2 * h_m + 1) >= n) continue;
    const Evaluation e = fitter.evaluate(nu_m, h_m, false, false);
    if (!e.ok) continue;
    const double rss = fitter.sum_sq() - e.projection;
    if (!(rss > 0) || !(rss_base - rss > 1e-4 * ac_energy)) continue;
    const double score = static_cast<double>(n) * std::log(rss_base / rss) - 2.0 * (h_m - h) * log_n;
    if (score > best_score && comb_filled(e, h_m, rss, n)) {
      best_score = score;
      best_nu = nu_m;
    }
  }
  return best_nu;
}

HarmonicFit make_fit(const Evaluation& e, std::span<const double> x, double fs, double t0,
                     int h, bool forced) {
  HarmonicFit fit;
  fit.fs_hz = fs;
  fit.t0_s = t0;
  fit.samples = x.size();
  fit.tc_s = t0 + 0.5 * static_cast<double>(x.size() - 1) / fs;
  const auto H = static_cast<std::size_t>(h);
  fit.a.assign(H + 1, 0.0);
  fit.b.assign(H + 1, 0.0);
  for (std::size_t m = 0; m <= H; ++m) fit.a[m] = e.a(static_cast<Eigen::Index>(m));
  for (std::size_t m = 1; m <= H; ++m) fit.b[m] = e.b(static_cast<Eigen::Index>(m - 1));
  fit.unit_cov.assign(H + 1, {0, 0, 0, 0, 0, 0});
  if (e.inv_diag_c.size() == h + 1) {
    const bool freq = !forced && e.schur > 0;
    const double s = freq ? 1 / e.schur : 0;
    for (std::size_t m = 0; m <= H; ++m) {
      const auto mi = static_cast<Eigen::Index>(m);
      auto& c = fit.unit_cov[m];
      const double ga = freq ? e.ga(mi) : 0;
      const double gb = (freq && m > 0) ? e.gb(mi - 1) : 0;
      c[0] = e.inv_diag_c(mi) + ga * ga * s;
      c[1] = m > 0 ? e.inv_diag_s(mi - 1) + gb * gb * s : 0;
      c[2] = s;
      c[3] = ga * gb * s;
      c[4] = -ga * s;
      c[5] = -gb * s;
    }
  }
  return fit;
}

/// With a forced f0: the linear least squares at that f0, no search.
HarmonicFit forced_fit(const SineFitter& fitter, std::span<const double> x, double fs, double t0,
                       const LockOptions& opt) {
  const std::size_t n = x.size();
  if (opt.f0_hz >= 0.5 * fs)
    throw AnalysisError("f0 = " + str(opt.f0_hz) + " Hz is not below fs/2 = " + str(0.5 * fs) + " Hz");
  const int h = choose_harmonics(opt, fs, opt.f0_hz, n);
  const double nu = kTwoPi * opt.f0_hz / fs;
  Evaluation e = fitter.evaluate(nu, h, false, true);
  if (!e.ok) throw AnalysisError("the harmonic fit at f0 = " + str(opt.f0_hz) + " Hz is singular");
  HarmonicFit fit = make_fit(e, x, fs, t0, h, true);
  fit.fundamental.f0_hz = opt.f0_hz;
  fit.fundamental.method = F0Method::forced;
  fit.fundamental.converged = true;
  fit.fundamental.harmonics_fitted = h;
  fit.fundamental.condition = e.condition;
  fit.fundamental.dof = static_cast<int>(n) - (2 * h + 1);
  fit.residual.resize(n);
  fit.residual_ss = residual_pass(x.data(), n, nu, h, fit.a.data(), fit.b.data(), fit.residual.data());
  fit.sigma2 = fit.residual_ss / fit.fundamental.dof;
  fit.fundamental.residual_rms = std::sqrt(fit.residual_ss / static_cast<double>(n));
  return fit;
}

/// Where the search starts, in Hz: the given start, else the coarse spectral estimate. A long
/// record is first located on a prefix (cheap) with a 3-harmonic fit, whose f0 is then well
/// inside the full record's capture range; the whole record is searched when the prefix holds too
/// few periods. `off_comb` as coarse_frequency's.
double start_frequency(std::span<const double> x, double fs, const LockOptions& opt, bool given_start,
                       bool& off_comb) {
  if (given_start) return opt.f0_start_hz;
  if (x.size() <= 2 * kPrefixSamples) return coarse_frequency(x, fs, opt.f0_hint_hz, &off_comb);
  double f = 0;
  const auto prefix = x.first(kPrefixSamples);
  try {
    const double fp = coarse_frequency(prefix, fs, opt.f0_hint_hz, &off_comb);
    if (fp * static_cast<double>(kPrefixSamples) / fs >= kShortRecordPeriods) {
      const SineFitter pf(prefix);
      const int hp = std::max(1, std::min(3, harmonic_limit(fs, fp, 0.49)));
      const GaussNewton gp = gauss_newton(pf, kTwoPi * fp / fs, hp, opt,
                                          0.25 * kTwoPi / static_cast<double>(kPrefixSamples), false);
      if (gp.last.ok) f = gp.last.nu * fs / kTwoPi;
    }
  } catch (const AnalysisError&) {
    f = 0;
  }
  if (f <= 0) f = coarse_frequency(x, fs, opt.f0_hint_hz, &off_comb);
  return f;
}

/// Short records: grid search of the h_search-harmonic criterion, ±0.6 record bins around nu.
double grid_search(const SineFitter& fitter, double nu, int h_search, double record_bin_nu) {
  double best_nu = nu, best = -1;
  for (int i = -30; i <= 30; ++i) {
    const double cand = nu + i * 0.02 * record_bin_nu;
    if (cand < 0.7 * record_bin_nu) continue;
    if (h_search * cand >= kPi) continue;
    const Evaluation e = fitter.evaluate(cand, h_search, false, false);
    if (e.ok && e.projection > best) {
      best = e.projection;
      best_nu = cand;
    }
  }
  return best_nu;
}

/// The Gauss–Newton stages of fit_harmonics: where they are (nu), the last one's result, the
/// final H and the iterations spent.
struct Stages {
  double nu = 0;
  GaussNewton g;
  int h_final = 0;
  int iterations = 0;
  bool given_start = false;
  bool long_record = false;  ///< skips the middle stages
};

/// Stages of increasing H: each stage's f0 lies within the next one's capture range (about
/// ±0.5/H record bins). `all_stages` false runs the final stage only.
void refine_stages(Stages& s, const SineFitter& fitter, const LockOptions& opt, double fs, bool all_stages) {
  const std::size_t n = fitter.size();
  const double record_bin_nu = kTwoPi / static_cast<double>(n);  // one DFT bin in rad/sample
  for (int stage : {3, 10, 30, 0}) {
    const double f_now = s.nu * fs / kTwoPi;
    s.h_final = choose_harmonics(opt, fs, f_now, n);
    const int h = stage == 0 ? s.h_final : std::min(stage, s.h_final);
    if (stage != 0 && (h == s.h_final || !all_stages)) continue;  // this stage is the final one: skip
    if (s.long_record && (stage == 10 || stage == 30)) continue;
    // A given start is already within the final stage's capture range (±0.5/H bins): it is
    // the converged f0 of a fit of the same record (lock_channel, the baseline refit).
    if (s.given_start && stage != 0) continue;
    const double max_step = 0.25 * record_bin_nu;
    s.g = gauss_newton(fitter, s.nu, h, opt, max_step, stage == 0);
    s.iterations += s.g.iterations;
    if (!s.g.last.ok) throw AnalysisError("the harmonic fit near f0 = " + str(f_now) + " Hz is singular");
    s.nu = s.g.last.nu;
  }
}

/// The fit at the converged ν: linear parameters, residual, σ² and u(f0).
HarmonicFit estimated_fit(const Stages& s, std::span<const double> x, double fs, double t0) {
  const std::size_t n = x.size();
  const Evaluation& e = s.g.last;
  HarmonicFit fit = make_fit(e, x, fs, t0, static_cast<int>(e.a.size()) - 1, false);
  const int hf = fit.harmonics();
  fit.fundamental.f0_hz = e.nu * fs / kTwoPi;
  fit.fundamental.method = F0Method::sine_fit;
  fit.fundamental.iterations = s.iterations;
  fit.fundamental.converged = s.g.converged;
  fit.fundamental.harmonics_fitted = hf;
  fit.fundamental.condition = e.condition;
  fit.fundamental.dof = static_cast<int>(n) - (2 * hf + 2);
  fit.residual.resize(n);
  fit.residual_ss = residual_pass(x.data(), n, e.nu, hf, fit.a.data(), fit.b.data(), fit.residual.data());
  fit.sigma2 = fit.residual_ss / fit.fundamental.dof;
  fit.fundamental.residual_rms = std::sqrt(fit.residual_ss / static_cast<double>(n));
  fit.fundamental.f0_u_hz = e.schur > 0 ? std::sqrt(fit.sigma2 / e.schur) * fs / kTwoPi : 0;
  return fit;
}

/// Does the fundamental stand out of the noise? Under noise alone A1²/(σ²·(u_aa+u_bb)/2) is
/// χ²(2)-distributed; the threshold allows for the search over ~N candidate frequencies
/// (false-alarm probability ≈ e^{-10}).
/// The strongest harmonic decides (a multisine need not contain its fundamental); the
/// threshold also allows for taking the best of H. Throws AnalysisError when it does not.
void require_periodic_component(const HarmonicFit& fit) {
  const int hf = fit.harmonics();
  std::size_t best = 1;
  double best_z2 = -1;
  for (std::size_t m = 1; m <= static_cast<std::size_t>(hf); ++m) {
    const double amp2 = fit.a[m] * fit.a[m] + fit.b[m] * fit.b[m];
    const double var = fit.sigma2 * 0.5 * (fit.unit_cov[m][0] + fit.unit_cov[m][1]);
    const double z2 = var > 0 ? amp2 / var : (amp2 > 0 ? std::numeric_limits<double>::infinity() : 0);
    if (z2 > best_z2) {
      best_z2 = z2;
      best = m;
    }
  }
  const double a1sq = fit.a[best] * fit.a[best] + fit.b[best] * fit.b[best];
  const double var1 = fit.sigma2 * 0.5 * (fit.unit_cov[best][0] + fit.unit_cov[best][1]);
  const double threshold =
      2 * std::log(static_cast<double>(fit.samples)) + 2 * std::log(static_cast<double>(hf)) + 20;
  if (a1sq == 0 || (var1 > 0 && a1sq / var1 < threshold)) {
    const double z = var1 > 0 ? std::sqrt(a1sq / var1) : 0;
    throw AnalysisError("no periodic component stands out of the noise: the strongest candidate, " +
                        format_significant(fit.fundamental.f0_hz, 6) + " Hz, has an amplitude of only " +
                        format_significant(z, 3) + " standard uncertainties (needs " +
                        format_significant(std::sqrt(threshold), 3) + ")");
  }
}

}  // namespace

bool internal::force_kernel_for_testing(const std::string& name) {
  __builtin_cpu_init();
  if (name.empty()) {
    forced_isa = -1;
    return true;
  }
  if (name == "base") {
    forced_isa = static_cast<int>(Isa::base);
    return true;
  }
  if (name == "avx2" && __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma")) {
    forced_isa = static_cast<int>(Isa::avx2);
    return true;
  }
  if (name == "avx512" && __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512dq") &&
      __builtin_cpu_supports("avx512vl") && __builtin_cpu_supports("avx512bw")) {
    forced_isa = static_cast<int>(Isa::avx512);
    return true;
  }
  return false;
}

// ---- public --------------------------------------------------------------------------------

void validate(const LockOptions& o) {
  if (!std::isfinite(o.f0_hint_hz) || o.f0_hint_hz < 0)
    throw OptionError("f0_hint_hz", str(o.f0_hint_hz), "must be >= 0; 0 = estimate");
  if (!std::isfinite(o.f0_hz) || o.f0_hz < 0)
    throw OptionError("f0_hz", str(o.f0_hz), "must be >= 0; 0 = estimate");
  if (o.max_harmonic < 0 || o.max_harmonic > kMaxHarmonic)
    throw OptionError("max_harmonic", std::to_string(o.max_harmonic),
                      "must be between 0 (automatic) and " + std::to_string(kMaxHarmonic) +
                          " (fit time grows as H³; dsp/period_lock.hpp)");
  if (!(o.rel_tolerance > 0 && o.rel_tolerance <= 1e-3))
    throw OptionError("rel_tolerance", str(o.rel_tolerance), "must be > 0 and <= 1e-3");
  if (!std::isfinite(o.f0_start_hz) || o.f0_start_hz < 0)
    throw OptionError("f0_start_hz", str(o.f0_start_hz), "must be >= 0; 0 = search");
  if (o.max_iterations < 1)
    throw OptionError("max_iterations", std::to_string(o.max_iterations), "must be >= 1");
}

std::complex<double> HarmonicFit::phasor(int n) const {
  const auto i = static_cast<std::size_t>(n);
  if (n == 0) return {a[0], 0};
  // n·f0·t_c in cycles, reduced before multiplying by 2π to keep the phase exact.
  const double cycles = n * fundamental.f0_hz * tc_s;
  const double frac = cycles - std::floor(cycles);
  return std::complex<double>(a[i], -b[i]) * std::polar(1.0, -kTwoPi * frac);
}

int band_limit_harmonics(double fs_hz, double f0_hz) {
  if (!(fs_hz > 0) || !(f0_hz > 0)) return 0;
  return std::max(0, harmonic_limit(fs_hz, f0_hz, kBandFraction));
}

int default_harmonic_count(double fs_hz, double f0_hz, std::size_t samples) {
  int h = std::min(kDefaultMaxHarmonic, harmonic_limit(fs_hz, f0_hz, kBandFraction));
  const int by_samples = static_cast<int>((samples / 2 - 2) / 2);  // 2H + 2 ≤ N/2
  return std::max(0, std::min(h, by_samples));
}

HarmonicFit fit_harmonics(std::span<const double> x, double fs, double t0, const LockOptions& opt) {
  validate(opt);
  if (!(fs > 0 && std::isfinite(fs))) throw OptionError("sample_rate_hz", str(fs), "must be > 0");
  const std::size_t n = x.size();
  if (n < 8)
    throw AnalysisError("the record has " + std::to_string(n) +
                        " samples; at least 8 are needed to find a fundamental");
  check_samples(x);
  const SineFitter fitter(x);
  if (opt.f0_hz > 0) return forced_fit(fitter, x, fs, t0, opt);
  const auto [mn, mx] = std::minmax_element(x.begin(), x.end());
  if (*mn == *mx) throw AnalysisError("no periodic component: every sample equals " + str(*mn) + " (dc only)");
  Stages s;
  s.given_start = opt.f0_start_hz > 0 && opt.f0_start_hz < 0.5 * fs;
  bool off_comb = false;
  const double f = start_frequency(x, fs, opt, s.given_start, off_comb);
  s.nu = kTwoPi * f / fs;
  const int h_search = std::max(1, std::min(3, harmonic_limit(fs, f, 0.49)));
  if (!s.given_start && f * static_cast<double>(n) / fs < kShortRecordPeriods)
    s.nu = grid_search(fitter, s.nu, h_search, kTwoPi / static_cast<double>(n));
  // Long records skip the middle stages: unmodelled harmonics then bias the 3-harmonic f0 by
  // far less than the final stage's capture range.
  s.long_record = f * static_cast<double>(n) / fs >= kLongRecordPeriods;
  refine_stages(s, fitter, opt, fs, true);
  if (!s.given_start && opt.f0_hint_hz <= 0) {
    // The sub-multiple found here is exact to the fit's precision, so one final stage from it
    // suffices.
    const double nu_sub = sub_multiple_fundamental(fitter, s.g.last, s.h_final, opt, fs, off_comb);
    if (nu_sub != s.g.last.nu) {
      s.nu = nu_sub;
      refine_stages(s, fitter, opt, fs, false);
    }
  }
  HarmonicFit fit = estimated_fit(s, x, fs, t0);
  require_periodic_component(fit);
  return fit;
}

Fundamental estimate_fundamental(std::span<const double> x, double fs_hz, const LockOptions& options) {
  return fit_harmonics(x, fs_hz, 0.0, options).fundamental;
}

std::vector<double> fit_residual(std::span<const double> x, const HarmonicFit& fit) {
  std::vector<double> r(x.size());
  const double nu = kTwoPi * fit.fundamental.f0_hz / fit.fs_hz;
  residual_pass(x.data(), x.size(), nu, fit.harmonics(), fit.a.data(), fit.b.data(), r.data());
  return r;
}

int default_samples_per_period(double fs_hz, double f0_hz, int max_harmonic) {
  const double ratio = fs_hz / f0_hz;
  const double nearest = std::round(ratio);
  int m = 0;
  if (std::abs(ratio - nearest) <= 1e-9 * ratio)
    m = static_cast<int>(nearest);
  else
    m = fft_friendly_size(static_cast<int>(std::ceil(ratio)));
  return std::max(m, fft_friendly_size(2 * max_harmonic + 2));
}


PeriodGrid resample_to_periods(std::span<const double> x, double fs_hz, double t0_s, double f0_hz,
                               int samples_per_period) {
  if (!(fs_hz > 0 && std::isfinite(fs_hz))) throw OptionError("sample_rate_hz", str(fs_hz), "must be > 0");
  if (!(f0_hz > 0 && f0_hz < 0.5 * fs_hz))
    throw OptionError("f0_hz", str(f0_hz), "must be > 0 and below fs/2 = " + str(0.5 * fs_hz));
  if (samples_per_period < 2)
    throw OptionError("samples_per_period", std::to_string(samples_per_period), "must be >= 2");
  const std::size_t n = x.size();
  int h = std::min({harmonic_limit(fs_hz, f0_hz, kBandFraction), (samples_per_period - 1) / 2,
                    kResampleMaxHarmonic, static_cast<int>(n / 2) - 2});
  h = std::max(h, 0);
  LockOptions opt;
  opt.f0_hz = f0_hz;
  HarmonicFit fit;
  if (h >= 1) {
    check_samples(x);
    const SineFitter fitter(x);
    const Evaluation e = fitter.evaluate(kTwoPi * f0_hz / fs_hz, h, false, false);
    if (!e.ok) throw AnalysisError("the harmonic fit at f0 = " + str(f0_hz) + " Hz is singular");
    fit = make_fit(e, x, fs_hz, t0_s, h, true);
  } else {
    fit.fs_hz = fs_hz;
    fit.t0_s = t0_s;
    fit.tc_s = t0_s + 0.5 * static_cast<double>(n - 1) / fs_hz;
    fit.a = {0.0};
    fit.b = {0.0};
  }
  fit.fundamental.f0_hz = f0_hz;
  return resample_fitted(fit_residual(x, fit), fit, samples_per_period);
}

}  // namespace periodfit::dsp
