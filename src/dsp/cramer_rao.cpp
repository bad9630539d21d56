// Exact multi-harmonic Cramér–Rao bound (see cramer_rao.hpp).
#include "dsp/cramer_rao.hpp"

#include <Eigen/Dense>
#include <cmath>
#include <numbers>
#include <string>

#include "core/error.hpp"

namespace periodfit::dsp {

HarmonicBound multi_harmonic_crb(const HarmonicTruth& truth) {
  const auto h = static_cast<Eigen::Index>(truth.phasors.size());
  const Eigen::Index params = 1 + 2 * h + (truth.f0_known ? 0 : 1);
  const auto rows = static_cast<Eigen::Index>(truth.samples);
  if (rows <= params)
    throw AnalysisError("the bound needs more samples (" + std::to_string(truth.samples) + ") than parameters (" +
                        std::to_string(params) + ")");
  const double omega = 2 * std::numbers::pi * truth.f0_hz;
  Eigen::MatrixXd j(rows, params);
  for (Eigen::Index k = 0; k < rows; ++k) {
    const double t = truth.t0_s + static_cast<double>(k) / truth.fs_hz;
    j(k, 0) = 1;
    double dw = 0;
    for (Eigen::Index n = 1; n <= h; ++n) {
      const std::complex<double> x = truth.phasors[static_cast<std::size_t>(n - 1)];
      const double a = x.real(), b = -x.imag();
      const double c = std::cos(static_cast<double>(n) * omega * t), s = std::sin(static_cast<double>(n) * omega * t);
      j(k, n) = c;
      j(k, h + n) = s;
      dw += static_cast<double>(n) * t * (-a * s + b * c);
    }
    if (!truth.f0_known) j(k, params - 1) = dw;
  }
  // Column scaling keeps the ω column (∝ t·A) on the others' scale; QR of the scaled J gives
  // (JᵀJ)⁻¹ = D·R⁻¹·R⁻ᵀ·D without forming JᵀJ.
  Eigen::VectorXd scale(params);
  for (Eigen::Index c = 0; c < params; ++c) {
    const double norm = j.col(c).norm();
    if (!(norm > 0)) throw AnalysisError("the model is not identifiable (a parameter has no effect on the samples)");
    scale(c) = 1 / norm;
    j.col(c) *= scale(c);
  }
  const Eigen::HouseholderQR<Eigen::MatrixXd> qr(j);
  const Eigen::MatrixXd r = qr.matrixQR().topRows(params).triangularView<Eigen::Upper>();
  const Eigen::MatrixXd rinv =
      r.triangularView<Eigen::Upper>().solve(Eigen::MatrixXd::Identity(params, params));
  Eigen::MatrixXd cov = rinv * rinv.transpose();
  cov = scale.asDiagonal() * cov * scale.asDiagonal();
  cov *= truth.noise_sigma * truth.noise_sigma;

  HarmonicBound out;
  out.dc_var = cov(0, 0);
  if (!truth.f0_known) out.f0_var_hz2 = cov(params - 1, params - 1) / std::pow(2 * std::numbers::pi, 2);
  for (Eigen::Index n = 1; n <= h; ++n) {
    const std::complex<double> x = truth.phasors[static_cast<std::size_t>(n - 1)];
    const double a = x.real(), b = -x.imag(), amp2 = std::norm(x), amp = std::sqrt(amp2);
    const double caa = cov(n, n), cbb = cov(h + n, h + n), cab = cov(n, h + n);
    const double ga = amp > 0 ? a / amp : 1, gb = amp > 0 ? b / amp : 0;
    out.amplitude_var.push_back(ga * ga * caa + 2 * ga * gb * cab + gb * gb * cbb);
    const double pa = amp2 > 0 ? b / amp2 : 0, pb = amp2 > 0 ? -a / amp2 : 0;
    out.phase_var_rad2.push_back(pa * pa * caa + 2 * pa * pb * cab + pb * pb * cbb);
  }
  return out;
}

}  // namespace periodfit::dsp
