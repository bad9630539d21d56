// periodfit excite OUT: writes an excitation signal (multisine or standard waveform) as WAV or
// CSV, one period repeated so the file loops seamlessly (predict/excitation.hpp, docs/excite.md).
#include <cctype>
#include <cstdio>
#include <memory>
#include <string>

#include "cli/capture_options.hpp"
#include "cli/commands.hpp"
#include "core/safe_text.hpp"
#include "core/error.hpp"
#include "core/exit_code.hpp"
#include "io/output_file.hpp"
#include "io/output_set.hpp"
#include "output/excitation_output.hpp"
#include "predict/excitation.hpp"
#include "output/json_writer.hpp"

namespace periodfit::cli {

namespace {
struct ExciteArgs {
  std::string out_path;
  predict::ExciteOptions options;
  std::string phases = "schroeder";
  std::string adjust = "f0";
  std::string format;  ///< "" = from the extension: .csv → csv, otherwise pcm24
  std::string spectrum_path;
  std::string json_path;
};

bool ends_with_csv(const std::string& path) {
  if (path.size() < 4) return false;
  std::string tail = path.substr(path.size() - 4);
  for (auto& c : tail) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return tail == ".csv";
}
}  // namespace

Runner add_excite(CLI::App& app) {
  auto a = std::make_shared<ExciteArgs>();
  auto& o = a->options;
  app.add_option("OUT", a->out_path, "file to write (.wav or .csv; '-' = stdout)")->required()->type_name("OUT");
  app.add_option("--signal", o.signal,
                 "multisine, or a waveform: sine, square, triangle, sawtooth, half-wave, full-wave, pulse")
      ->capture_default_str()
      ->type_name("KIND");
  app.add_option("--harmonics", o.harmonics, "multisine: excited harmonics, e.g. 1-200, 2,5,11 or 1,3,5-9")
      ->capture_default_str()
      ->type_name("LIST");
  app.add_flag("--odd", o.odd_only, "multisine: keep only the odd harmonics of the list");
  app.add_option("--skip-every", o.skip_every,
                 "multisine: odd harmonics only, leaving out every K-th odd one (K >= 2; 0 = none)")
      ->capture_default_str()
      ->type_name("K");
  app.add_option("--spectrum-file", a->spectrum_path,
                 "multisine: relative amplitude per harmonic, lines 'n,amplitude' (default: flat)")
      ->type_name("FILE");
  app.add_option("--phases", a->phases, "multisine phases: schroeder, random (seeded) or zero")
      ->capture_default_str()
      ->type_name("RULE");
  app.add_option("--seed", o.seed, "random phases: seed of the mt19937_64 generator")
      ->capture_default_str()
      ->type_name("N");
  app.add_option("--duty", o.duty, "square and pulse: fraction of the period high, in (0, 1)")
      ->capture_default_str()
      ->type_name("D");
  app.add_flag("--band-limited", o.band_limited,
               "waveforms: sum the Fourier series below half the sample rate instead of exact samples");
  add_frequency_option(app, "--f0", o.f0_hz, "fundamental in Hz, e.g. 1k");
  add_frequency_option(app, "--rate", o.rate_hz, "sample rate in Hz, e.g. 48k");
  app.add_option("--adjust", a->adjust,
                 "what gives way so a period holds a whole number of samples: f0 or rate")
      ->capture_default_str()
      ->check(CLI::IsMember({"f0", "rate"}))
      ->type_name("WHICH");
  app.add_option("--periods", o.periods, "whole periods in the file")->capture_default_str()->type_name("P");
  add_duration_option(app, "--duration", o.duration_s, "at least this long in seconds, e.g. 500ms, in whole periods (overrides --periods)");
  app.add_option("--amplitude", o.amplitude, "peak of the whole waveform (WAV: fraction of full scale, <= 1)")
      ->capture_default_str()
      ->type_name("A");
  app.add_option("--format", a->format, "pcm16, pcm24, float (WAV) or csv; default: csv for .csv, else pcm24")
      ->type_name("FMT");
  app.add_option("--channels", o.channels, "channels in the file, each an identical copy")
      ->capture_default_str()
      ->type_name("N");
  app.add_option("--json", a->json_path, "write a summary as JSON to PATH ('-' = stdout, instead of the text)")
      ->type_name("PATH");

  return [a]() -> int {
    io::OutputSet outputs({{"OUT", a->out_path}, {"--json", a->json_path}}, {{"--spectrum-file", a->spectrum_path}});
    auto& opt = a->options;
    opt.phases = predict::parse_phase_rule(a->phases);
    opt.adjust = a->adjust == "rate" ? predict::LoopAdjust::rate : predict::LoopAdjust::f0;
    opt.format = !a->format.empty() ? predict::parse_sample_format(a->format)
                 : ends_with_csv(a->out_path) ? predict::SampleFormat::text
                                              : predict::SampleFormat::pcm24;
    if (!a->spectrum_path.empty())
      opt.spectrum = predict::parse_amplitude_spectrum(io::read_file(a->spectrum_path), a->spectrum_path);
    const predict::ExciteResult r = predict::generate_excitation(opt);
    outputs.set("OUT", output::excitation_bytes(r, a->out_path));
    if (outputs.requested("--json")) outputs.set("--json", output::json_text(output::excitation_json(r)));
    // Warnings follow a successful publication, so a failed one ends with its one error line.
    outputs.publish(outputs.stdout_free() ? output::excitation_text(r) : std::string());
    for (const auto& w : r.warnings) std::fprintf(stderr, "periodfit: warning: %s\n", terminal_text(w, false).c_str());
    return to_int(ExitCode::ok);
  };
}

}  // namespace periodfit::cli
