#pragma once
/// Forward real-to-complex DFTs through FFTW, with one plan per length made once and shared.
///
/// Planning is the only part of FFTW that is not thread-safe; plans are made under a mutex
/// (and FFTW's own planner is switched to its thread-safe mode once, so other FFTW users in the
/// process are safe too). Executing a plan on new arrays (fftw_execute_dft_r2c) is thread-safe,
/// so any number of threads may transform concurrently. Plans use FFTW_ESTIMATE: measuring
/// a 10-million-point plan would cost more than the transforms it speeds up.
///
/// Convention: out[k] = Σ_j in[j]·e^{−2πi·jk/n}, k = 0…n/2 (unnormalised).
///
///   std::vector<std::complex<double>> X(x.size() / 2 + 1);
///   dsp::real_dft(x, X);
#include <complex>
#include <cstddef>
#include <span>

namespace periodfit::dsp {

/// Transforms `in` (length n ≥ 1) into `out` (length n/2 + 1). Inputs that are not aligned
/// for FFTW's SIMD code are copied to an aligned scratch buffer first.
void real_dft(std::span<const double> in, std::span<std::complex<double>> out);

/// Smallest integer ≥ `at_least` whose prime factors are all ≤ 7 (fast FFT lengths).
int fft_friendly_size(int at_least);

}  // namespace periodfit::dsp
