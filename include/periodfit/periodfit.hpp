#pragma once
/// periodfit's public C++ API, all of it (docs/api.md, "From C++"): capture reading, analysis,
/// frequency response and model fitting, steady-state prediction, excitation signals, batch
/// runs, and the renderings of each result as the CLI writes them. Each algorithm takes an
/// Options struct (fields documented with unit and default) and returns a Result struct with
/// its status, flags and method; errors are periodfit::Error subclasses (core/error.hpp).
///
///   #include <periodfit/periodfit.hpp>
///   const periodfit::Capture c = periodfit::io::read_capture("bench.csv");
///   const auto a = periodfit::dsp::analyze_channel(c.channel("v_out"), c.sample_rate_hz, c.t0_s);
///   std::cout << a.fundamental.f0_hz << " Hz, u = " << a.fundamental.f0_u_hz << " Hz\n";
///
/// Installed, every include below reads "periodfit/<stage>/…"; in the source tree src/ is on the
/// include path instead.
#include "periodfit/version.hpp"

#include "core/capture.hpp"
#include "core/error.hpp"
#include "core/flags.hpp"
#include "io/capture_reader.hpp"
#include "dsp/capture_analysis.hpp"
#include "dsp/harmonics.hpp"
#include "dsp/period_lock.hpp"
#include "dsp/waveforms.hpp"
#include "ident/identify.hpp"
#include "ident/rational_fit.hpp"
#include "predict/excitation.hpp"
#include "predict/superposition.hpp"
#include "output/analysis_output.hpp"
#include "output/excitation_output.hpp"
#include "output/identify_output.hpp"
#include "output/json_writer.hpp"
#include "output/model_file.hpp"
#include "output/predict_output.hpp"
#include "batch/config.hpp"
#include "batch/runner.hpp"
