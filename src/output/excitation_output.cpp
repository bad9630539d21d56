// The excitation file, text and JSON (excitation_output.hpp).
#include "output/excitation_output.hpp"

#include <cmath>
#include <vector>

#include "core/number_format.hpp"
#include "core/table.hpp"
#include "io/audio_writer.hpp"
#include "io/output_file.hpp"
#include "output/json_writer.hpp"

// The results rendered here are the predict stage's; their names are used as predict spells them.
namespace periodfit::output {
using namespace predict;

std::string excitation_bytes(const ExciteResult& r, const std::string& path) {
  const std::size_t total = r.sample_count();
  if (r.format == SampleFormat::text) {
    std::string out = "time_s";
    if (r.channels == 1) out += ",value";
    else
      for (int c = 1; c <= r.channels; ++c) out += ",value_" + std::to_string(c);
    out += '\n';
    out.reserve(total * static_cast<std::size_t>(24 + 22 * r.channels));
    for (std::size_t k = 0; k < total; ++k) {
      out += format_shortest(static_cast<double>(k) / r.rate_hz);
      const std::string v = format_shortest(r.period[k % r.period.size()]);
      for (int c = 0; c < r.channels; ++c) {
        out += ',';
        out += v;
      }
      out += '\n';
    }
    return out;
  }
  std::vector<double> all(total);
  for (std::size_t k = 0; k < total; ++k) all[k] = r.period[k % r.period.size()];
  io::WavWriteOptions w;
  w.encoding = r.format == SampleFormat::pcm16   ? io::AudioEncoding::pcm16
               : r.format == SampleFormat::pcm24 ? io::AudioEncoding::pcm24
                                                 : io::AudioEncoding::float32;
  w.channels = r.channels;
  return io::wav_bytes(all, r.rate_hz, w, path);
}

void write_excitation(const std::string& path, const ExciteResult& r) {
  io::write_file_atomic(path, excitation_bytes(r, path));
}

std::string excitation_text(const ExciteResult& r) {
  const auto g = [](double v) { return format_significant(v, 9); };
  std::vector<std::pair<std::string, std::string>> kv;
  kv.emplace_back("signal", r.method);
  kv.emplace_back("f0", g(r.f0_hz) + " Hz" + (r.adjusted == LoopAdjust::f0 ? " (adjusted from " + g(r.f0_requested_hz) + " Hz)" : ""));
  kv.emplace_back("sample rate",
                  g(r.rate_hz) + " Hz" + (r.adjusted == LoopAdjust::rate ? " (adjusted from " + g(r.rate_requested_hz) + " Hz)" : ""));
  kv.emplace_back("samples per period", std::to_string(r.samples_per_period));
  kv.emplace_back("periods", std::to_string(r.periods) + " (" + std::to_string(r.sample_count()) + " samples, " +
                                 format_significant(static_cast<double>(r.sample_count()) / r.rate_hz, 6) + " s)");
  kv.emplace_back("channels", std::to_string(r.channels) + (r.channels > 1 ? " (identical copies)" : ""));
  kv.emplace_back("format", std::string(sample_format_name(r.format)));
  kv.emplace_back("peak", format_significant(r.peak, 9) + " (requested " + g(r.amplitude_requested) + ")" +
                              (r.full_scale_code > 0 ? ", max code " + std::to_string(r.max_code) + " of " +
                                                           std::to_string(r.full_scale_code - 1)
                                                     : ""));
  kv.emplace_back("rms", format_significant(r.rms, 6));
  kv.emplace_back("crest factor", format_fixed(r.crest_factor, 4) + " (" +
                                      format_fixed(20 * std::log10(r.crest_factor), 2) + " dB)");
  if (r.phases == PhaseRule::random) kv.emplace_back("seed", std::to_string(r.seed));
  if (r.signal == "multisine") {
    std::string list;
    const std::size_t show = std::min<std::size_t>(r.harmonics.size(), 12);
    for (std::size_t i = 0; i < show; ++i) list += (i ? "," : "") + std::to_string(r.harmonics[i].n);
    if (show < r.harmonics.size()) list += ",… (" + std::to_string(r.harmonics.size()) + " in all)";
    kv.emplace_back("harmonics", list);
  }
  return render_key_values(kv);
}

nlohmann::ordered_json excitation_json(const ExciteResult& r) {
  nlohmann::ordered_json j;
  j["status"] = code(r.status);
  j["signal"] = r.signal;
  j["method"] = r.method;
  j["seed"] = r.phases == PhaseRule::random ? nlohmann::ordered_json(r.seed) : nlohmann::ordered_json(nullptr);
  j["f0_requested_hz"] = r.f0_requested_hz;
  j["f0_hz"] = r.f0_hz;
  j["rate_requested_hz"] = r.rate_requested_hz;
  j["rate_hz"] = r.rate_hz;
  j["adjusted"] = !r.adjusted ? "none" : *r.adjusted == LoopAdjust::f0 ? "f0" : "rate";
  j["samples_per_period"] = r.samples_per_period;
  j["periods"] = r.periods;
  j["samples"] = r.sample_count();
  j["channels"] = r.channels;
  j["format"] = sample_format_name(r.format);
  j["amplitude_requested"] = r.amplitude_requested;
  j["peak"] = r.peak;
  j["rms"] = r.rms;
  j["crest_factor"] = r.crest_factor;
  j["crest_factor_db"] = 20 * std::log10(r.crest_factor);
  j["max_code"] = r.full_scale_code > 0 ? nlohmann::ordered_json(r.max_code) : nlohmann::ordered_json(nullptr);
  j["full_scale_code"] = r.full_scale_code > 0 ? nlohmann::ordered_json(r.full_scale_code) : nlohmann::ordered_json(nullptr);
  nlohmann::ordered_json hs = nlohmann::ordered_json::array();
  for (const auto& h : r.harmonics)
    hs.push_back({{"n", h.n}, {"freq_hz", h.freq_hz}, {"amplitude", h.amplitude}, {"phase_deg", h.phase_deg}});
  j["harmonics"] = std::move(hs);
  j["warnings"] = r.warnings;
  return j;
}

}  // namespace periodfit::output
