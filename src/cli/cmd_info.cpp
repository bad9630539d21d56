// periodfit info FILE…: what a bench user checks of a capture before analysing it (length in
// periods, clock regularity, code step, flat samples, dc and rms), as text and/or JSON.
#include <cstdio>
#include <memory>
#include <string>
#include <vector>

#include "cli/capture_options.hpp"
#include "cli/commands.hpp"
#include "core/exit_code.hpp"
#include "dsp/capture_survey.hpp"
#include "io/capture_reader.hpp"
#include "io/info.hpp"
#include "output/info_output.hpp"
#include "io/output_set.hpp"
#include "output/json_writer.hpp"

namespace periodfit::cli {

namespace {
struct InfoArgs {
  std::vector<std::string> files;
  std::string json_path;  ///< "" = no JSON; "-" = JSON on stdout instead of the text
  io::ReadOptions read;
};
}  // namespace

Runner add_info(CLI::App& app) {
  auto args = std::make_shared<InfoArgs>();
  app.add_option("FILE", args->files, "captures to describe (CSV or audio)")->required()->type_name("FILE");
  app.add_option("--json", args->json_path, "also write the info as JSON to PATH ('-' = stdout, instead of the text)")
      ->type_name("PATH");
  add_capture_options(app, args->read);
  return [args]() -> int {
    std::vector<io::OutputSet::Named> inputs;
    for (const auto& path : args->files) inputs.push_back({"FILE", path});
    io::OutputSet outputs({{"--json", args->json_path}}, inputs);
    // Every file is read before anything is shown, so an error leaves no partial result.
    std::vector<io::CaptureInfo> infos;
    for (const auto& path : args->files) infos.push_back(dsp::survey_capture(io::read_capture(path, args->read)));
    // Names and metadata are bytes from the file, not always UTF-8: invalid sequences are
    // written as U+FFFD so the JSON stays valid (docs/robustness.md, entry 16).
    if (outputs.requested("--json")) outputs.set("--json", output::json_text(output::info_json(infos)));
    std::string text;
    if (outputs.stdout_free())
      for (std::size_t i = 0; i < infos.size(); ++i) text += (i ? "\n" : "") + output::info_text(infos[i]);
    outputs.publish(text);
    return to_int(ExitCode::ok);
  };
}

}  // namespace periodfit::cli
