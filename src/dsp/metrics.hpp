#pragma once
/// Distortion and noise figures of a periodic waveform from its harmonic amplitudes and its
/// noise power, as defined in IEEE Std 1241-2010 (ADC terminology and test methods: SINAD,
/// ENOB, SNR, THD) and written out in docs/methods.md:
///
///   thd    = √(Σ_{n=2..H} A_n²) / A_1                       (ratio, relative to the fundamental)
///   thd_r  = √(Σ_{n=2..H} A_n²) / √(Σ_{n=1..H} A_n²)        (relative to the total harmonic RMS)
///   thd_n  = √(Σ_{n=2..H} A_n²/2 + P_r) / (A_1/√2)          P_r: residual mean square, i.e.
///            everything but dc and harmonics 1…H, up to fs/2, as measured on the record
///   sinad  = −20·log10(thd_n)  dB
///   snr    = 10·log10((A_1²/2) / P_n) dB                    P_n: noise power (unbiased),
///            everything but dc and harmonics 1…H
///   enob   = log2(FSR / (√12 · NAD))  bits                  IEEE Std 1241-2010 §9.3, with
///            NAD = √(Σ_{n=2..H} A_n²/2 + P_r) the rms noise and distortion and FSR the
///            converter's full-scale range (max − min code level, in the channel's unit).
///            Unlike (SINAD − 1.76)/6.02, which 1241 gives only for a full-scale sine, this
///            form holds for a sine at any level (an ideal 12-bit sine at −6 dBFS: 12 bits).
///            Without a full-scale range ENOB is not defined: enob_bits is NaN.
///
/// Noise bias of THD (issue 12): a harmonic estimate Â_n carries the noise in its bin, E[Â_n²] =
/// A_n² + v_n with v_n = E|ΔX_n|² its phasor's noise power, so Σ Â_n² sums the noise of H − 1
/// bins and a THD below the noise floor reads high (0.01 % as 0.023 %). Given v_n, THD and
/// THD_R use the bias-corrected sum D = Σ_{n≥2} (Â_n² − v_n), floored at 0 (the expected noise
/// power subtracted per harmonic bin, as IEEE Std 1241-2010 treats the noise in SNR; the
/// per-bin form is common practice). D's standard uncertainty is
/// u(D)² = Σ (2·v_n·max(Â_n² − v_n, 0) + v_n²) (variance of |X|² for a circular complex normal
/// X); THD is "above noise" when D ≥ 2·u(D), and thd_upper is always the one-sided 95 % bound
/// √(max(D, 0) + 1.645·u(D))/A_1 (normal approximation).
///
/// A_n are peak amplitudes. When A_1 = 0 the ratios are undefined: they are returned as
/// +infinity (thd, thd_n) / −infinity dB, and callers report them as "undefined", never as a
/// number.
#include <span>

namespace periodfit::dsp {

struct DistortionFigures {
  double thd = 0;        ///< ratio, not %
  double thd_r = 0;      ///< ratio
  double thd_n = 0;      ///< ratio
  double sinad_db = 0;
  double snr_db = 0;
  double enob_bits = 0;  ///< NaN when no full-scale range was given
  double nad_rms = 0;    ///< rms noise and distortion √(Σ_{n≥2} A_n²/2 + P_r), channel unit
  /// false when the harmonics n ≥ 2 are not above the noise in their bins (THD is then best
  /// given as "< thd_upper"); true when no noise powers were given (no correction made)
  bool thd_above_noise = true;
  double thd_upper = 0;  ///< one-sided 95 % upper bound of THD (= thd without noise powers)
  bool thd_noise_corrected = false;  ///< the noise bias was subtracted (noise powers given)
};

/// `amplitudes[n]` is the peak amplitude of harmonic n (index 0, the dc, is ignored);
/// `residual_power` is P_r and `noise_power` is P_n above (both in unit², mean squares).
/// `full_scale_range` > 0 is FSR (enob_bits per IEEE 1241 §9.3); 0 = unknown (enob_bits NaN).
/// `harmonic_noise_power[n]` (optional, same indexing) is v_n = E|ΔX_n|² for the THD noise bias.
DistortionFigures distortion_figures(std::span<const double> amplitudes, double residual_power,
                                     double noise_power, double full_scale_range = 0,
                                     std::span<const double> harmonic_noise_power = {});

/// ENOB = log2(FSR / (√12·nad_rms)), IEEE Std 1241-2010 §9.3; NaN when FSR ≤ 0 or nad_rms ≤ 0
/// is not positive and finite.
double enob_from_full_scale(double full_scale_range, double nad_rms);

/// Crest factor: peak |x| over RMS (√2 for a sine, 1 for a square wave, √3 for a triangle).
double crest_factor(double peak_abs, double rms);

}  // namespace periodfit::dsp
