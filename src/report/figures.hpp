#pragma once
/// The report's standard figures — Bode (magnitude and phase with 95 % intervals and a model
/// curve), harmonic spectrum bars, one period of a waveform with its reconstruction — laid out
/// as svg_plot Figures (panels, axes, series); svg_plot.hpp renders them.
#include <complex>
#include <cstddef>
#include <functional>
#include <string>
#include <vector>

#include "report/svg_plot.hpp"

namespace periodfit::report {

/// A measured frequency response with 95 % intervals, and optionally a model to overlay.
struct BodePlotData {
  std::string id = "bode";
  std::string title;
  std::vector<double> freq_hz;        ///< measured frequencies (excited harmonics)
  std::vector<double> mag;            ///< |H| (linear, output unit per input unit)
  std::vector<double> mag_u95;        ///< half-width of the 95 % interval of |H|; empty = none
  std::vector<double> phase_deg;      ///< ∠H in degrees (wrapped or not; unwrapped for display)
  std::vector<double> phase_u95_deg;  ///< half-width of the 95 % interval of ∠H; empty = none
  /// H(j2πf) of a fitted model, sampled densely over the plotted range; empty = no model curve.
  std::function<std::complex<double>(double f_hz)> model;
  std::string measured_label = "measured, 95 % interval";
  std::string model_label = "fitted model";
};

/// Magnitude (dB) and phase (°) panels over a log frequency axis.
Figure bode_figure(const BodePlotData& data);

/// Harmonic amplitudes of one channel.
struct SpectrumPlotData {
  std::string id = "spectrum";
  std::string title;
  std::string unit;                ///< channel unit ("V"); the y axis reads "dB re 1 V"
  std::vector<int> harmonic;       ///< harmonic numbers (0 = dc allowed)
  std::vector<double> amplitude;   ///< peak amplitudes, same length
  std::vector<double> noise_floor; ///< per harmonic, amplitude-equivalent noise; empty = none
  double range_db = 120;           ///< dB shown below the largest bar
};

/// Bars of 20·log10(A_n / 1 unit) against harmonic number.
Figure spectrum_figure(const SpectrumPlotData& data);

/// One period of a measured waveform and its harmonic reconstruction.
struct WaveformPlotData {
  std::string id = "waveform";
  std::string title;
  std::string quantity = "signal";  ///< y axis name, e.g. the channel name
  std::string unit;                 ///< y axis unit
  std::vector<double> t_s, y;       ///< measured samples, t within one period from its start
  std::vector<double> fit_t_s, fit_y;  ///< reconstruction from the harmonics
  std::string measured_label = "measured";
  std::string fit_label = "reconstruction";
  std::size_t max_markers = 240;    ///< measured samples beyond this are thinned evenly
};

Figure waveform_figure(const WaveformPlotData& data);

}  // namespace periodfit::report
