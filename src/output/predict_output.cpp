// Text, CSV and JSON renderings of a steady-state prediction (predict_output.hpp).
#include "output/predict_output.hpp"

#include <cmath>
#include <complex>
#include <string_view>

#include "core/number_format.hpp"
#include "core/table.hpp"
#include "output/json_writer.hpp"

// The results rendered here are the predict stage's; their names are used as predict spells them.
namespace periodfit::output {
using namespace predict;

std::string predict_text(const PredictResult& r, std::size_t list_harmonics) {
  const auto g = [](double v) { return format_significant(v, 6); };
  // A standard uncertainty is labelled u and sets the digits (GUM 7.2.6, format_with_u).
  const auto with_u = [&](double v, double u, std::string_view unit = "") {
    return r.has_uncertainty ? format_with_u(v, u, unit) : g(v) + (unit.empty() ? "" : " " + std::string(unit));
  };
  std::vector<std::pair<std::string, std::string>> kv;
  kv.emplace_back("method", r.method);
  kv.emplace_back("status", std::string(code(r.status)));
  kv.emplace_back("f0", g(r.f0_hz) + " Hz");
  std::string count = std::to_string(r.harmonics) + " (" + std::string(code(r.harmonic_count_method));
  if (std::isfinite(r.input_left_out_fraction))
    count += "; input energy left out " + format_significant(r.input_left_out_fraction, 3) + " of the total";
  kv.emplace_back("harmonics used", count + ")");
  if (std::isfinite(r.output_tail_estimate))
    kv.emplace_back("output tail",
                    r.output_tail_method == TailMethod::none
                        ? std::string("0 (the input's series ends at N)")
                        : format_significant(r.output_tail_estimate, 3) + " (sum of |Y_n| over n > N: " +
                              std::string(code(r.output_tail_method)) + ", explicit to n = " + std::to_string(r.tail_checked_to) + ")");
  else
    kv.emplace_back("output tail", "unknown (no model or closed form beyond the harmonics used)");
  kv.emplace_back("dc", with_u(r.dc, r.dc_u));
  kv.emplace_back("rms", with_u(r.rms, r.rms_u));
  kv.emplace_back("min / max", g(r.min) + " / " + g(r.max));
  kv.emplace_back("ripple (peak-to-peak)", with_u(r.ripple_pp, r.ripple_pp_u));
  kv.emplace_back("THD", r.thd_defined ? with_u(100 * r.thd, 100 * r.thd_u, "%") : "undefined (no fundamental)");
  if (r.has_uncertainty) {
    std::string sources;
    for (std::size_t i = 0; i < r.uncertainty_sources.size(); ++i) sources += (i ? " + " : "") + r.uncertainty_sources[i];
    kv.emplace_back("u includes", sources);
  }
  if (!r.flags.empty()) {
    std::string f;
    for (std::size_t i = 0; i < r.flags.size(); ++i) f += (i ? ", " : "") + std::string(code(r.flags[i]));
    kv.emplace_back("flags", f);
  }
  std::string out = render_key_values(kv);
  std::vector<Table::Column> cols{{"n"}, {"freq_Hz"}, {"amplitude"}};
  if (r.has_uncertainty) cols.push_back({"u_amplitude"});
  cols.push_back({"phase_deg"});
  if (r.has_uncertainty) cols.push_back({"u_phase_deg"});
  cols.push_back({"gain"});
  cols.push_back({"gain_phase_deg"});
  cols.push_back({"source", Table::Align::left});
  Table t(cols);
  const std::size_t listed =
      list_harmonics == 0 ? r.harmonics_out.size() : std::min(list_harmonics, r.harmonics_out.size());
  for (std::size_t i = 0; i < listed; ++i) {
    const auto& h = r.harmonics_out[i];
    std::vector<std::string> row{std::to_string(h.n), g(h.freq_hz)};
    if (r.has_uncertainty) {
      const ValueText amplitude = format_value_u(h.amplitude, h.amplitude_u);
      const ValueText phase = format_value_u(h.phase_deg, h.phase_u_deg);
      row.insert(row.end(), {amplitude.value, amplitude.u, phase.value, phase.u});
    } else {
      row.push_back(g(h.amplitude));
      row.push_back(format_fixed(h.phase_deg, 3));
    }
    row.push_back(g(std::abs(h.gain)));
    row.push_back(format_fixed(phase_deg(h.gain), 3));
    row.push_back(h.source);
    t.add_row(std::move(row));
  }
  out += "\n" + t.render();
  if (listed < r.harmonics_out.size())
    out += "(" + std::to_string(r.harmonics_out.size() - listed) +
           " more harmonics not listed here: --list 0 lists them, --json holds every one)\n";
  return out;
}

std::string format_predict_csv(const PredictResult& r) {
  const bool u = !r.value_u.empty();
  std::string out = u ? "time_s,value,value_u\n" : "time_s,value\n";
  out.reserve(r.value.size() * 48);
  for (std::size_t k = 0; k < r.value.size(); ++k) {
    out += format_shortest(r.time_s[k]);
    out += ',';
    out += format_shortest(r.value[k]);
    if (u) {
      out += ',';
      out += format_shortest(r.value_u[k]);
    }
    out += '\n';
  }
  return out;
}

nlohmann::ordered_json predict_json(const PredictResult& r) {
  using nlohmann::ordered_json;
  const auto u = [&](double v) { return r.has_uncertainty ? output::json_number(v) : ordered_json(nullptr); };
  ordered_json j;
  j["status"] = code(r.status);
  j["method"] = r.method;
  j["f0_hz"] = r.f0_hz;
  j["harmonics_used"] = r.harmonics;
  j["harmonic_count_method"] = code(r.harmonic_count_method);
  j["input_left_out_fraction"] = output::json_number(r.input_left_out_fraction);
  j["output_tail_estimate"] = output::json_number(r.output_tail_estimate);
  j["tail_checked_to"] = r.tail_checked_to;
  j["output_tail_method"] = code(r.output_tail_method);
  j["has_uncertainty"] = r.has_uncertainty;
  j["uncertainty_sources"] = r.uncertainty_sources;
  j["dc"] = r.dc;
  j["dc_u"] = u(r.dc_u);
  j["rms"] = r.rms;
  j["rms_u"] = u(r.rms_u);
  j["min"] = r.min;
  j["max"] = r.max;
  j["ripple_pp"] = r.ripple_pp;
  j["ripple_pp_u"] = u(r.ripple_pp_u);
  j["thd"] = r.thd_defined ? ordered_json(r.thd) : ordered_json(nullptr);
  j["thd_u"] = r.thd_defined ? u(r.thd_u) : ordered_json(nullptr);
  // Machine output is complete: every harmonic computed (--list shortens only the text).
  const std::size_t listed = r.harmonics_out.size();
  j["harmonics_listed"] = listed;
  ordered_json hs = ordered_json::array();
  for (std::size_t i = 0; i < listed; ++i) {
    const auto& h = r.harmonics_out[i];
    ordered_json e;
    e["n"] = h.n;
    e["freq_hz"] = h.freq_hz;
    e["amplitude"] = h.amplitude;
    e["phase_deg"] = h.phase_deg;
    e["amplitude_u"] = u(h.amplitude_u);
    e["phase_u_deg"] = u(h.phase_u_deg);
    e["input_amplitude"] = std::abs(h.input);
    e["input_phase_deg"] = phase_deg(h.input);
    e["gain_magnitude"] = std::abs(h.gain);
    e["gain_phase_deg"] = phase_deg(h.gain);
    e["source"] = h.source;
    hs.push_back(std::move(e));
  }
  j["harmonics"] = std::move(hs);
  j["samples"] = {{"rate_hz", r.rate_hz}, {"count", r.value.size()}, {"method", r.sampling_method},
                  {"dense_points", r.dense_points}};
  j["flags"] = codes(r.flags);
  j["warnings"] = r.warnings;
  return j;
}

}  // namespace periodfit::output
