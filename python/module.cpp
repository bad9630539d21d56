// periodfit._periodfit, the compiled half of the Python package `periodfit` (python/periodfit/
// __init__.py is the other): numpy arrays in, result objects out. Every number comes from the
// library calls the CLI makes (docs/api.md, "From Python"); to_dict() is the command's JSON
// document (rendered by the same writer as the CLI's --json) parsed by Python's json module, so
// its keys cannot drift from docs/*-json.md. Errors are periodfit.Error subclasses carrying the
// CLI's message text (what the CLI prints after "periodfit: error: ").
//
// Ownership. Sample arrays handed out (Capture.channels, Excitation.samples) share memory with
// the C++ object they came from, kept alive by a capsule: nothing is copied on the way out. The
// GIL is released while the library reads or computes.
#include <pybind11/complex.h>
#include <pybind11/numpy.h>
#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include <cmath>
#include <complex>
#include <cstdint>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <utility>
#include <vector>

#include "core/capture.hpp"
#include "core/error.hpp"
#include "core/number_format.hpp"
#include "dsp/harmonics.hpp"
#include "ident/frf.hpp"
#include "ident/identify.hpp"
#include "io/capture_reader.hpp"
#include "output/analysis_output.hpp"
#include "output/excitation_output.hpp"
#include "output/identify_output.hpp"
#include "output/model_file.hpp"
#include "output/predict_output.hpp"
#include "predict/excitation.hpp"
#include "predict/input_series.hpp"
#include "predict/superposition.hpp"

namespace py = pybind11;

