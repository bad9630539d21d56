// periodfit steady-state: the steady-state output of a model or measured FRF for a periodic input,
// by superposition (predict/superposition.hpp). Outputs: docs/steady-state-json.md.
#include <cstdio>
#include <memory>
#include <string>
#include <vector>

#include "cli/capture_options.hpp"
#include "cli/commands.hpp"
#include "core/safe_text.hpp"
#include "core/error.hpp"
#include "core/exit_code.hpp"
#include "dsp/harmonics.hpp"
#include "dsp/waveforms.hpp"
#include "output/model_file.hpp"
#include "io/capture_reader.hpp"
#include "io/output_set.hpp"
#include "output/predict_output.hpp"
#include "predict/input_series.hpp"
#include "predict/superposition.hpp"
#include "output/json_writer.hpp"

namespace periodfit::cli {

namespace {
struct PredictArgs {
  std::string model_path;
  std::string system;             ///< --system: a rational expression in s (ident/system_expression.hpp)
  double delay_s = 0;
  std::string response_from = "model";  ///< "model" or "measured"
  std::string wave_kind;
  dsp::WaveSpec wave;
  std::vector<std::string> harmonic_terms;
  std::string input_file, channel;
  predict::PredictOptions options;
  std::string csv_path, json_path;
  std::size_t list = 50;
};

/// The system: a model file, or a rational expression with its dead time. Returns --system
/// (its count tells an empty expression from none given).
CLI::Option* add_predict_system_options(CLI::App& app, PredictArgs& a) {
  auto* model = app.add_option("--model", a.model_path, "model file written by frf (may hold measured FRF points)")
                    ->type_name("FILE")->group("system");
  // The system as text: docs/system-expression.md (grammar, columns in error messages).
  auto* system = app.add_option("--system", a.system,
                                "H(s) as a rational expression in s (rad/s), e.g. \"1/(1 + 1e-3*s)\" or "
                                "\"w^2/(s^2 + 2*0.35*w*s + w^2); w = 2*pi*1200\" (docs/system-expression.md)")
                     ->type_name("EXPR")->group("system");
  model->excludes(system);
  app.add_option("--delay", a.delay_s, "dead time T of H(s)·e^{-sT} for --system, seconds")
      ->capture_default_str()
      ->type_name("S")
      ->group("system")
      ->needs(system);
  // Named for what it picks, so it cannot be mistaken for the system description above.
  app.add_option("--response-from", a.response_from,
                 "with a model file holding measured points: 'model' (the fit everywhere) or 'measured' "
                 "(measured points where they exist, the model elsewhere)")
      ->capture_default_str()
      ->check(CLI::IsMember({"model", "measured"}))
      ->type_name("model|measured")
      ->group("system")
      ->needs(model);
  return system;
}

/// The input: a named waveform, a list of harmonic terms, or a capture's analysed harmonics.
void add_predict_input_options(CLI::App& app, PredictArgs& a) {
  app.option_defaults()->group("input");
  auto* wave = app.add_option("--wave", a.wave_kind,
                              "input waveform: sine, square, triangle, sawtooth, half-wave, full-wave, pulse "
                              "(docs/waveforms.md)")
                   ->type_name("KIND");
  app.add_option("--amplitude", a.wave.amplitude_v, "peak A of the waveform (pulse: its height)")
      ->capture_default_str()
      ->type_name("A");
  add_frequency_option(app, "--f0", a.wave.f0_hz, "fundamental in Hz, e.g. 1k (full-wave: the sine before rectification)");
  app.add_option("--duty", a.wave.duty, "square and pulse: fraction of the period high, in (0, 1)")
      ->capture_default_str()
      ->type_name("D");
  app.add_option("--offset", a.wave.offset_v, "dc added to the input")->capture_default_str()->type_name("V");
  auto* terms = app.add_option("--harmonic", a.harmonic_terms,
                               "an input term n:amplitude:phase_deg (cos convention, at --f0); repeatable")
                    ->type_name("N:A:DEG")
                    ->take_all();
  auto* input = app.add_option("--input-file", a.input_file, "use a capture's analysed harmonics as the input")
                    ->type_name("FILE");
  auto* channel = app.add_option("--channel", a.channel, "channel of --input-file: a name, or #N for the data channel at 0-based position N")
                      ->type_name("CH");
  input->needs(channel);
  channel->needs(input);
  wave->excludes(terms)->excludes(input);
  terms->excludes(input);
}

/// The output: the harmonics used, the sample file, the JSON and the text table's length.
void add_predict_output_options(CLI::App& app, PredictArgs& a) {
  predict::PredictOptions& o = a.options;
  app.option_defaults()->group("output");
  app.add_option("--harmonics", o.truncation.harmonics,
                 "input harmonics used; 0 = automatic (input energy left out below the bound); a capture: "
                 "harmonics analysed")
      ->capture_default_str()
      ->type_name("N");
  app.add_option("--energy-bound", o.truncation.max_left_out_fraction,
                 "automatic count: largest fraction of the input's ac energy left out")
      ->capture_default_str()
      ->type_name("F");
  app.add_option("--csv", a.csv_path, "write samples time_s,value[,value_u] to OUT ('-' = stdout)")->type_name("OUT");
  app.add_option("--periods", o.periods, "periods of samples in --csv")->capture_default_str()->type_name("P");
  add_frequency_option(app, "--rate", o.rate_hz, "sample rate of --csv in Hz, e.g. 48k; 0 = 1000 samples per period");
  app.add_option("--json", a.json_path, "write the prediction as JSON to PATH ('-' = stdout, instead of the text)")
      ->type_name("PATH");
  app.add_option("--list", a.list, "harmonics listed in the text table; 0 = all (JSON and CSV always hold every one)")
      ->capture_default_str()
      ->type_name("N");
}

/// The system the options name; `system` is the --system option.
predict::PredictSystem predict_system(const PredictArgs& a, const CLI::Option* system) {
  if (!a.model_path.empty())
    return output::prediction_system(output::read_model_file(a.model_path), a.response_from == "measured",
                                     a.model_path, "--response-from measured");
  if (system->count() > 0)  // an empty --system "" is the parser's error, not "none given"
    return predict::system_from_expression(a.system, a.delay_s, "--system");
  throw OptionError("system", "(none)", "give --model FILE or --system EXPR");
}

/// The prediction for the input the options name; `channel_warnings` gets the channel
/// selector's warnings when the input is a capture.
predict::PredictResult predicted(PredictArgs& a, const predict::PredictSystem& sys,
                                 std::vector<std::string>& channel_warnings) {
  if (!a.input_file.empty()) {
    const Capture capture = io::read_capture(a.input_file);
    channel_warnings = channel_selector_warnings(capture, {a.channel});
    dsp::AnalyzeOptions ao;
    ao.lock.max_harmonic = a.options.truncation.harmonics;
    const dsp::ChannelAnalysis an =
        dsp::analyze_channel(capture.channel(a.channel), capture.sample_rate_hz, capture.t0_s, ao);
    const predict::MeasuredInput measured = predict::measured_input(an);
    return predict::predict_steady_state(measured.series, sys, a.options, measured.u);
  }
  if (!a.harmonic_terms.empty()) {
    a.wave.kind = dsp::WaveKind::harmonics;
    for (const auto& t : a.harmonic_terms) a.wave.terms.push_back(predict::parse_harmonic_term(t));
  } else if (!a.wave_kind.empty()) {
    a.wave.kind = dsp::parse_wave_kind(a.wave_kind);
    if (a.wave.kind == dsp::WaveKind::harmonics)
      throw OptionError("--wave", "harmonics", "give the terms with --harmonic n:amplitude:phase_deg");
  } else {
    throw OptionError("input", "(none)", "give --wave KIND, --harmonic n:amp:phase_deg or --input-file FILE");
  }
  return predict::predict_steady_state(a.wave, sys, a.options);
}

}  // namespace

Runner add_steady_state(CLI::App& app) {
  auto a = std::make_shared<PredictArgs>();
  const CLI::Option* system = add_predict_system_options(app, *a);
  add_predict_input_options(app, *a);
  add_predict_output_options(app, *a);

  return [a, system]() -> int {
    io::OutputSet outputs({{"--csv", a->csv_path}, {"--json", a->json_path}},
                          {{"--model", a->model_path}, {"--input-file", a->input_file}});
    const predict::PredictSystem sys = predict_system(*a, system);
    std::vector<std::string> channel_warnings;
    const predict::PredictResult r = predicted(*a, sys, channel_warnings);
    if (outputs.requested("--csv")) outputs.set("--csv", output::format_predict_csv(r));
    if (outputs.requested("--json")) outputs.set("--json", output::json_text(output::predict_json(r)));
    // Warnings follow a successful publication, so a failed one ends with its one error line.
    outputs.publish(outputs.stdout_free() ? output::predict_text(r, a->list) : std::string());
    for (const auto& w : channel_warnings) std::fprintf(stderr, "periodfit: warning: %s\n", terminal_text(w, false).c_str());
    for (const auto& w : r.warnings) std::fprintf(stderr, "periodfit: warning: %s\n", terminal_text(w, false).c_str());
    return to_int(ExitCode::ok);
  };
}

}  // namespace periodfit::cli
