// JSON and text renderings of a capture description (info_output.hpp, docs/info-json.md).
#include "output/info_output.hpp"

#include <cmath>

#include "core/number_format.hpp"
#include "core/table.hpp"
#include "output/json_writer.hpp"

// The descriptions rendered here are the io stage's; their names are used as io spells them.
namespace periodfit::output {
using namespace io;

nlohmann::ordered_json info_json(const CaptureInfo& info) {
  nlohmann::ordered_json j;
  j["source"] = info.source;
  j["format"] = info.format;
  j["sample_rate_hz"] = info.sample_rate_hz;
  j["t0_s"] = info.t0_s;
  j["samples"] = info.samples;
  j["duration_s"] = info.duration_s;
  j["rate_source"] = rate_source_code(info.time_base.source);
  j["time_steps"] = info.time_base.steps;
  j["step_deviation_rms_s"] = info.time_base.step_deviation_rms_s;
  j["step_deviation_max_s"] = info.time_base.step_deviation_max_s;
  j["time_printed_resolution_s"] = info.time_base.printed_resolution_s;
  j["channels"] = nlohmann::ordered_json::array();
  for (const auto& c : info.channels) {
    nlohmann::ordered_json cj;
    cj["name"] = c.name;
    cj["unit"] = c.unit;
    cj["min"] = c.min;
    cj["max"] = c.max;
    cj["mean"] = c.mean;
    cj["rms"] = c.rms;
    cj["ac_rms"] = c.ac_rms;
    cj["code_step"] = c.code_step;
    cj["levels"] = c.levels;
    cj["flat_at_extremes"] = c.flat_at_extremes;
    cj["f0_hz"] = c.f0_hz ? nlohmann::ordered_json(*c.f0_hz) : nlohmann::ordered_json(nullptr);
    cj["periods"] = c.f0_hz ? nlohmann::ordered_json(*c.f0_hz * info.duration_s) : nlohmann::ordered_json(nullptr);
    cj["f0_note"] = c.f0_note;
    j["channels"].push_back(std::move(cj));
  }
  j["metadata"] = nlohmann::ordered_json::array();
  for (const auto& [key, value] : info.metadata)
    j["metadata"].push_back(nlohmann::ordered_json{{"key", key}, {"value", value}});
  return j;
}

nlohmann::ordered_json info_json(const std::vector<CaptureInfo>& files) {
  nlohmann::ordered_json j;
  j["periodfit_info"] = 1;
  j["files"] = nlohmann::ordered_json::array();
  for (const auto& f : files) j["files"].push_back(info_json(f));
  return j;
}

namespace {

std::string with_unit(double v, const std::string& unit) {
  return format_significant(v) + (unit.empty() ? "" : " " + unit);
}

std::string clock_line(const CaptureInfo& info) {
  const TimeBase& b = info.time_base;
  switch (b.source) {
    case TimeBase::Source::rate_option: return "given on the command line (--rate)";
    case TimeBase::Source::preamble: return "stated in the preamble (no time column)";
    case TimeBase::Source::audio_header: return "from the audio header";
    case TimeBase::Source::time_column: break;
  }
  std::string line = "from the time column: " + std::to_string(b.steps) + " steps, each within " +
                     format_significant(b.step_deviation_max_s, 2) + " s of the mean step (rms " +
                     format_significant(b.step_deviation_rms_s, 2) + " s)";
  if (b.printed_resolution_s > 0)
    line += "; times printed to " + format_significant(b.printed_resolution_s, 2) + " s";
  return line;
}

}  // namespace

std::string info_text(const CaptureInfo& info) {
  // A block per file, then a few lines per channel: what a bench user checks before analysing
  // (is the record long enough, is the clock regular, is the resolution enough, is it clipped).
  std::string out = info.source + "  (" + info.format + ", " + std::to_string(info.channels.size()) +
                    (info.channels.size() == 1 ? " channel)\n" : " channels)\n");
  out += render_key_values(
      {
          {"record", std::to_string(info.samples) + " samples at " + format_significant(info.sample_rate_hz, 9) +
                         " Hz = " + format_significant(info.duration_s, 9) + " s, first sample at t = " +
                         format_significant(info.t0_s, 9) + " s"},
          {"clock", clock_line(info)},
      },
      2);
  for (const auto& c : info.channels) {
    out += "\n  " + c.name + (c.unit.empty() ? " (no unit)" : " [" + c.unit + "]") + "\n";
    std::string fundamental;
    if (c.f0_hz)
      fundamental = format_significant(*c.f0_hz, 7) + " Hz: " +
                    format_significant(*c.f0_hz * info.duration_s, 4) + " periods in the record";
    else
      fundamental = "none found" + (c.f0_note.empty() ? std::string() : " (" + c.f0_note + ")");
    std::string step;
    if (c.levels <= 1)
      step = "one level only (constant)";
    else if (c.code_step == 0)
      step = "none: the values are continuous (" + std::to_string(c.levels) + " distinct levels)";
    else
      step = with_unit(c.code_step, c.unit) + " (" + format_significant(std::log2((c.max - c.min) / c.code_step + 1), 3) +
             " bits to code the span), " + std::to_string(c.levels) + " distinct levels";
    std::string flat = std::to_string(c.flat_at_extremes);
    if (c.flat_at_extremes > 0)
      flat += " held at the min or max in runs of " + std::to_string(kFlatRun) +
              " or more (clipping, or flat tops by design)";
    out += render_key_values(
        {
            {"fundamental", fundamental},
            {"dc", with_unit(c.mean, c.unit)},
            {"ac rms", with_unit(c.ac_rms, c.unit) + " (total rms " + with_unit(c.rms, c.unit) + ")"},
            {"span", with_unit(c.min, c.unit) + " to " + with_unit(c.max, c.unit)},
            {"code step", step},
            {"flat samples", flat},
        },
        4);
  }
  if (!info.metadata.empty()) {
    out += "\n  preamble\n";
    out += render_key_values(info.metadata, 4);
  }
  return out;
}

}  // namespace periodfit::output
