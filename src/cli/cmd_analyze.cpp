// periodfit analyze FILE: lock onto each channel's fundamental and report its harmonics with
// uncertainties, THD, THD+N, SINAD, SNR and ENOB, as aligned text, JSON and/or CSV.
#include <cstdio>
#include <memory>
#include <string>
#include <vector>

#include "cli/capture_options.hpp"
#include "core/safe_text.hpp"
#include "cli/commands.hpp"
#include "core/exit_code.hpp"
#include "output/analysis_output.hpp"
#include "dsp/harmonics.hpp"
#include "io/capture_reader.hpp"
#include "io/output_set.hpp"
#include "output/json_writer.hpp"
#include "report/result_plots.hpp"
#include "report/svg_plot.hpp"

namespace periodfit::cli {

namespace {
struct AnalyzeArgs {
  std::string file;
  std::vector<std::string> channels;  ///< empty = every data channel
  std::string json_path;              ///< "" = none; "-" = stdout instead of the text
  std::string csv_path;               ///< "" = none; "-" = stdout instead of the text
  std::string plot_path;              ///< "" = none; else the harmonic spectrum as SVG
  dsp::AnalyzeOptions options;
  io::ReadOptions read;
};
}  // namespace

Runner add_analyze(CLI::App& app) {
  auto args = std::make_shared<AnalyzeArgs>();
  auto& lock = args->options.lock;
  app.add_option("FILE", args->file, "capture to analyse (CSV or audio)")->required()->type_name("FILE");
  app.add_option("--channel", args->channels,
                 "channel to analyse: a name, or #N for the data channel at 0-based position N (repeatable; default: all)")
      ->type_name("CH")
      ->allow_extra_args(false);
  add_fundamental_options(app, lock.f0_hz, lock.f0_hint_hz, lock.max_harmonic);
  app.add_option("--samples-per-period", args->options.samples_per_period,
                 "samples per period of the locked grid (0 = automatic)")
      ->capture_default_str()
      ->type_name("M");
  app.add_option_function<std::string>(
         "--full-scale",
         [args](const std::string& text) { args->options.full_scale_range = parse_full_scale(text, "--full-scale"); },
         "the digitiser's full-scale range in the channel's unit, for ENOB (IEEE Std 1241): peak-to-peak "
         "(2) or MIN:MAX (-1:1); default: ±1 FS for audio files, none (ENOB not reported) for CSV")
      ->type_name("RANGE");
  app.add_option("--json", args->json_path,
                 "also write the results as JSON to PATH ('-' = stdout, instead of the text)")
      ->type_name("PATH");
  app.add_option("--plot", args->plot_path,
                 "write the harmonic spectrum (dB, one panel per channel) as SVG to PATH")
      ->type_name("PATH");
  app.add_option("--csv", args->csv_path,
                 "also write the harmonics table as CSV to PATH ('-' = stdout, instead of the text)")
      ->type_name("PATH");
  add_capture_options(app, args->read);
  return [args]() -> int {
    // Outputs are checked before the work and published together after it: exit 2 leaves none.
    io::OutputSet outputs({{"--json", args->json_path}, {"--csv", args->csv_path}, {"--plot", args->plot_path}},
                          {{"FILE", args->file}});
    const Capture capture = io::read_capture(args->file, args->read);
    const dsp::AnalyzeReport report = dsp::analyze_capture(capture, args->channels, args->options);
    if (outputs.requested("--json")) outputs.set("--json", output::json_text(output::analyze_json(report)));
    if (outputs.requested("--csv")) outputs.set("--csv", output::harmonics_csv(report));
    if (outputs.requested("--plot"))
      outputs.set("--plot", report::svg_document(report::analyze_spectra_figure(report)));
    // Warnings follow a successful publication, so a failed one ends with its one error line.
    outputs.publish(outputs.stdout_free() ? output::analyze_text(report) : std::string());
    for (const auto& w : channel_selector_warnings(capture, args->channels, args->read))
      std::fprintf(stderr, "periodfit: warning: %s\n", terminal_text(w, false).c_str());
    for (const auto& channel : report.channels)
      for (const auto& flag : channel.flags)
        std::fprintf(stderr, "periodfit: warning: channel \"%s\": %s\n",
                     terminal_text(channel.name, false).c_str(),
                     terminal_text(flag.message, false).c_str());
    return to_int(ExitCode::ok);
  };
}

}  // namespace periodfit::cli
