#pragma once
/// `periodfit info`'s view of a capture: io::describe (layout, clock, per-channel statistics)
/// plus each channel's fundamental, so the record's length can be stated in periods — the
/// figure that decides whether analyze can give a per-period variance (≥ 4 whole periods,
/// docs/robustness.md "Numerical honesty").
///
/// The fundamental is dsp::estimate_fundamental with its defaults (the coarse FFT peak, then the
/// multi-harmonic sine fit; period_lock.hpp). A channel with no periodic component gets no f0
/// and the reason, never a guess.
#include "core/capture.hpp"
#include "io/info.hpp"

namespace periodfit::dsp {

io::CaptureInfo survey_capture(const Capture& capture);

}  // namespace periodfit::dsp
