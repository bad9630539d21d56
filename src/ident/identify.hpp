#pragma once
/// Identifying a DUT from a capture of its input and output under periodic excitation: lock
/// both channels on the input's fundamental and one period grid, FRF with uncertainty at the
/// excited harmonics (ident/frf.hpp), linearity check at the others (ident/linearity.hpp), and,
/// when an order is asked for, the rational model B(s)/A(s)·e^{−sT} (ident/rational_fit.hpp).
///
/// Channels. Either one capture holding both channels, or two captures recorded on a common
/// time base (same sample clock, and t = 0 of both files the same instant, e.g. one trigger):
/// their sample rates and lengths must be equal; each keeps its own t0_s, and phasors refer to
/// t = 0, so a time column that starts later in one file is accounted for. The fundamental is estimated on the input channel (or forced with f0_hz) and both
/// channels are resampled with the same (rate, start, f0, samples per period), so their periods
/// coincide sample for sample.
///
/// Deskew. skew_s is the extra delay of the output's acquisition path relative to the input's
/// (a probe, a cable, an ADC pipeline): the recorded output is y(t − skew). It is removed as the
/// phase correction Y_n·e^{+j·n·ω0·skew} on the output phasors (FrfOptions::skew_s), which is
/// exact for a band-limited periodic signal and costs nothing, rather than by resampling the
/// output at shifted instants.
///
/// Misuse: a DUT whose output is not locked to its input (a free-running oscillator, another
/// clock) gives a meaningless FRF; the linearity check then reports lines everywhere. Two
/// captures from different instruments without a shared clock drift apart and are refused
/// only when their rates or lengths differ.
///
/// Usage:
///   IdentifyOptions o; o.input_channel = "v_in"; o.output_channel = "v_out"; o.order = "0/2";
///   const IdentifyResult r = identify(io::read_capture("bench.csv"), o);
///   io::write_file_atomic("-", output::json_text(output::identify_json(r)));  // output/identify_output.hpp
#include <optional>
#include <string>
#include <vector>

#include "core/capture.hpp"
#include "dsp/period_lock.hpp"
#include "ident/frf.hpp"
#include "ident/linearity.hpp"
#include "ident/rational_fit.hpp"

namespace periodfit::ident {

/// Condition number of the model fit's column-scaled Jacobian beyond which the result carries
/// the flag "ill-conditioned": double precision then keeps fewer than ~6 significant digits of
/// the parameters (digits lost ≈ log10 of the condition number), so the first-order covariance
/// behind every model uncertainty is not to be trusted (common practice). An over-parameterised
/// order (pole–zero pairs that nearly cancel) is the usual cause.
inline constexpr double kIllConditionedJacobian = 1e10;

struct IdentifyOptions {
  /// DUT input: a channel selector (Capture::channel_index: a name, or "#N" for the data
  /// channel at 0-based position N).
  std::string input_channel = "#0";
  /// DUT output, a selector as input_channel. "" = the default: "#1" in a single capture; with
  /// two captures the output capture's only data channel (an error naming the file when it
  /// has several).
  std::string output_channel;
  double f0_hz = 0;                  ///< > 0: use exactly this fundamental; 0 = estimate on the input
  double f0_hint_hz = 0;             ///< > 0: search the fundamental near this value
  int max_harmonic = 0;              ///< highest harmonic examined; 0 = dsp::default_harmonic_count
  /// Samples per period of the resampling grid; 0 = dsp::default_samples_per_period (fs/f0
  /// when an integer, else the next FFT-friendly size, at least 2·max_harmonic + 2).
  int samples_per_period = 0;
  FrfOptions frf;                    ///< min_snr_db, confidence, skew_s, …
  LinearityOptions linearity;
  std::string order;                 ///< "" = no model; "M/N"; "auto"
  bool estimate_delay = false;       ///< fit the dead time T as well (else T = 0)
  RationalFitOptions fit;            ///< fit settings; order/auto/delay fields are set from above

  void validate() const;  ///< throws OptionError naming the field
};

struct IdentifyResult {
  std::string status = "ok";      ///< "ok", or "model-inadequate" / "model-not-converged"
  std::string input_source, output_source;
  std::string input_channel, output_channel;  ///< channel names as in the captures
  std::string input_unit, output_unit;
  double sample_rate_hz = 0;
  dsp::Fundamental fundamental;   ///< how f0 was found
  int samples_per_period = 0;     ///< M of the grid
  double skew_s = 0;
  FrfResult frf;
  LinearityResult linearity;
  std::optional<RationalFitResult> model;  ///< present when an order was asked for
  double model_confidence = 0.95;  ///< level of the χ² adequacy band
  std::vector<std::string> flags;  ///< "nonlinear", "model-inadequate", "unstable-pole", "few-periods", "ill-conditioned"
};

/// Both channels from one capture.
IdentifyResult identify(const Capture& capture, const IdentifyOptions& options = {});

/// Input from `input_capture`, output from `output_capture` (common time base). Throws
/// AnalysisError when their sample rates or lengths differ.
IdentifyResult identify(const Capture& input_capture, const Capture& output_capture,
                        const IdentifyOptions& options = {});

}  // namespace periodfit::ident
