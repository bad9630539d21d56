#pragma once
/// The plots of analysis results, shared by `batch` (inline in report.html) and by the single
/// commands' `--plot FILE.svg`: a Bode plot of an identify result (measured points with their
/// 95 % intervals and the fitted model's curve), harmonic spectra as dB bars, and one period of
/// a measured waveform with its reconstruction from the harmonics.
///
/// Usage (identify --plot, analyze --plot):
///   const auto r = ident::identify(capture, options);
///   io::write_file_atomic(plot_path, report::svg_document(report::identify_bode_figure(r)));
///   const auto a = dsp::analyze_capture(capture, channels, options);
///   io::write_file_atomic(plot_path, report::svg_document(report::analyze_spectra_figure(a)));
#include <complex>
#include <string>
#include <utility>
#include <vector>

#include "core/capture.hpp"
#include "dsp/capture_analysis.hpp"
#include "dsp/harmonics.hpp"
#include "ident/identify.hpp"
#include "report/svg_plot.hpp"

namespace periodfit::report {

/// Bode magnitude and phase of `result.frf` with 95 % intervals and, when a model was fitted,
/// its curve. `title` "" = "Bode: <input> → <output>".
Figure identify_bode_figure(const ident::IdentifyResult& result, const std::string& title = "");

/// Output harmonic amplitudes: the excited harmonics and the distortion lines the linearity
/// check found, with the output noise floor.
Figure identify_spectrum_figure(const ident::IdentifyResult& result, const std::string& title = "");

/// One harmonic of a reconstruction: A·cos(n·ω0·t + φ) as the phasor A·e^{jφ}.
struct HarmonicPhasor {
  int n = 0;
  std::complex<double> phasor;
};

/// The first whole period of `channel` (raw samples, t from the period's start) and the
/// reconstruction dc + Σ |X_n|·cos(n·2π·f0·t + ∠X_n) evaluated in file time (t = 0 is the
/// file's origin, Capture::t0_s the time of sample 0).
Figure waveform_period_figure(const Capture& capture, const Channel& channel, double f0_hz,
                              double dc, const std::vector<HarmonicPhasor>& harmonics,
                              const std::string& title, const std::string& fit_label);

/// Bode, output spectrum and output waveform of an identify result on `capture`.
std::vector<Figure> identify_figures(const Capture& capture, const ident::IdentifyResult& result);

/// Harmonic amplitudes of one analysed channel as dB bars, with its noise floor.
Figure analyze_spectrum_figure(const dsp::ChannelAnalysis& channel, const std::string& title = "");

/// The spectra of every analysed channel of `report`, one panel per channel (for
/// `analyze --plot FILE.svg`).
Figure analyze_spectra_figure(const dsp::AnalyzeReport& report);

/// One period of an analysed channel of `capture` and its reconstruction from dc and the
/// harmonics.
Figure analyze_waveform_figure(const Capture& capture, const dsp::ChannelAnalysis& channel,
                               const std::string& title = "");

/// Mean of the samples over the whole periods of f0 from the first sample (the dc of the
/// periodic part, without the partial period's bias).
double whole_period_mean(const Channel& channel, double sample_rate_hz, double f0_hz);

}  // namespace periodfit::report
