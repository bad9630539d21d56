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
};

/// `amplitudes[n]` is the peak amplitude of harmonic n (index 0, the dc, is ignored);
/// `residual_power` is P_r and `noise_power` is P_n above (both in unit², mean squares).
/// `full_scale_range` > 0 is FSR (enob_bits per IEEE 1241 §9.3); 0 = unknown (enob_bits NaN).
DistortionFigures distortion_figures(std::span<const double> amplitudes, double residual_power,
                                     double noise_power, double full_scale_range = 0);

/// ENOB = log2(FSR / (√12·nad_rms)), IEEE Std 1241-2010 §9.3; NaN when FSR ≤ 0 or nad_rms ≤ 0
/// is not positive and finite.
double enob_from_full_scale(double full_scale_range, double nad_rms);

/// Crest factor: peak |x| over RMS (√2 for a sine, 1 for a square wave, √3 for a triangle).
double crest_factor(double peak_abs, double rms);

}  // namespace periodfit::dsp
