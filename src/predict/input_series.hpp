#pragma once
/// The input of a steady-state prediction as a Fourier series: a harmonic term typed on the
/// command line, or the analysed harmonics of a captured channel (predict/superposition.hpp
/// passes either through the system).
#include <complex>
#include <string_view>
#include <vector>

#include "dsp/harmonics.hpp"
#include "dsp/waveforms.hpp"
#include "predict/superposition.hpp"

namespace periodfit::predict {

/// Parses one `n:amp:phase_deg` term (the --harmonic option). Throws OptionError.
dsp::HarmonicTerm parse_harmonic_term(std::string_view text);

/// The series of a capture channel's analysed harmonics (dsp/harmonics.hpp): dc, then
/// A_n·e^{jφ_n} for n = 1…H; method "measured", left-out fraction unknown (NaN).
dsp::SeriesTruncation series_from_measurement(double f0_hz, double dc,
                                              const std::vector<std::complex<double>>& phasors);

/// A measured input: a channel's analysed harmonics as the series, with the analysis' own
/// uncertainties (each harmonic's 2×2 covariance and the dc's u) to propagate through the
/// system (JCGM 100 §5.1.2). The steady-state command's --input-file and the Python module's
/// steady_state(input=…) both use it.
struct MeasuredInput {
  dsp::SeriesTruncation series;
  InputUncertainty u;
};
MeasuredInput measured_input(const dsp::ChannelAnalysis& analysis);

}  // namespace periodfit::predict
