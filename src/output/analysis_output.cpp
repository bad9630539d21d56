// JSON, CSV and text renderings of an analysis (see analysis_output.hpp, docs/analyze-json.md).
#include "output/analysis_output.hpp"

#include <cmath>
#include <string>

#include "core/error.hpp"
#include "core/number_format.hpp"
#include "core/safe_text.hpp"
#include "core/table.hpp"
#include "output/json_writer.hpp"

// The results rendered here are the dsp stage's; their names are used as dsp spells them.
namespace periodfit::output {
using namespace dsp;

namespace {

std::string shortest(double v) { return std::isfinite(v) ? format_shortest(v) : ""; }

std::string people(double v, int digits = 6) {
  return std::isfinite(v) ? format_significant(v, digits) : "undefined";
}

std::string db(double v) { return std::isfinite(v) ? format_fixed(v, 2) + " dB" : "undefined"; }

std::string percent(double ratio) {
  return std::isfinite(ratio) ? format_significant(100 * ratio, 4) + " %" : "undefined";
}

}  // namespace

nlohmann::ordered_json harmonic_selection_json(const dsp::HarmonicSelection& s) {
  nlohmann::ordered_json j;
  j["count"] = s.count;
  j["automatic"] = s.automatic;
  j["rule"] = code(s.rule);
  j["family_alpha"] = s.family_alpha > 0 ? json_number(s.family_alpha) : nlohmann::ordered_json(nullptr);
  j["noise_basis"] = s.noise_basis;
  j["highest_examined"] = s.highest_examined;
  j["significant"] = s.significant;
  j["highest_significant"] = s.highest_significant;
  j["truncated_lines"] = s.truncated_lines;
  j["truncated_dbc"] = s.truncated_lines > 0 ? json_number(s.truncated_dbc) : nlohmann::ordered_json(nullptr);
  return j;
}

std::string harmonic_selection_text(const dsp::HarmonicSelection& s) {
  std::string out;
  const std::string range = "harmonics 1…" + std::to_string(s.highest_examined);
  if (s.family_alpha > 0) {
    const std::string test = "Holm F test at α = " + format_shortest(s.family_alpha) + " (" + s.noise_basis +
                             " noise) over " + range + ": " + std::to_string(s.significant) + " significant" +
                             (s.highest_significant > 0 ? ", highest " + std::to_string(s.highest_significant) : "");
    out += s.automatic ? "automatic: " + test : "given; " + test;
  } else {
    out += s.automatic ? "automatic: under 2 whole periods, no local noise to test " + range +
                             " against; all below 0.45·fs, at most 50"
                       : "given";
  }
  return out;
}

namespace {

/// "fit": the f0 fit behind the harmonics.
nlohmann::ordered_json fit_json(const ChannelAnalysis& c) {
  nlohmann::ordered_json fit;
  fit["harmonics"] = c.fundamental.harmonics_fitted;
  fit["dof"] = c.fundamental.dof;
  fit["residual_rms"] = json_number(c.fundamental.residual_rms);
  fit["iterations"] = c.fundamental.iterations;
  fit["converged"] = c.fundamental.converged;
  fit["condition"] = json_number(c.fundamental.condition);
  fit["f0_u_noise_factor"] = json_number(c.f0_u_noise_factor);
  return fit;
}

/// "drift": the halves' f0 (null when the record is under 4 periods).
nlohmann::ordered_json drift_json(const ChannelAnalysis& c) {
  nlohmann::ordered_json drift;
  const bool checked = c.f0_first_half_hz > 0;
  drift["checked"] = checked;
  drift["f0_first_half_hz"] = checked ? json_number(c.f0_first_half_hz) : nullptr;
  drift["f0_second_half_hz"] = checked ? json_number(c.f0_second_half_hz) : nullptr;
  drift["sigmas"] = checked ? json_number(c.drift_sigmas) : nullptr;
  return drift;
}

/// "baseline": the Legendre trend under the signal.
nlohmann::ordered_json baseline_json(const ChannelAnalysis& c, double a1) {
  nlohmann::ordered_json baseline;
  baseline["method"] = "legendre-2";
  baseline["significant"] = c.baseline.significant;
  baseline["modelled"] = c.baseline_modelled;
  baseline["peak_to_peak"] = json_number(c.baseline.peak_to_peak);
  baseline["peak_to_peak_dbc"] = a1 > 0 && c.baseline.peak_to_peak > 0
                                     ? json_number(20 * std::log10(c.baseline.peak_to_peak / a1))
                                     : nlohmann::ordered_json(nullptr);
  baseline["c1"] = json_number(c.baseline.c1);
  baseline["c2"] = json_number(c.baseline.c2);
  baseline["z1"] = json_number(c.baseline.z1);
  baseline["z2"] = json_number(c.baseline.z2);
  return baseline;
}

/// "residual_lines": lines beside the harmonics.
nlohmann::ordered_json residual_lines_json(const ChannelAnalysis& c, double a1) {
  nlohmann::ordered_json lines;
  lines["threshold_db"] = json_number(c.residual_lines.threshold_db);
  lines["bins_examined"] = c.residual_lines.bins_examined;
  lines["explained_share"] = json_number(c.explained_share);
  nlohmann::ordered_json list = nlohmann::ordered_json::array();
  for (const auto& l : c.residual_lines.lines) {
    nlohmann::ordered_json row;
    row["freq_hz"] = json_number(l.freq_hz);
    row["amplitude"] = json_number(l.amplitude);
    row["level_dbc"] = a1 > 0 ? json_number(20 * std::log10(l.amplitude / a1)) : nlohmann::ordered_json(nullptr);
    row["over_floor_db"] = json_number(l.over_floor_db);
    list.push_back(row);
  }
  lines["lines"] = list;
  return lines;
}

/// "harmonics": n = 1…H with uncertainties and covariance.
nlohmann::ordered_json harmonics_json(const ChannelAnalysis& c) {
  nlohmann::ordered_json harmonics = nlohmann::ordered_json::array();
  for (const auto& h : c.harmonics) {
    nlohmann::ordered_json row;
    row["n"] = h.n;
    row["freq_hz"] = json_number(h.freq_hz);
    row["amplitude"] = json_number(h.amplitude);
    row["amplitude_u"] = json_number(h.amplitude_u);
    row["phase_deg"] = json_number(h.phase_deg);
    row["phase_u_deg"] = json_number(h.phase_u_deg);
    row["significant"] = h.significant;
    row["amplitude_lo"] = json_number(h.amplitude_lo);
    row["amplitude_hi"] = json_number(h.amplitude_hi);
    row["phase_defined"] = h.phase_defined;
    row["phase_note"] = h.phase_defined ? nlohmann::ordered_json(nullptr)
                                        : nlohmann::ordered_json("undefined: amplitude consistent with 0 at 95 %");
    row["cov_re_re"] = json_number(h.cov_re_re);
    row["cov_im_im"] = json_number(h.cov_im_im);
    row["cov_re_im"] = json_number(h.cov_re_im);
    harmonics.push_back(row);
  }
  return harmonics;
}

}  // namespace

nlohmann::ordered_json channel_json(const ChannelAnalysis& c) {
  nlohmann::ordered_json j;
  j["name"] = c.name;
  j["unit"] = c.unit;
  j["status"] = code(c.status);
  j["f0_hz"] = json_number(c.fundamental.f0_hz);
  j["f0_u_hz"] = json_number(c.fundamental.f0_u_hz);
  j["f0_method"] = code(c.fundamental.method);
  j["periods"] = json_number(c.periods);
  j["whole_periods"] = c.whole_periods;
  j["samples_per_period"] = c.samples_per_period;
  j["dc"] = json_number(c.dc);
  j["dc_u"] = json_number(c.dc_u);
  j["rms"] = json_number(c.rms);
  j["peak"] = json_number(c.peak_abs);
  j["crest_factor"] = json_number(c.crest_factor);
  j["thd"] = json_number(c.distortion.thd);
  j["thd_r"] = json_number(c.distortion.thd_r);
  j["thd_above_noise"] = c.distortion.thd_above_noise;
  j["thd_upper"] = json_number(c.distortion.thd_upper);
  j["thd_n"] = json_number(c.distortion.thd_n);
  j["sinad_db"] = json_number(c.distortion.sinad_db);
  j["snr_db"] = json_number(c.distortion.snr_db);
  j["enob_bits"] = std::isfinite(c.distortion.enob_bits) ? json_number(c.distortion.enob_bits)
                                                           : nlohmann::ordered_json(nullptr);
  j["full_scale_range"] = c.full_scale_range > 0 ? json_number(c.full_scale_range)
                                                 : nlohmann::ordered_json(nullptr);
  j["enob_note"] = c.enob_note;
  j["nad_rms"] = json_number(c.distortion.nad_rms);
  j["noise_rms"] = json_number(c.noise_rms);
  j["noise_floor"] = json_number(c.noise_floor);
  j["noise_floor_dbc"] = json_number(c.noise_floor_dbc);
  j["noise_method"] = c.noise_method;
  j["noise_dof"] = c.noise_dof;
  j["period_scatter_ratio"] = json_number(c.period_scatter_ratio);
  j["quantisation_step"] = c.quantisation_step > 0 ? json_number(c.quantisation_step) : nlohmann::ordered_json(nullptr);
  j["f0_free_hz"] = c.f0_free_hz > 0 ? json_number(c.f0_free_hz) : nlohmann::ordered_json(nullptr);
  j["f0_free_u_hz"] = c.f0_free_hz > 0 ? json_number(c.f0_free_u_hz) : nlohmann::ordered_json(nullptr);
  j["fit"] = fit_json(c);
  j["harmonic_selection"] = harmonic_selection_json(c.selection);
  j["drift"] = drift_json(c);
  // Levels relative to the fundamental (dBc) are null without one.
  const double a1 = c.harmonics.empty() ? 0 : c.harmonics.front().amplitude;
  j["baseline"] = baseline_json(c, a1);
  j["residual_lines"] = residual_lines_json(c, a1);
  nlohmann::ordered_json flags = nlohmann::ordered_json::array();
  nlohmann::ordered_json warnings = nlohmann::ordered_json::array();
  for (const auto& f : c.flags) {
    flags.push_back(std::string(code(f.flag)));
    warnings.push_back(f.message);
  }
  j["flags"] = flags;
  j["warnings"] = warnings;
  j["harmonics"] = harmonics_json(c);
  return j;
}

nlohmann::ordered_json analyze_json(const AnalyzeReport& r) {
  nlohmann::ordered_json j;
  j["source"] = r.source;
  j["format"] = r.format;
  j["sample_rate_hz"] = json_number(r.sample_rate_hz);
  j["t0_s"] = json_number(r.t0_s);
  j["samples"] = r.samples;
  nlohmann::ordered_json channels = nlohmann::ordered_json::array();
  for (const auto& c : r.channels) channels.push_back(channel_json(c));
  j["channels"] = channels;
  return j;
}

std::string harmonics_csv(const AnalyzeReport& r) {
  std::string out = "channel,unit,n,freq_hz,amplitude,amplitude_u,phase_deg,phase_u_deg,significant\n";
  for (const auto& c : r.channels)
    for (const auto& h : c.harmonics)
      out += csv_cell(c.name) + "," + csv_cell(c.unit) + "," + std::to_string(h.n) + "," +
             shortest(h.freq_hz) + "," + shortest(h.amplitude) + "," + shortest(h.amplitude_u) + "," +
             shortest(h.phase_deg) + "," + shortest(h.phase_u_deg) + "," +
             (h.significant ? "yes" : "no") + "\n";
  return out;
}

std::string analyze_text(const AnalyzeReport& r) {
  std::string out = r.source + ": " + r.format + ", " + people(r.sample_rate_hz, 9) + " Hz, " +
                    std::to_string(r.samples) + " samples\n";
  for (const auto& c : r.channels) {
    const std::string u = c.unit.empty() ? "" : " " + c.unit;
    out += "\n" + c.name + (c.unit.empty() ? "" : " [" + c.unit + "]") + "\n";
    std::vector<std::pair<std::string, std::string>> kv;
    // Standard uncertainties are labelled u and set the digits printed (GUM 7.2.6).
    std::string f0 = c.fundamental.f0_u_hz > 0 ? format_with_u(c.fundamental.f0_hz, c.fundamental.f0_u_hz, "Hz")
                                               : people(c.fundamental.f0_hz, 10) + " Hz";
    f0 += " (" + std::string(code(c.fundamental.method)) + ", " + std::to_string(c.fundamental.harmonics_fitted) + " harmonics)";
    kv.emplace_back("f0", f0);
    kv.emplace_back("periods", people(c.periods, 6) + " (" + std::to_string(c.whole_periods) +
                                   " locked, " + std::to_string(c.samples_per_period) +
                                   " samples per period)");
    kv.emplace_back("harmonics", std::to_string(c.selection.count) + " (" + harmonic_selection_text(c.selection) + ")");
    kv.emplace_back("dc", format_with_u(c.dc, c.dc_u, c.unit));
    kv.emplace_back("rms", people(c.rms) + u + ", crest factor " + people(c.crest_factor, 4));
    kv.emplace_back("THD", c.distortion.thd_above_noise
                               ? percent(c.distortion.thd) + " (THD_R " + percent(c.distortion.thd_r) + ")"
                               : "< " + percent(c.distortion.thd_upper) +
                                     " (95 % bound: the harmonics are within the noise)");
    kv.emplace_back("THD+N", percent(c.distortion.thd_n) + ", SINAD " + db(c.distortion.sinad_db) +
                                 ", SNR " + db(c.distortion.snr_db));
    kv.emplace_back("ENOB", std::isfinite(c.distortion.enob_bits)
                                ? format_fixed(c.distortion.enob_bits, 2) + " bits (full scale " +
                                      people(c.full_scale_range, 6) + u + " peak-to-peak, " + c.enob_note + ")"
                                : "not reported: " + c.enob_note);
    if (c.baseline.significant)
      kv.emplace_back("baseline", "drifts " + people(c.baseline.peak_to_peak, 3) + u + " peak-to-peak" +
                                      (c.baseline_modelled ? " (fitted, not counted as noise)" : " (counted as noise)"));
    kv.emplace_back("noise floor", people(c.noise_floor, 3) + u + " per line (" +
                                       format_fixed(c.noise_floor_dbc, 1) + " dBc)");
    kv.emplace_back("uncertainty", c.noise_method + ", " + std::to_string(c.noise_dof) + " dof");
    std::string flags;
    for (const auto& f : c.flags) flags += (flags.empty() ? "" : ", ") + std::string(code(f.flag));
    kv.emplace_back("flags", flags.empty() ? "none" : flags);
    out += render_key_values(kv, 2);
    // Each u column is the standard uncertainty of the column to its left, in its unit; the
    // last says whether the line stands out of the noise (JSON/CSV "significant") and when its
    // phase is undefined because the amplitude is consistent with 0.
    const std::string per = c.unit.empty() ? "" : "/" + c.unit;
    Table t({{"n"}, {"freq/Hz"}, {"amplitude" + per}, {"u" + per}, {"phase/deg"}, {"u/deg"},
                     {"significant", Table::Align::left}});
    for (const auto& h : c.harmonics) {
      const ValueText amplitude = format_value_u(h.amplitude, h.amplitude_u);
      const ValueText phase = format_value_u(h.phase_deg, h.phase_u_deg);
      t.add_row({std::to_string(h.n), people(h.freq_hz, 8), amplitude.value, amplitude.u,
                 h.phase_defined ? phase.value : "undefined", h.phase_defined ? phase.u : "-",
                 std::string(h.significant ? "yes" : "no") +
                     (h.phase_defined ? "" : " (amplitude consistent with 0: phase undefined)")});
    }
    out += "\n" + t.render(2);
  }
  return out;
}

}  // namespace periodfit::output
