// JSON and text renderings of an identify result (identify_output.hpp, docs/frf-json.md).
#include "output/identify_output.hpp"

#include "output/analysis_output.hpp"

#include <cmath>
#include <numbers>
#include <optional>
#include <string>
#include <string_view>
#include <utility>

#include "core/number_format.hpp"
#include "core/table.hpp"
#include "output/json_writer.hpp"

// The results rendered here are the ident stage's; their names are used as ident spells them.
namespace periodfit::output {
using namespace ident;

namespace {

using json = nlohmann::ordered_json;

std::string list_harmonics(const std::vector<int>& n) {
  std::string s;
  for (std::size_t i = 0; i < n.size(); ++i) s += (i ? ", " : "") + std::to_string(n[i]);
  return s;
}

std::string sig(double v, int digits = 6) { return std::isfinite(v) ? format_significant(v, digits) : "-"; }

json root_json(const Root& p) {
  json j;
  j["re"] = output::json_number(p.value.real());
  j["im"] = output::json_number(p.value.imag());
  j["re_u"] = output::json_number(p.re_u);
  j["im_u"] = output::json_number(p.im_u);
  j["uncertainty_defined"] = p.uncertainty_defined;
  if (p.is_real) {
    j["time_constant_s"] = output::json_number(p.time_constant_s);
    j["time_constant_u_s"] = output::json_number(p.time_constant_u_s);
  } else {
    j["natural_frequency_rad_s"] = output::json_number(p.natural_frequency_rad_s);
    j["natural_frequency_u_rad_s"] = output::json_number(p.natural_frequency_u_rad_s);
    j["damping_ratio"] = output::json_number(p.damping_ratio);
    j["damping_ratio_u"] = output::json_number(p.damping_ratio_u);
    j["q_factor"] = output::json_number(p.q_factor);
    j["q_factor_u"] = output::json_number(p.q_factor_u);
  }
  return j;
}

json line_json(const DistortionLine& l) {
  return json{{"n", l.n},
              {"freq_hz", output::json_number(l.freq_hz)},
              {"amplitude", output::json_number(l.amplitude)},
              {"level_dbc", output::json_number(l.level_dbc)},
              {"above_floor_db", output::json_number(l.above_floor_db)}};
}

json optional_number(const std::optional<double>& v) { return v ? output::json_number(*v) : json(nullptr); }

std::string h_unit(const IdentifyResult& r) {
  if (r.input_unit.empty() && r.output_unit.empty()) return "";
  return (r.output_unit.empty() ? "1" : r.output_unit) + "/" + (r.input_unit.empty() ? "1" : r.input_unit);
}

/// Value of free parameter i in covariance order [b_0…b_M, a_0…a_{N−1}, T].
double parameter_value(const RationalFitResult& f, std::size_t i) {
  const std::size_t nb = f.model.num.size(), na = f.model.den.size() - 1;
  if (i < nb) return f.model.num[i];
  if (i < nb + na) return f.model.den[i - nb];
  return f.delay_s;
}

/// A value with its standard uncertainty, labelled u, digits as GUM 7.2.6 (format_with_u).
std::string with_u(double v, double u, std::string_view unit = "") { return format_with_u(v, u, unit); }

/// The value and u cells of a table row (GUM 7.2.6 digits); "-" for both when not finite.
void add_value_u(std::vector<std::string>& row, double v, double u) {
  if (!std::isfinite(v)) {
    row.insert(row.end(), {"-", "-"});
    return;
  }
  const ValueText t = format_value_u(v, u);
  row.insert(row.end(), {t.value, t.u});
}

/// "[lo, hi]" rounded to the decimal place of u (the column header states level and k).
std::string interval_cell(double lo, double hi, double u) {
  return "[" + format_value_u(lo, u).value + ", " + format_value_u(hi, u).value + "]";
}

/// A value with its standard uncertainty, stated as everywhere else (format_with_u: GUM
/// digits, "value unit, u = u unit"); "u undefined" where first-order theory gives none.
/// Not an overload of with_u: a string literal converts to bool before string_view, so
/// with_u(v, u, "Hz") picked this one and dropped the unit (the frf text's f0 and delay lines).
std::string with_u_if(double v, double u, bool defined, const char* unit = "") {
  if (defined && std::isfinite(u)) return format_with_u(v, u, unit);
  return sig(v) + (*unit ? std::string(" ") + unit : std::string()) + ", u undefined";
}

constexpr double kRadToHz = 1 / (2 * std::numbers::pi);

struct RootCells {
  std::string kind, freq, damping, q, tau;
};

RootCells root_cells(const Root& p, const char* hz, const char* s) {
  const bool d = p.uncertainty_defined;
  RootCells c;
  if (p.is_real) {
    c.kind = p.value.real() == 0 ? "real, at s = 0" : "real";
    c.freq = with_u_if(std::abs(p.value.real()) * kRadToHz, p.re_u * kRadToHz, d, hz);
    c.tau = p.time_constant_s != 0 ? with_u_if(p.time_constant_s, p.time_constant_u_s, d, s) : "-";
    c.damping = c.q = "-";
  } else {
    c.kind = "complex pair";
    c.freq = with_u_if(p.natural_frequency_rad_s * kRadToHz, p.natural_frequency_u_rad_s * kRadToHz, d, hz);
    c.damping = with_u_if(p.damping_ratio, p.damping_ratio_u, d);
    c.q = p.damping_ratio != 0 ? with_u_if(p.q_factor, p.q_factor_u, d) : std::string("infinite (ζ = 0)");
    c.tau = "-";
  }
  return c;
}

/// A number for the batch report's rows: 6 significant digits, "n/a" / "inf" when not finite.
std::string row_number(double v) {
  if (!std::isfinite(v)) return std::isnan(v) ? "n/a" : (v > 0 ? "inf" : "-inf");
  return format_significant(v == 0 ? 0.0 : v, 6);
}

// A value with its standard uncertainty, as the terminal prints it (issue 13: one convention,
// u labelled, GUM 7.2.6 digits); the 95 % intervals are in the limit table and summary.
std::string row_with_u(double value, double u, const std::string& unit) {
  if (!std::isfinite(u)) return unit.empty() ? row_number(value) : row_number(value) + " " + unit;
  return format_with_u(value, u, unit);
}

}  // namespace

namespace {

json frf_point_json(const FrfHarmonic& p) {
  return json{{"n", p.n},
              {"freq_hz", output::json_number(p.freq_hz)},
              {"re", output::json_number(p.re)},
              {"im", output::json_number(p.im)},
              {"mag", output::json_number(p.mag)},
              {"mag_db", output::json_number(p.mag_db)},
              {"phase_deg", output::json_number(p.phase_deg)},
              {"mag_u", output::json_number(p.mag_u)},
              {"phase_u_deg", output::json_number(p.phase_u_deg)},
              {"mag_db_u", output::json_number(p.mag_db_u)},
              {"mag_lo", output::json_number(p.mag_lo)},
              {"mag_hi", output::json_number(p.mag_hi)},
              {"phase_lo_deg", output::json_number(p.phase_lo_deg)},
              {"phase_hi_deg", output::json_number(p.phase_hi_deg)},
              {"phase_defined", p.phase_defined},
              {"phase_note", p.phase_defined ? json(nullptr) : json("undefined: |H| consistent with 0")},
              {"var_re", output::json_number(p.var_re)},
              {"var_im", output::json_number(p.var_im)},
              {"cov_re_im", output::json_number(p.cov_re_im)},
              {"input_snr_db", output::json_number(p.input_snr_db)}};
}

json linearity_json(const LinearityResult& l) {
  json lin;
  lin["status"] = code(l.status);
  lin["reason"] = l.reason;
  lin["nonlinear"] = l.nonlinear;
  lin["method"] = l.method;
  lin["tested"] = l.tested;
  lin["dof"] = l.dof;
  lin["threshold_db"] = output::json_number(l.threshold_db);
  lin["level_db"] = optional_number(l.level_db);
  lin["odd_level_db"] = optional_number(l.odd_level_db);
  lin["even_level_db"] = optional_number(l.even_level_db);
  lin["odd"] = json::array();
  for (const auto& line : l.odd) lin["odd"].push_back(line_json(line));
  lin["even"] = json::array();
  for (const auto& line : l.even) lin["even"].push_back(line_json(line));
  return lin;
}

/// The fitted parameters with u and the interval at coverage factor k_model, the covariance,
/// and the order trials when the order was chosen automatically.
void add_parameters_json(const RationalFitResult& f, double k_model, json& m) {
  m["parameters"] = json::array();
  for (std::size_t i = 0; i < f.parameter_names.size(); ++i) {
    const double value = parameter_value(f, i);
    const double u = i < f.parameter_u.size() ? f.parameter_u[i] : std::nan("");
    m["parameters"].push_back(json{{"name", f.parameter_names[i]},
                                   {"value", output::json_number(value)},
                                   {"u", output::json_number(u)},
                                   {"lo", output::json_number(value - k_model * u)},
                                   {"hi", output::json_number(value + k_model * u)}});
  }
  m["covariance"] = json::array();
  for (const auto& row : f.model.covariance) {
    json jr = json::array();
    for (double v : row) jr.push_back(output::json_number(v));
    m["covariance"].push_back(jr);
  }
}

json model_json(const RationalFitResult& f, double model_confidence) {
  json m;
  m["order"] = order_text(f.order);
  m["order_decided_by"] = f.order_decided_by;
  m["num"] = json::array();
  for (double v : f.model.num) m["num"].push_back(output::json_number(v));
  m["den"] = json::array();
  for (double v : f.model.den) m["den"].push_back(output::json_number(v));
  m["delay_s"] = output::json_number(f.delay_s);
  m["delay_u_s"] = output::json_number(f.delay_u_s);
  m["delay_estimated"] = f.model.delay_estimated;
  m["poles"] = json::array();
  for (const auto& p : f.poles) m["poles"].push_back(root_json(p));
  m["zeros"] = json::array();
  for (const auto& z : f.zeros) m["zeros"].push_back(root_json(z));
  m["dc_gain"] = f.dc_gain_defined ? output::json_number(f.dc_gain) : json(nullptr);
  m["dc_gain_u"] = f.dc_gain_defined ? output::json_number(f.dc_gain_u) : json(nullptr);
  m["cost"] = output::json_number(f.cost);
  m["dof"] = f.dof;
  m["chi2_lower"] = output::json_number(f.chi2_lower);
  m["chi2_upper"] = output::json_number(f.chi2_upper);
  m["cost_expected"] = output::json_number(f.cost_expected);
  m["band_method"] = code(f.band_method);
  m["adequate"] = f.adequate;
  m["unstable"] = f.unstable;
  // The parameter covariance carries the estimated-weights inflation, so the normal quantile
  // gives the interval (ident/cost_band.hpp, covariance_inflation).
  const double k_model = coverage_factor(model_confidence, 0);
  add_parameters_json(f, k_model, m);
  m["coverage_factor"] = output::json_number(k_model);
  m["covariance_inflation"] = output::json_number(f.covariance_inflation);
  m["condition_number"] = output::json_number(f.condition_number);
  m["method"] = f.method;
  m["fit_status"] = to_string(f.status);
  if (!f.order_trials.empty()) {
    m["order_trials"] = json::array();
    for (const auto& t : f.order_trials)
      m["order_trials"].push_back(json{{"order", order_text(t.order)},
                                       {"parameters", t.parameters},
                                       {"cost", t.failed ? json(nullptr) : output::json_number(t.cost)},
                                       {"dof", t.dof},
                                       {"chi2_upper", output::json_number(t.chi2_upper)},
                                       {"passed", t.passed},
                                       {"failed", t.failed},
                                       {"note", t.note}});
  }
  return m;
}

}  // namespace

nlohmann::ordered_json identify_json(const IdentifyResult& r) {
  json j;
  j["f0_hz"] = output::json_number(r.fundamental.f0_hz);
  j["f0_u_hz"] = output::json_number(r.fundamental.f0_u_hz);
  j["f0_method"] = code(r.fundamental.method);
  j["status"] = code(r.status);
  j["input"] = json{{"source", r.input_source}, {"channel", r.input_channel}, {"unit", r.input_unit}};
  j["output"] = json{{"source", r.output_source}, {"channel", r.output_channel}, {"unit", r.output_unit}};
  j["h_unit"] = h_unit(r);
  j["sample_rate_hz"] = output::json_number(r.sample_rate_hz);
  j["periods"] = r.frf.periods;
  j["samples_per_period"] = r.samples_per_period;
  j["harmonic_selection"] = harmonic_selection_json(r.selection);
  j["max_harmonic"] = r.frf.max_harmonic;
  j["skew_s"] = output::json_number(r.skew_s);
  j["frf_method"] = code(r.frf.method);
  j["frf_dof"] = r.frf.dof;
  j["confidence"] = output::json_number(r.frf.confidence);
  j["coverage_factor"] = output::json_number(r.frf.coverage_factor);
  j["quantile"] = r.frf.quantile;
  json frf = json::array();
  for (const auto& p : r.frf.points) frf.push_back(frf_point_json(p));
  j["frf"] = frf;
  j["linearity"] = linearity_json(r.linearity);
  j["model"] = r.model ? model_json(*r.model, r.model_confidence) : json(nullptr);
  j["flags"] = codes(r.flags);
  return j;
}

namespace {

/// The key-value head: input, output, f0, grid, frf method, skew.
std::string report_head(const IdentifyResult& r) {
  std::vector<std::pair<std::string, std::string>> head{
      {"input", r.input_source + " \"" + r.input_channel + "\"" + (r.input_unit.empty() ? "" : " [" + r.input_unit + "]")},
      {"output", r.output_source + " \"" + r.output_channel + "\"" + (r.output_unit.empty() ? "" : " [" + r.output_unit + "]")},
      {"f0", (r.fundamental.f0_u_hz > 0 ? with_u(r.fundamental.f0_hz, r.fundamental.f0_u_hz, "Hz")
                                         : sig(r.fundamental.f0_hz, 9) + " Hz") +
                 " (" + std::string(code(r.fundamental.method)) + ")"},
      {"grid", std::to_string(r.frf.periods) + " periods × " + std::to_string(r.samples_per_period) +
                   " samples, harmonics 1…" + std::to_string(r.frf.max_harmonic) + " (" +
                   harmonic_selection_text(r.selection) + ")"},
      {"frf", std::string(code(r.frf.method)) + ", dof " + std::to_string(r.frf.dof) + ", " +
                  format_fixed(100 * r.frf.confidence, 0) + " % intervals with k = " +
                  format_fixed(r.frf.coverage_factor, 3) + " (" + r.frf.quantile + ")"}};
  if (r.skew_s != 0) head.push_back({"skew", format_shortest(r.skew_s) + " s (output lag removed)"});
  return render_key_values(head);
}

/// The frequency-response table.
std::string frf_table(const IdentifyResult& r) {
  // u(…) columns are standard uncertainties; the interval columns are the expanded intervals
  // at the level and k of the "frf" line, their level in the header.
  const std::string pct = format_fixed(100 * r.frf.confidence, 0) + " %";
  Table t({{"n"}, {"freq_Hz"}, {"|H|"}, {"u(|H|)"}, {"|H|_dB"}, {"phase_deg"}, {"u(phase)"},
           {"|H| " + pct + " interval", Table::Align::left}, {"phase " + pct + " interval", Table::Align::left},
           {"SNR_in_dB"}});
  for (const auto& p : r.frf.points) {
    std::vector<std::string> row{std::to_string(p.n), sig(p.freq_hz, 7)};
    add_value_u(row, p.mag, p.mag_u);
    row.push_back(format_fixed(p.mag_db, 3));
    add_value_u(row, p.phase_deg, p.phase_u_deg);
    row.push_back(interval_cell(p.mag_lo, p.mag_hi, p.mag_u));
    row.push_back(p.phase_defined ? interval_cell(p.phase_lo_deg, p.phase_hi_deg, p.phase_u_deg)
                                  : std::string("phase undefined (|H| consistent with 0)"));
    row.push_back(format_fixed(p.input_snr_db, 1));
    t.add_row(std::move(row));
  }
  return t.render(2);
}

/// The linearity verdict and the even/odd distortion lines found.
std::string linearity_text(const LinearityResult& l) {
  std::string out = "\nlinearity: " + std::string(code(l.status));
  if (l.status != LinearityStatus::untested)
    out += " (" + std::to_string(l.tested) + " unexcited harmonics tested, threshold " +
           format_fixed(l.threshold_db, 1) + " dB above the output noise floor)";
  else if (!l.reason.empty())
    out += ": " + l.reason;
  out += "\n";
  const auto lines = [&](const char* parity, const std::vector<DistortionLine>& ls,
                         const std::optional<double>& level) {
    if (ls.empty()) return;
    std::vector<int> ns;
    for (const auto& line : ls) ns.push_back(line.n);
    out += std::string("  ") + parity + " harmonics " + list_harmonics(ns) + ": " +
           format_fixed(level.value_or(0), 1) + " dB relative to the excited output power\n";
  };
  lines("even", l.even, l.even_level_db);
  lines("odd", l.odd, l.odd_level_db);
  return out;
}

/// The fitted model: parameters, dc gain, delay, poles, zeros and the cost test.
std::string model_text(const RationalFitResult& f, double model_confidence, const std::string& unit) {
  std::string out = "\nmodel " + order_text(f.order) + " (" + f.order_decided_by + "), " + f.method + "\n";
  Table pt({{"parameter", Table::Align::left}, {"value"}, {"u"}});
  for (std::size_t i = 0; i < f.parameter_names.size(); ++i) {
    const double value = parameter_value(f, i);
    std::vector<std::string> row{f.parameter_names[i]};
    if (i < f.parameter_u.size())
      add_value_u(row, value, f.parameter_u[i]);
    else
      row.insert(row.end(), {sig(value, 8), "-"});
    pt.add_row(std::move(row));
  }
  out += pt.render(2);
  out += "  a" + std::to_string(f.model.den.size() - 1) + " = 1 (monic); s in rad/s\n";
  out += "  dc gain   " + (f.dc_gain_defined ? with_u(f.dc_gain, f.dc_gain_u, unit) : std::string("infinite (pole at 0)")) + "\n";
  out += "  delay     " + (f.model.delay_estimated ? with_u(f.delay_s, f.delay_u_s, "s") : sig(f.delay_s) + " s (not estimated)") + "\n";
  const auto roots = [&](const char* title, const std::vector<Root>& rs) {
    if (rs.empty()) return;
    out += std::string("\n") + title + "\n" + format_roots_table(rs);
  };
  roots("poles", f.poles);
  roots("zeros", f.zeros);
  out += "\ncost " + sig(f.cost) + ", dof " + std::to_string(f.dof) + ", " + format_fixed(100 * model_confidence, 0) +
         " % band [" + sig(f.chi2_lower) + ", " + sig(f.chi2_upper) + "] (" + std::string(description(f.band_method)) +
         ", expected " + sig(f.cost_expected) + "): " + (f.adequate ? "adequate" : "NOT adequate") + "\n";
  return out;
}

}  // namespace

std::string format_identify_report(const IdentifyResult& r) {
  const std::string unit = h_unit(r);
  std::string out = report_head(r);
  out += "\nfrequency response" + (unit.empty() ? std::string() : " [" + unit + "]") + "\n";
  out += frf_table(r);
  out += linearity_text(r.linearity);
  if (r.model) out += model_text(*r.model, r.model_confidence, unit);
  std::string flags;
  for (std::size_t i = 0; i < r.flags.size(); ++i) flags += (i ? ", " : "") + std::string(code(r.flags[i]));
  out += "\nflags: " + (flags.empty() ? std::string("none") : flags);
  out += "\n";
  return out;
}

std::string format_roots_table(const std::vector<Root>& roots) {
  Table t({{"root", Table::Align::left},
           {"freq_Hz", Table::Align::left},
           {"damping_ratio", Table::Align::left},
           {"Q", Table::Align::left},
           {"time_constant_s", Table::Align::left}});
  for (const Root& p : roots) {
    if (!p.is_real && p.value.imag() < 0) continue;  // a conjugate pair is one row
    const RootCells c = root_cells(p, "", "");
    t.add_row({c.kind, c.freq, c.damping, c.q, c.tau});
  }
  return t.render(2);
}

std::string root_summary(const Root& root) {
  const RootCells c = root_cells(root, "Hz", "s");
  if (root.is_real)
    return c.kind + ": corner frequency " + c.freq + (c.tau == "-" ? std::string() : ", time constant " + c.tau);
  return c.kind + ": natural frequency " + c.freq + ", damping ratio " + c.damping + ", Q " + c.q;
}
std::vector<std::pair<std::string, std::string>> identify_summary_rows(const IdentifyResult& r,
                                                                     const Capture& capture) {
  std::vector<std::pair<std::string, std::string>> rows;
  rows.emplace_back("channels", r.input_channel + " \xE2\x86\x92 " + r.output_channel);
  rows.emplace_back("capture", capture.format + ", " + row_number(capture.sample_rate_hz) + " Hz, " +
                                   std::to_string(capture.sample_count()) + " samples");
  rows.emplace_back("fundamental",
                    row_with_u(r.fundamental.f0_hz, r.fundamental.f0_u_hz, "Hz") + " (" + std::string(code(r.fundamental.method)) + ")");
  rows.emplace_back("FRF", std::to_string(r.frf.points.size()) + " excited harmonics, " +
                               std::to_string(r.frf.periods) + " periods, " + std::string(code(r.frf.method)) +
                               ", dof " + std::to_string(r.frf.dof));
  if (r.model) {
    const auto& fit = *r.model;
    rows.emplace_back("model", order_text(fit.order) + " (" + fit.order_decided_by + "), " + fit.method);
    if (fit.dc_gain_defined) rows.emplace_back("dc gain", row_with_u(fit.dc_gain, fit.dc_gain_u, ""));
    if (fit.model.delay_s != 0 || fit.delay_u_s != 0)
      rows.emplace_back("delay", row_with_u(fit.delay_s, fit.delay_u_s, "s"));
    rows.emplace_back("cost", row_number(fit.cost) + " for " + std::to_string(fit.dof) + " dof (expected " +
                                  row_number(fit.cost_expected) + ", 95 % band " + row_number(fit.chi2_lower) +
                                  " \xE2\x80\xA6 " + row_number(fit.chi2_upper) + "): " +
                                  (fit.adequate ? "adequate" : "not adequate"));
    // The pole rows read like identify's pole table: frequency first, standard u; a pair once.
    int entry = 0;
    for (const auto& pole : fit.poles) {
      if (!pole.is_real && pole.value.imag() < 0) continue;
      rows.emplace_back("pole " + std::to_string(++entry), root_summary(pole));
    }
  }
  std::string lin(code(r.linearity.status));
  if (r.linearity.level_db) lin += ", distortion " + format_fixed(*r.linearity.level_db, 1) + " dB";
  rows.emplace_back("linearity", lin);
  return rows;
}

std::vector<std::string> identify_warnings(const IdentifyResult& r) {
  std::vector<std::string> out;
  for (const auto& flag : r.flags) {
    if (flag == Flag::nonlinear)
      out.push_back("nonlinear: output lines at harmonics the input does not excite (" +
                    format_fixed(r.linearity.level_db.value_or(0), 1) + " dB relative to the excited output)");
    else if (flag == Flag::model_inadequate && r.model)
      out.push_back("model " + order_text(r.model->order) + " is not adequate: cost " +
                    format_significant(r.model->cost, 4) + " outside the band [" +
                    format_significant(r.model->chi2_lower, 4) + ", " + format_significant(r.model->chi2_upper, 4) +
                    "] for dof " + std::to_string(r.model->dof) + " (" + std::string(code(r.model->band_method)) + ")");
    else if (flag == Flag::unstable_pole)
      out.push_back("the fitted model has a pole with Re p >= 0 (unstable)");
    else if (flag == Flag::few_periods)
      out.push_back("only " + std::to_string(r.frf.periods) +
                    " whole periods: uncertainties come from the neighbouring noise bins");
    else if (flag == Flag::numerical_floor)
      out.push_back("the record looks noise-free: some FRF variances were raised to the numerical floor, "
                    "so the uncertainties and the chi-square verdict say little");
    else if (flag == Flag::model_not_converged)
      out.push_back("the model fit did not converge: the parameters are the best found, not an optimum");
  }
  return out;
}

}  // namespace periodfit::output