namespace periodfit::python {
namespace {

// --- arrays -----------------------------------------------------------------------------------

/// A read-only numpy view of `values`, owned by `owner` (kept alive as the array's base).
template <typename T, typename Owner>
py::array_t<T> view(const std::vector<T>& values, const std::shared_ptr<Owner>& owner) {
  auto* keep = new std::shared_ptr<Owner>(owner);
  py::capsule base(keep, [](void* p) { delete static_cast<std::shared_ptr<Owner>*>(p); });
  py::array_t<T> a(static_cast<py::ssize_t>(values.size()), values.data(), base);
  a.attr("flags").attr("writeable") = false;
  return a;
}

/// A new numpy array holding f(item) for each item.
template <typename T, typename Items, typename F>
py::array_t<T> column(const Items& items, F f) {
  py::array_t<T> a(static_cast<py::ssize_t>(items.size()));
  auto w = a.template mutable_unchecked<1>();
  py::ssize_t i = 0;
  for (const auto& item : items) w(i++) = f(item);
  return a;
}

/// The samples of a 1-D array of real numbers, checked the way a capture file is (docs/api.md,
/// "Arrays"): a C-contiguous float64 array is read in place; other real dtypes are converted
/// once; complex, object, string and bool arrays, a 2-D array, an empty one or a non-finite
/// value raise InputError naming the argument (and the index), never a crash.
struct Samples {
  py::array_t<double, py::array::c_style> array;  ///< keeps the memory alive
  std::span<const double> values;
};

Samples samples_from(const py::handle& object, const char* name) {
  py::array raw = py::array::ensure(object);
  if (!raw) throw InputError(name, 0, 0, "expected a 1-D numpy array of real numbers");
  const char kind = raw.dtype().kind();
  if (kind != 'f' && kind != 'i' && kind != 'u')
    throw InputError(name, 0, 0,
                     "expected real numbers (float or integer dtype), got dtype " +
                         std::string(py::str(raw.dtype())));
  if (raw.ndim() != 1)
    throw InputError(name, 0, 0,
                     "expected a 1-D array, got " + std::to_string(raw.ndim()) +
                         " dimensions (pass one channel: a[:, k] or a row)");
  Samples s;
  s.array = py::array_t<double, py::array::c_style>::ensure(raw);
  if (!s.array) throw InputError(name, 0, 0, "cannot convert the array to float64");
  s.values = std::span<const double>(s.array.data(), static_cast<std::size_t>(s.array.size()));
  if (s.values.empty()) throw InputError(name, 0, 0, "the array is empty");
  for (std::size_t i = 0; i < s.values.size(); ++i)
    if (!std::isfinite(s.values[i]))
      throw InputError(name, 0, 0,
                       "element " + std::to_string(i) + " is " + (std::isnan(s.values[i]) ? "NaN" : "infinite") +
                           ": samples must be finite numbers");
  return s;
}

double positive_rate(double rate_hz) {
  if (!(rate_hz > 0) || !std::isfinite(rate_hz))
    throw OptionError("rate", std::to_string(rate_hz), "must be a finite sample rate > 0 Hz");
  return rate_hz;
}

py::object parse_json(const std::string& text) { return py::module_::import("json").attr("loads")(text); }

// --- errors -----------------------------------------------------------------------------------

void bind_errors(py::module_& m) {
  // Registered base first: pybind11 tries translators newest first, so a subclass is matched
  // before its base.
  static py::exception<Error> error(m, "Error");
  error.doc() = "Base of every periodfit error; str(e) is the message the CLI prints.";
  static py::exception<InputError> input_error(m, "InputError", error.ptr());
  static py::exception<IoError> io_error(m, "IoError", error.ptr());
  static py::exception<OptionError> option_error(m, "OptionError", error.ptr());
  static py::exception<AnalysisError> analysis_error(m, "AnalysisError", error.ptr());
  static py::exception<UnknownNameError> unknown_name_error(m, "UnknownNameError", error.ptr());
  py::register_exception_translator([](std::exception_ptr p) {
    try {
      if (p) std::rethrow_exception(p);
    } catch (const InputError& e) {
      input_error(e.what());
    } catch (const IoError& e) {
      io_error(e.what());
    } catch (const OptionError& e) {
      option_error(e.what());
    } catch (const AnalysisError& e) {
      analysis_error(e.what());
    } catch (const UnknownNameError& e) {
      unknown_name_error(e.what());
    } catch (const Error& e) {
      error(e.what());
    }
  });
}


// --- captures ---------------------------------------------------------------------------------

using CapturePtr = std::shared_ptr<const Capture>;

void bind_capture(py::module_& m) {
  py::class_<Capture, std::shared_ptr<Capture>>(m, "Capture", R"doc(A capture read from a file.

Attributes: source (path), format ("csv", "wav", ...), rate (Hz), t0 (s, time of the first
sample relative to the file's origin), names, units, metadata (preamble key/values), and
channels: {name: samples} with each samples array a read-only float64 view (no copy).
capture["v_out"] or capture["#1"] selects a channel as the CLI's --channel does.)doc")
      .def_property_readonly("source", [](const Capture& c) { return c.source; })
      .def_property_readonly("format", [](const Capture& c) { return c.format; })
      .def_property_readonly("rate", [](const Capture& c) { return c.sample_rate_hz; }, "sample rate, Hz")
      .def_property_readonly("t0", [](const Capture& c) { return c.t0_s; }, "time of the first sample, s")
      .def_property_readonly("names", [](const Capture& c) { return c.channel_names(); })
      .def_property_readonly("units", [](const Capture& c) {
        std::vector<std::string> units;
        for (const auto& ch : c.channels) units.push_back(ch.unit);
        return units;
      })
      .def_property_readonly("metadata", [](const Capture& c) {
        py::dict d;
        for (const auto& [key, value] : c.metadata) d[py::str(key)] = value;
        return d;
      })
      .def_property_readonly("channels", [](const std::shared_ptr<Capture>& c) {
        py::dict d;
        for (const auto& ch : c->channels) d[py::str(ch.name)] = view(ch.samples, c);
        return d;
      })
      .def("__len__", [](const Capture& c) { return c.channels.size(); })
      .def("__getitem__", [](const std::shared_ptr<Capture>& c, const std::string& selector) {
        return view(c->channel(selector).samples, c);
      }, "samples of a channel: a name, or '#N' for the data channel at 0-based position N")
      .def("unit", [](const Capture& c, const std::string& selector) { return c.channel(selector).unit; })
      .def("__repr__", [](const Capture& c) {
        return "<periodfit.Capture " + c.source + ": " + std::to_string(c.channels.size()) + " channels x " +
               std::to_string(c.sample_count()) + " samples at " + format_significant(c.sample_rate_hz, 10) + " Hz>";
      });

  m.def("read_capture",
        [](const std::string& path, double rate, std::string time_column) {
          io::ReadOptions o;
          o.rate_hz = rate;
          o.time_column = std::move(time_column);
          std::shared_ptr<Capture> c;
          {
            py::gil_scoped_release release;
            c = std::make_shared<Capture>(io::read_capture(path, o));
          }
          return c;
        },
        py::arg("path"), py::kw_only(), py::arg("rate") = 0.0, py::arg("time_column") = "",
        R"doc(Reads a capture (CSV or audio) as `periodfit info/analyze FILE` does.

rate: sample rate in Hz overriding the file's (0 = from the file).
time_column: CSV only: "" = detect, "none" = no time column, else its name or position.
Raises IoError, InputError (path:line:column: ...), OptionError.)doc");
}

// --- analyze ----------------------------------------------------------------------------------

struct Analysis {
  dsp::ChannelAnalysis result;
};
using AnalysisPtr = std::shared_ptr<const Analysis>;

void bind_analyze_result(py::module_& m) {
  py::class_<Analysis, std::shared_ptr<Analysis>>(m, "Analysis", R"doc(One channel's analysis (periodfit analyze).

f0, f0_u: fundamental and its standard uncertainty u (1 sigma), Hz. n, freq, amplitude,
amplitude_u, phase, phase_u: per harmonic n = 1..H (amplitude peak, channel unit; phase degrees
of cos(n*w0*t + phi), t = 0 at the capture's origin; *_u standard uncertainties). thd, thd_n
(ratios), sinad, snr (dB), enob (bits, None without a full-scale range), flags (codes).
to_dict() is the channel object of the analyze JSON (docs/analyze-json.md).)doc")
      .def_property_readonly("name", [](const Analysis& a) { return a.result.name; })
      .def_property_readonly("unit", [](const Analysis& a) { return a.result.unit; })
      .def_property_readonly("status", [](const Analysis& a) { return std::string(code(a.result.status)); })
      .def_property_readonly("f0", [](const Analysis& a) { return a.result.fundamental.f0_hz; })
      .def_property_readonly("f0_u", [](const Analysis& a) { return a.result.fundamental.f0_u_hz; })
      .def_property_readonly("dc", [](const Analysis& a) { return a.result.dc; })
      .def_property_readonly("dc_u", [](const Analysis& a) { return a.result.dc_u; })
      .def_property_readonly("rms", [](const Analysis& a) { return a.result.rms; })
      .def_property_readonly("n", [](const Analysis& a) {
        return column<int>(a.result.harmonics, [](const dsp::HarmonicLine& h) { return h.n; });
      })
      .def_property_readonly("freq", [](const Analysis& a) {
        return column<double>(a.result.harmonics, [](const dsp::HarmonicLine& h) { return h.freq_hz; });
      })
      .def_property_readonly("amplitude", [](const Analysis& a) {
        return column<double>(a.result.harmonics, [](const dsp::HarmonicLine& h) { return h.amplitude; });
      })
      .def_property_readonly("amplitude_u", [](const Analysis& a) {
        return column<double>(a.result.harmonics, [](const dsp::HarmonicLine& h) { return h.amplitude_u; });
      })
      .def_property_readonly("phase", [](const Analysis& a) {
        return column<double>(a.result.harmonics, [](const dsp::HarmonicLine& h) { return h.phase_deg; });
      })
      .def_property_readonly("phase_u", [](const Analysis& a) {
        return column<double>(a.result.harmonics, [](const dsp::HarmonicLine& h) { return h.phase_u_deg; });
      })
      .def_property_readonly("phasor", [](const Analysis& a) {
        return column<std::complex<double>>(a.result.harmonics, [](const dsp::HarmonicLine& h) { return h.phasor; });
      })
      .def_property_readonly("thd", [](const Analysis& a) { return a.result.distortion.thd; })
      .def_property_readonly("thd_n", [](const Analysis& a) { return a.result.distortion.thd_n; })
      .def_property_readonly("sinad", [](const Analysis& a) { return a.result.distortion.sinad_db; })
      .def_property_readonly("snr", [](const Analysis& a) { return a.result.distortion.snr_db; })
      .def_property_readonly("enob", [](const Analysis& a) -> std::optional<double> {
        const double e = a.result.distortion.enob_bits;
        return std::isfinite(e) ? std::optional<double>(e) : std::nullopt;
      })
      .def_property_readonly("flags", [](const Analysis& a) {
        std::vector<std::string> codes;
        for (const auto& f : a.result.flags) codes.emplace_back(code(f.flag));
        return codes;
      })
      .def("to_dict", [](const Analysis& a) { return parse_json(output::channel_json(a.result).dump()); },
           "the channel object of the analyze JSON contract (docs/analyze-json.md)")
      .def("__repr__", [](const Analysis& a) {
        return "<periodfit.Analysis " + a.result.name + ": f0 " + format_significant(a.result.fundamental.f0_hz, 10) +
               " Hz, " + std::to_string(a.result.harmonics.size()) + " harmonics>";
      });

}

void bind_analyze_function(py::module_& m) {
  m.def("analyze",
        [](const py::object& samples, double rate, double t0, std::string name, std::string unit, double f0,
           double f0_hint, int harmonics, int samples_per_period, double full_scale) {
          const Samples s = samples_from(samples, "samples");
          positive_rate(rate);
          dsp::AnalyzeOptions o;
          o.lock.f0_hz = f0;
          o.lock.f0_hint_hz = f0_hint;
          o.lock.max_harmonic = harmonics;
          o.samples_per_period = samples_per_period;
          o.full_scale_range = full_scale;
          auto out = std::make_shared<Analysis>();
          {
            py::gil_scoped_release release;
            out->result = dsp::analyze_channel(dsp::SampleView{name, unit, s.values}, rate, t0, o);
          }
          return out;
        },
        py::arg("samples"), py::arg("rate"), py::kw_only(), py::arg("t0") = 0.0, py::arg("name") = "ch0",
        py::arg("unit") = "", py::arg("f0") = 0.0, py::arg("f0_hint") = 0.0, py::arg("harmonics") = 0,
        py::arg("samples_per_period") = 0, py::arg("full_scale") = 0.0,
        R"doc(Analyses one channel as `periodfit analyze` does and returns an Analysis.

samples: 1-D array of real numbers (float64 C-contiguous is read in place).
rate: sample rate, Hz. t0: time of samples[0], s. name, unit: as the channel's.
f0 > 0 forces the fundamental (Hz); f0_hint > 0 searches near it; harmonics N > 0 examines
n = 1..N (0 = automatic); samples_per_period: M of the locked grid (0 = automatic);
full_scale: the converter's full-scale range in the channel's unit, for ENOB (IEEE Std 1241).)doc");
}

// --- excite -----------------------------------------------------------------------------------

struct Excitation {
  predict::ExciteResult result;
  std::vector<double> samples;  ///< every period, as the file holds it (one channel)
};

void bind_excite_result(py::module_& m) {
  py::class_<Excitation, std::shared_ptr<Excitation>>(m, "Excitation", R"doc(An excitation signal (periodfit excite).

samples: the whole signal (periods x M values) as the file would hold it, read-only float64;
period: one period; rate, f0 (Hz, after the looping adjustment), crest_factor, peak, rms;
n, freq, amplitude, phase: the harmonics of the written period (peak, degrees, cos convention).
to_dict() is the excite JSON summary (docs/excite.md); write(path) writes the WAV or CSV file.)doc")
      .def_property_readonly("samples", [](const std::shared_ptr<Excitation>& e) { return view(e->samples, e); })
      .def_property_readonly("period", [](const std::shared_ptr<Excitation>& e) { return view(e->result.period, e); })
      .def_property_readonly("rate", [](const Excitation& e) { return e.result.rate_hz; })
      .def_property_readonly("f0", [](const Excitation& e) { return e.result.f0_hz; })
      .def_property_readonly("method", [](const Excitation& e) { return e.result.method; })
      .def_property_readonly("crest_factor", [](const Excitation& e) { return e.result.crest_factor; })
      .def_property_readonly("peak", [](const Excitation& e) { return e.result.peak; })
      .def_property_readonly("rms", [](const Excitation& e) { return e.result.rms; })
      .def_property_readonly("n", [](const Excitation& e) {
        return column<int>(e.result.harmonics, [](const predict::ExcitedHarmonic& h) { return h.n; });
      })
      .def_property_readonly("freq", [](const Excitation& e) {
        return column<double>(e.result.harmonics, [](const predict::ExcitedHarmonic& h) { return h.freq_hz; });
      })
      .def_property_readonly("amplitude", [](const Excitation& e) {
        return column<double>(e.result.harmonics, [](const predict::ExcitedHarmonic& h) { return h.amplitude; });
      })
      .def_property_readonly("phase", [](const Excitation& e) {
        return column<double>(e.result.harmonics, [](const predict::ExcitedHarmonic& h) { return h.phase_deg; });
      })
      .def_property_readonly("warnings", [](const Excitation& e) { return e.result.warnings; })
      .def("to_dict", [](const Excitation& e) { return parse_json(output::excitation_json(e.result).dump()); })
      .def("write", [](const Excitation& e, const std::string& path) {
        py::gil_scoped_release release;
        output::write_excitation(path, e.result);
      }, py::arg("path"), "writes the WAV (.wav) or CSV file atomically, as `periodfit excite OUT` does");

}

void bind_excite_function(py::module_& m) {
  m.def("excite",
        [](std::string signal, std::string harmonics, double f0, double rate, double amplitude, int periods,
           bool odd, int skip_every, const std::string& phases, std::uint64_t seed, double duty, bool band_limited,
           const std::string& adjust, const std::string& format,
           std::optional<std::vector<std::pair<int, double>>> spectrum) {
          predict::ExciteOptions o;
          o.signal = std::move(signal);
          o.harmonics = std::move(harmonics);
          o.f0_hz = f0;
          o.rate_hz = rate;
          o.amplitude = amplitude;
          o.periods = periods;
          o.odd_only = odd;
          o.skip_every = skip_every;
          o.phases = predict::parse_phase_rule(phases);
          o.seed = seed;
          o.duty = duty;
          o.band_limited = band_limited;
          if (adjust != "f0" && adjust != "rate") throw UnknownNameError("adjustment", adjust, {"f0", "rate"});
          o.adjust = adjust == "rate" ? predict::LoopAdjust::rate : predict::LoopAdjust::f0;
          o.format = predict::parse_sample_format(format);
          if (spectrum) o.spectrum = *spectrum;
          auto out = std::make_shared<Excitation>();
          {
            py::gil_scoped_release release;
            out->result = predict::generate_excitation(o);
            out->samples.reserve(out->result.sample_count());
            for (int p = 0; p < out->result.periods; ++p)
              out->samples.insert(out->samples.end(), out->result.period.begin(), out->result.period.end());
          }
          return out;
        },
        py::kw_only(), py::arg("signal") = "multisine", py::arg("harmonics") = "1-20", py::arg("f0") = 1000.0,
        py::arg("rate") = 48000.0, py::arg("amplitude") = 0.5, py::arg("periods") = 1, py::arg("odd") = false,
        py::arg("skip_every") = 0, py::arg("phases") = "schroeder", py::arg("seed") = 1, py::arg("duty") = 0.5,
        py::arg("band_limited") = false, py::arg("adjust") = "f0", py::arg("format") = "pcm24",
        py::arg("spectrum") = py::none(),
        R"doc(Builds an excitation signal as `periodfit excite` does (docs/excite.md).

signal: "multisine" or a wave (sine, square, triangle, sawtooth, half-wave, full-wave, pulse).
harmonics: multisine harmonic list ("1-200", "2,5,11"); odd / skip_every select from it;
phases: "schroeder", "random" (seed) or "zero"; spectrum: [(n, relative amplitude), ...].
f0, rate: requested Hz; adjust: "f0" or "rate" gives way so a period is a whole number of
samples. amplitude: peak of the whole waveform; format: pcm16, pcm24, float or csv (the
quantisation of the samples and of write()).)doc");
}

// --- frf --------------------------------------------------------------------------------------

struct Response {
  ident::IdentifyResult result;
};

template <typename F>
py::array_t<double> frf_column(const Response& r, F f) {
  return column<double>(r.result.frf.points, f);
}

void bind_frf_result(py::module_& m) {
  py::class_<Response, std::shared_ptr<Response>>(m, "Response", R"doc(A DUT's frequency response (periodfit frf).

n, freq (Hz), h (complex H(jn*w0)), mag, mag_u, mag_lo, mag_hi (|H| with its standard
uncertainty u and its interval at `confidence`, never below 0), mag_db, phase, phase_u (degrees)
at every excited harmonic; f0, f0_u; model: the fitted model's part of the JSON (dict) or None;
adequate (bool or None); flags (codes). to_dict() is the frf JSON document (docs/frf-json.md).)doc")
      .def_property_readonly("f0", [](const Response& r) { return r.result.fundamental.f0_hz; })
      .def_property_readonly("f0_u", [](const Response& r) { return r.result.fundamental.f0_u_hz; })
      .def_property_readonly("confidence", [](const Response& r) { return r.result.frf.confidence; })
      .def_property_readonly("n", [](const Response& r) {
        return column<int>(r.result.frf.points, [](const ident::FrfHarmonic& p) { return p.n; });
      })
      .def_property_readonly("freq", [](const Response& r) { return frf_column(r, [](const ident::FrfHarmonic& p) { return p.freq_hz; }); })
      .def_property_readonly("h", [](const Response& r) {
        return column<std::complex<double>>(r.result.frf.points, [](const ident::FrfHarmonic& p) { return p.h; });
      })
      .def_property_readonly("mag", [](const Response& r) { return frf_column(r, [](const ident::FrfHarmonic& p) { return p.mag; }); })
      .def_property_readonly("mag_u", [](const Response& r) { return frf_column(r, [](const ident::FrfHarmonic& p) { return p.mag_u; }); })
      .def_property_readonly("mag_lo", [](const Response& r) { return frf_column(r, [](const ident::FrfHarmonic& p) { return p.mag_lo; }); })
      .def_property_readonly("mag_hi", [](const Response& r) { return frf_column(r, [](const ident::FrfHarmonic& p) { return p.mag_hi; }); })
      .def_property_readonly("mag_db", [](const Response& r) { return frf_column(r, [](const ident::FrfHarmonic& p) { return p.mag_db; }); })
      .def_property_readonly("phase", [](const Response& r) { return frf_column(r, [](const ident::FrfHarmonic& p) { return p.phase_deg; }); })
      .def_property_readonly("phase_u", [](const Response& r) { return frf_column(r, [](const ident::FrfHarmonic& p) { return p.phase_u_deg; }); })
      .def_property_readonly("adequate", [](const Response& r) -> std::optional<bool> {
        return r.result.model ? std::optional<bool>(r.result.model->adequate) : std::nullopt;
      })
      .def_property_readonly("model", [](const Response& r) -> py::object {
        const py::dict d = parse_json(output::identify_json(r.result).dump());
        return d.contains("model") ? py::object(d["model"]) : py::object(py::none());
      })
      .def_property_readonly("flags", [](const Response& r) { return r.result.flags; })
      .def("to_dict", [](const Response& r) { return parse_json(output::identify_json(r.result).dump()); },
           "the frf JSON document (docs/frf-json.md)")
      .def("text", [](const Response& r) { return output::format_identify_report(r.result); },
           "the report `periodfit frf` prints");

}

void bind_frf_function(py::module_& m) {
  m.def("frf",
        [](const py::object& x, const py::object& y, double rate, double t0, std::string order, bool delay,
           double f0, double f0_hint, int harmonics, double skew, double confidence, double min_snr,
           std::string x_name, std::string y_name, std::string x_unit, std::string y_unit) {
          const Samples in = samples_from(x, "x");
          const Samples out = samples_from(y, "y");
          positive_rate(rate);
          if (in.values.size() != out.values.size())
            throw InputError("y", 0, 0,
                             "has " + std::to_string(out.values.size()) + " samples, x has " +
                                 std::to_string(in.values.size()) + ": input and output must be sampled together");
          ident::IdentifyOptions o;
          o.input_channel = "#0";
          o.output_channel = "#1";
          o.order = std::move(order);
          o.estimate_delay = delay;
          o.lock.f0_hz = f0;
          o.lock.f0_hint_hz = f0_hint;
          o.lock.max_harmonic = harmonics;
          o.frf.skew_s = skew;
          o.frf.confidence = confidence;
          o.frf.min_snr_db = min_snr;
          auto r = std::make_shared<Response>();
          {
            py::gil_scoped_release release;
            Capture c;
            c.source = "(arrays)";
            c.format = "numpy";
            c.sample_rate_hz = rate;
            c.t0_s = t0;
            c.channels.push_back({std::move(x_name), std::move(x_unit), {in.values.begin(), in.values.end()}});
            c.channels.push_back({std::move(y_name), std::move(y_unit), {out.values.begin(), out.values.end()}});
            r->result = ident::identify(c, o);
          }
          return r;
        },
        py::arg("x"), py::arg("y"), py::arg("rate"), py::kw_only(), py::arg("t0") = 0.0, py::arg("order") = "",
        py::arg("delay") = false, py::arg("f0") = 0.0, py::arg("f0_hint") = 0.0, py::arg("harmonics") = 0,
        py::arg("skew") = 0.0, py::arg("confidence") = 0.95, py::arg("min_snr") = 20.0, py::arg("x_name") = "in",
        py::arg("y_name") = "out", py::arg("x_unit") = "", py::arg("y_unit") = "",
        R"doc(Measures the frequency response H = Y/X at the excited harmonics, as `periodfit frf` does.

x, y: DUT input and output, 1-D arrays sampled together at `rate` Hz (t0: time of sample 0).
order: "" (no model), "M/N" or "auto": fit B(s)/A(s) (delay=True: also e^{-sT}).
f0 forces the fundamental (Hz), f0_hint searches near it; harmonics N > 0 examines n <= N.
skew: output acquisition delay to remove, s; confidence: level of the intervals; min_snr: dB
above the input noise floor for a harmonic to count as excited.)doc");
}

// --- steady state -----------------------------------------------------------------------------

struct SteadyState {
  predict::PredictResult result;
};

/// The system of steady_state(): exactly one of an expression, a model file or a Response.
predict::PredictSystem system_from(const std::optional<std::string>& expression, double delay,
                                   const std::optional<std::string>& model_path,
                                   const std::shared_ptr<Response>& response, const std::string& response_from) {
  const int given = int(expression.has_value()) + int(model_path.has_value()) + int(response != nullptr);
  if (given != 1) throw OptionError("system", std::to_string(given) + " given", "give exactly one of system=, model=, response=");
  if (response_from != "model" && response_from != "measured")
    throw UnknownNameError("response_from value", response_from, {"model", "measured"});
  const bool prefer_measured = response_from == "measured";
  if (expression) {
    predict::PredictSystem sys = predict::system_from_expression(*expression, delay, "system");
    sys.prefer_measured = prefer_measured;
    return sys;
  }
  if (model_path)
    return output::prediction_system(output::read_model_file(*model_path), prefer_measured, *model_path,
                                     "response_from='measured'");
  predict::PredictSystem sys;
  sys.prefer_measured = prefer_measured;
  if (response->result.model) sys.model = response->result.model->model;
  sys.measured = ident::fit_points(response->result.frf);
  if (!sys.model && !sys.prefer_measured)
    throw OptionError("response", "(no model)", "fit a model (frf(..., order=...)) or pass response_from='measured'");
  return sys;
}

void bind_steady_state_result(py::module_& m) {
  py::class_<SteadyState, std::shared_ptr<SteadyState>>(m, "SteadyState", R"doc(A DUT's steady-state output (periodfit steady-state).

n, freq, amplitude, amplitude_u, phase, phase_u: output harmonics (peak; degrees, cos
convention; *_u standard uncertainties u, 0 when no covariance was propagated); dc, dc_u, rms,
rms_u, ripple_pp, ripple_pp_u, thd (ratio or None); time, value, value_u: samples of the output
(`periods` periods at `rate`). to_dict() is the steady-state JSON (docs/steady-state-json.md).)doc")
      .def_property_readonly("f0", [](const SteadyState& s) { return s.result.f0_hz; })
      .def_property_readonly("method", [](const SteadyState& s) { return s.result.method; })
      .def_property_readonly("n", [](const SteadyState& s) {
        return column<int>(s.result.harmonics_out, [](const predict::PredictedHarmonic& h) { return h.n; });
      })
      .def_property_readonly("freq", [](const SteadyState& s) {
        return column<double>(s.result.harmonics_out, [](const predict::PredictedHarmonic& h) { return h.freq_hz; });
      })
      .def_property_readonly("amplitude", [](const SteadyState& s) {
        return column<double>(s.result.harmonics_out, [](const predict::PredictedHarmonic& h) { return h.amplitude; });
      })
      .def_property_readonly("amplitude_u", [](const SteadyState& s) {
        return column<double>(s.result.harmonics_out, [](const predict::PredictedHarmonic& h) { return h.amplitude_u; });
      })
      .def_property_readonly("phase", [](const SteadyState& s) {
        return column<double>(s.result.harmonics_out, [](const predict::PredictedHarmonic& h) { return h.phase_deg; });
      })
      .def_property_readonly("phase_u", [](const SteadyState& s) {
        return column<double>(s.result.harmonics_out, [](const predict::PredictedHarmonic& h) { return h.phase_u_deg; });
      })
      .def_property_readonly("dc", [](const SteadyState& s) { return s.result.dc; })
      .def_property_readonly("dc_u", [](const SteadyState& s) { return s.result.dc_u; })
      .def_property_readonly("rms", [](const SteadyState& s) { return s.result.rms; })
      .def_property_readonly("rms_u", [](const SteadyState& s) { return s.result.rms_u; })
      .def_property_readonly("ripple_pp", [](const SteadyState& s) { return s.result.ripple_pp; })
      .def_property_readonly("ripple_pp_u", [](const SteadyState& s) { return s.result.ripple_pp_u; })
      .def_property_readonly("thd", [](const SteadyState& s) -> std::optional<double> {
        return s.result.thd_defined ? std::optional<double>(s.result.thd) : std::nullopt;
      })
      .def_property_readonly("rate", [](const SteadyState& s) { return s.result.rate_hz; })
      .def_property_readonly("time", [](const std::shared_ptr<SteadyState>& s) { return view(s->result.time_s, s); })
      .def_property_readonly("value", [](const std::shared_ptr<SteadyState>& s) { return view(s->result.value, s); })
      .def_property_readonly("value_u", [](const std::shared_ptr<SteadyState>& s) { return view(s->result.value_u, s); })
      .def_property_readonly("flags", [](const SteadyState& s) { return s.result.flags; })
      .def_property_readonly("warnings", [](const SteadyState& s) { return s.result.warnings; })
      .def("to_dict", [](const SteadyState& s) { return parse_json(output::predict_json(s.result).dump()); },
           "the steady-state JSON document (docs/steady-state-json.md)");

}

void bind_steady_state_function(py::module_& m) {
  m.def("steady_state",
        [](std::optional<std::string> system, double delay, std::optional<std::string> model,
           std::shared_ptr<Response> response, const std::string& response_from, std::optional<std::string> wave,
           double amplitude, double f0, double duty, double offset,
           std::optional<std::vector<std::tuple<int, double, double>>> terms, const py::object& input,
           double input_rate, double input_t0, int harmonics, double energy_bound, int periods, double rate) {
          predict::PredictSystem sys = system_from(system, delay, model, response, response_from);
          predict::PredictOptions o;
          o.truncation.harmonics = harmonics;
          o.truncation.max_left_out_fraction = energy_bound;
          o.periods = periods;
          o.rate_hz = rate;
          const int inputs = int(wave.has_value()) + int(terms.has_value()) + int(!input.is_none());
          if (inputs != 1) throw OptionError("input", std::to_string(inputs) + " given", "give exactly one of wave=, terms=, input=");
          auto out = std::make_shared<SteadyState>();
          if (!input.is_none()) {
            const Samples s = samples_from(input, "input");
            positive_rate(input_rate);
            py::gil_scoped_release release;
            dsp::AnalyzeOptions ao;
            ao.lock.max_harmonic = harmonics;
            const dsp::ChannelAnalysis an =
                dsp::analyze_channel(dsp::SampleView{"input", "", s.values}, input_rate, input_t0, ao);
            const predict::MeasuredInput measured = predict::measured_input(an);
            out->result = predict::predict_steady_state(measured.series, sys, o, measured.u);
            return out;
          }
          dsp::WaveSpec w;
          w.amplitude_v = amplitude;
          w.f0_hz = f0;
          w.duty = duty;
          w.offset_v = offset;
          if (terms) {
            w.kind = dsp::WaveKind::harmonics;
            for (const auto& t : *terms) w.terms.push_back({std::get<0>(t), std::get<1>(t), std::get<2>(t)});
          } else {
            w.kind = dsp::parse_wave_kind(*wave);
            if (w.kind == dsp::WaveKind::harmonics)
              throw OptionError("wave", "harmonics", "give the terms with terms=[(n, amplitude, phase_deg), ...]");
          }
          py::gil_scoped_release release;
          out->result = predict::predict_steady_state(w, sys, o);
          return out;
        },
        py::kw_only(), py::arg("system") = py::none(), py::arg("delay") = 0.0, py::arg("model") = py::none(),
        py::arg("response") = nullptr, py::arg("response_from") = "model", py::arg("wave") = py::none(),
        py::arg("amplitude") = 1.0, py::arg("f0") = 1000.0, py::arg("duty") = 0.5, py::arg("offset") = 0.0,
        py::arg("terms") = py::none(), py::arg("input") = py::none(), py::arg("input_rate") = 0.0,
        py::arg("input_t0") = 0.0, py::arg("harmonics") = 0, py::arg("energy_bound") = 1e-6, py::arg("periods") = 1,
        py::arg("rate") = 0.0,
        R"doc(The DUT's steady-state output for a periodic input by Fourier-series superposition, as
`periodfit steady-state` does (docs/steady-state-json.md).

System (one of): system="1/(1 + 1e-3*s)" (H(s) in rad/s, docs/system-expression.md; delay: its
dead time, s); model="dut.model.json" (a model file written by frf); response=frf(...) (its
fitted model, or its measured points with response_from="measured").
Input (one of): wave="square" (sine, square, triangle, sawtooth, half-wave, full-wave, pulse)
with amplitude (peak), f0 (Hz), duty, offset; terms=[(n, amplitude, phase_deg), ...] at f0;
input=samples of a measured input (input_rate Hz, input_t0 s), analysed as analyze() does.
harmonics: input harmonics used (0 = automatic, energy left out <= energy_bound);
periods, rate: the samples returned in time/value (rate 0 = 1000 samples per period).)doc");
}

}  // namespace
}  // namespace periodfit::python

PYBIND11_MODULE(_periodfit, m) {
  m.doc() = "The compiled half of the periodfit package; import periodfit, not this.";
  periodfit::python::bind_errors(m);
  periodfit::python::bind_capture(m);
  periodfit::python::bind_analyze_result(m);
  periodfit::python::bind_analyze_function(m);
  periodfit::python::bind_frf_result(m);
  periodfit::python::bind_frf_function(m);
  periodfit::python::bind_steady_state_result(m);
  periodfit::python::bind_steady_state_function(m);
  periodfit::python::bind_excite_result(m);
  periodfit::python::bind_excite_function(m);
  m.attr("__version__") = PERIODFIT_VERSION;
}
