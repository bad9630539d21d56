// periodfit frf: DUT frequency response with uncertainties, linearity check and an
// optional rational model. Maps options onto ident::IdentifyOptions, calls ident::identify,
// prints the report (or the JSON) and writes the files asked for.
#include <cstdio>
#include <memory>
#include <string>
#include <vector>

#include "cli/capture_options.hpp"
#include "core/safe_text.hpp"
#include "cli/commands.hpp"
#include "core/error.hpp"
#include "core/exit_code.hpp"
#include "ident/identify.hpp"
#include "output/identify_output.hpp"
#include "output/model_file.hpp"
#include "io/capture_reader.hpp"
#include "core/number_format.hpp"
#include "io/output_set.hpp"
#include "report/result_plots.hpp"
#include "report/svg_plot.hpp"
#include "output/json_writer.hpp"

namespace periodfit::cli {

namespace {

struct IdentifyArgs {
  std::string file;
  std::string output_file;
  std::string json_path;
  std::string model_path;
  std::string plot_path;
  io::ReadOptions read;  ///< --rate, --scale, --unit, --time-column
  ident::IdentifyOptions options;
};

bool has_channel(const Capture& c, const std::string& selector) {
  try {
    (void)c.channel_index(selector);
    return true;
  } catch (const UnknownNameError&) {
    return false;
  }
}

/// Two files: each --scale/--unit CH=… goes to the capture that has channel CH (the input
/// file first); a name neither has is an UnknownNameError listing the input file's channels.
void read_pair(const IdentifyArgs& a, Capture& input, Capture& output) {
  io::ReadOptions base = a.read;
  base.scales.clear();
  base.units.clear();
  input = io::read_capture(a.file, base);
  output = io::read_capture(a.output_file, base);
  io::ReadOptions in_opts, out_opts;
  const auto route = [&](const std::string& ch) -> io::ReadOptions& {
    return has_channel(input, ch) || !has_channel(output, ch) ? in_opts : out_opts;
  };
  for (const auto& s : a.read.scales) route(s.first).scales.push_back(s);
  for (const auto& u : a.read.units) route(u.first).units.push_back(u);
  io::apply_read_options(input, in_opts);
  io::apply_read_options(output, out_opts);
}

void warn(const std::string& message) { std::fprintf(stderr, "periodfit: warning: %s\n", terminal_text(message, false).c_str()); }

int run(const IdentifyArgs& a) {
  if (!a.model_path.empty() && a.options.order.empty())
    throw OptionError("--save-model", a.model_path, "needs a model: give --order M/N or --order auto");
  // Outputs are checked before the work and published together after it: exit 2 leaves none.
  io::OutputSet outputs({{"--json", a.json_path}, {"--save-model", a.model_path}, {"--plot", a.plot_path}},
                        {{"FILE", a.file}, {"--output-file", a.output_file}});
  ident::IdentifyResult r;
  std::vector<std::string> warnings;
  if (a.output_file.empty()) {
    const Capture capture = io::read_capture(a.file, a.read);
    warnings = channel_selector_warnings(capture, {a.options.input_channel, a.options.output_channel}, a.read);
    r = ident::identify(capture, a.options);
  } else {
    Capture input, output;
    read_pair(a, input, output);
    warnings = channel_selector_warnings(input, {a.options.input_channel});
    for (auto& w : channel_selector_warnings(output, {a.options.output_channel})) warnings.push_back(std::move(w));
    r = ident::identify(input, output, a.options);
  }
  if (outputs.requested("--json")) outputs.set("--json", output::json_text(output::identify_json(r)));
  if (outputs.requested("--plot")) outputs.set("--plot", report::svg_document(report::identify_bode_figure(r)));
  if (outputs.requested("--save-model") && r.model) {
    std::string source = r.input_source;
    if (r.output_source != r.input_source) source += ", " + r.output_source;
    outputs.set("--save-model", output::format_model_file(output::model_file_from_fit(
                                    *r.model, source, r.fundamental.f0_hz, ident::fit_points(r.frf))));
  }
  // Warnings follow a successful publication, so a failed one ends with its one error line.
  outputs.publish(outputs.stdout_free() ? output::format_identify_report(r) : std::string());
  for (const auto& w : warnings) warn(w);
  for (const auto& w : output::identify_warnings(r)) warn(w);
  return to_int(ExitCode::ok);
}

}  // namespace

Runner add_frf(CLI::App& app) {
  auto a = std::make_shared<IdentifyArgs>();
  app.add_option("FILE", a->file, "capture with the DUT input (and its output unless --output-file)")
      ->required()
      ->type_name("FILE");
  app.add_option("--input", a->options.input_channel,
                 "DUT input channel: a name, or #N for the data channel at 0-based position N")
      ->capture_default_str()
      ->type_name("CH");
  app.add_option("--output", a->options.output_channel,
                 "DUT output channel: a name or #N (default: #1; with --output-file, that file's only channel)")
      ->type_name("CH");
  app.add_option("--output-file", a->output_file,
                 "capture holding the output channel, recorded on the same time base (same rate and length)")
      ->type_name("FILE");
  add_duration_option(app, "--skew", a->options.frf.skew_s,
                      "extra delay of the output acquisition path in seconds (e.g. 12ns), removed as a phase "
                      "correction");
  add_fundamental_options(app, a->options.f0_hz, a->options.f0_hint_hz, a->options.max_harmonic, "the input");
  app.add_option("--min-snr", a->options.frf.min_snr_db,
                 "input power above the input noise floor, in dB, for a harmonic to count as excited")
      ->capture_default_str()
      ->type_name("DB");
  app.add_option("--order", a->options.order,
                 "fit B(s)/A(s)·e^(-sT) with numerator degree M and denominator degree N, or choose the order "
                 "(auto); none = FRF only")
      ->type_name("M/N|auto");
  app.add_flag("--delay", a->options.estimate_delay, "also estimate the dead time T of the model");
  app.add_option("--json", a->json_path, "also write the result as JSON to PATH ('-' = stdout, instead of the text)")
      ->type_name("PATH");
  app.add_option("--save-model", a->model_path, "write the fitted model with its covariance to PATH (needs --order)")
      ->type_name("PATH");
  app.add_option("--plot", a->plot_path,
                 "write a Bode plot (magnitude and phase with 95 % error bars and the model) as SVG to PATH")
      ->type_name("PATH");
  add_capture_options(app, a->read);
  return [a]() { return run(*a); };
}

}  // namespace periodfit::cli
