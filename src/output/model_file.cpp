#include "output/model_file.hpp"

#include <nlohmann/json.hpp>

#include <cmath>
#include <numbers>
#include <string>
#include <utility>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "io/input_limits.hpp"
#include "core/number_format.hpp"
#include "io/output_file.hpp"
#include "output/json_writer.hpp"

// The model and fit types are the ident stage's; their names are used as ident spells them.
namespace periodfit::output {
using namespace ident;

namespace {

using json = nlohmann::ordered_json;

json roots_json(const std::vector<std::complex<double>>& roots) {
  json a = json::array();
  for (const auto& r : roots) a.push_back(json{{"re", r.real()}, {"im", r.imag()}});
  return a;
}

/// Reads the document, naming the key path in every message (`model.den[2]`).
class Reader {
 public:
  explicit Reader(std::string name) : name_(std::move(name)) {}

  [[noreturn]] void fail(const std::string& message) const { throw InputError(name_, 0, 0, message); }

  const json& member(const json& obj, const std::string& key, const std::string& path) const {
    const auto it = obj.find(key);
    if (it == obj.end()) fail("missing key \"" + path + "\"");
    return *it;
  }

  double number(const json& v, const std::string& path) const {
    if (!v.is_number()) fail("\"" + path + "\" must be a number, found " + type_of(v));
    const double d = v.get<double>();
    if (!std::isfinite(d)) fail("\"" + path + "\" must be finite");
    return d;
  }

  std::vector<double> numbers(const json& v, const std::string& path) const {
    if (!v.is_array() || v.empty()) fail("\"" + path + "\" must be a non-empty array of numbers, found " + type_of(v));
    std::vector<double> out;
    for (std::size_t i = 0; i < v.size(); ++i) out.push_back(number(v[i], path + "[" + std::to_string(i) + "]"));
    return out;
  }

  std::string text(const json& v, const std::string& path) const {
    if (!v.is_string()) fail("\"" + path + "\" must be a string, found " + type_of(v));
    return v.get<std::string>();
  }

  bool boolean(const json& v, const std::string& path) const {
    if (!v.is_boolean()) fail("\"" + path + "\" must be true or false, found " + type_of(v));
    return v.get<bool>();
  }

  const json& object(const json& v, const std::string& path) const {
    if (!v.is_object()) fail("\"" + path + "\" must be an object, found " + type_of(v));
    return v;
  }

  const json& array(const json& v, const std::string& path) const {
    if (!v.is_array()) fail("\"" + path + "\" must be an array, found " + type_of(v));
    return v;
  }

  std::vector<std::complex<double>> roots(const json& v, const std::string& path) const {
    std::vector<std::complex<double>> out;
    for (std::size_t i = 0; i < array(v, path).size(); ++i) {
      const std::string p = path + "[" + std::to_string(i) + "]";
      const json& r = object(v[i], p);
      out.emplace_back(number(member(r, "re", p + ".re"), p + ".re"), number(member(r, "im", p + ".im"), p + ".im"));
    }
    return out;
  }

  static std::string type_of(const json& v) {
    if (v.is_null()) return "null";
    if (v.is_boolean()) return "a boolean";
    if (v.is_number()) return "a number";
    if (v.is_string()) return "a string";
    if (v.is_array()) return "an array";
    return "an object";
  }

 private:
  std::string name_;
};

}  // namespace

ModelFile model_file_from_fit(const RationalFitResult& fit, std::string source, double f0_hz,
                              std::vector<FrfPoint> frf) {
  ModelFile f;
  f.model = fit.model;
  f.parameter_names = fit.parameter_names;
  for (const Root& p : fit.poles) f.poles.push_back(p.value);
  for (const Root& z : fit.zeros) f.zeros.push_back(z.value);
  f.source = std::move(source);
  f.created_by = std::string("periodfit ") + PERIODFIT_VERSION;
  f.f0_hz = f0_hz;
  f.has_fit = true;
  f.cost = fit.cost;
  f.dof = fit.dof;
  f.adequate = fit.adequate;
  f.method = fit.method;
  f.frf = std::move(frf);
  return f;
}

std::string format_model_file(const ModelFile& file) {
  const RationalModel& m = file.model;
  json model;
  model["num"] = m.num;
  model["den"] = m.den;
  model["delay_s"] = m.delay_s;
  model["delay_estimated"] = m.delay_estimated;
  model["parameters"] = file.parameter_names;
  model["covariance"] = m.covariance;
  model["poles"] = roots_json(file.poles);
  model["zeros"] = roots_json(file.zeros);
  json doc;
  doc["format"] = kModelFileFormat;
  doc["version"] = kModelFileVersion;
  doc["created_by"] = file.created_by;
  doc["source"] = file.source;
  doc["f0_hz"] = file.f0_hz;
  doc["model"] = std::move(model);
  if (file.has_fit)
    doc["fit"] = json{{"cost", file.cost}, {"dof", file.dof}, {"adequate", file.adequate}, {"method", file.method}};
  if (!file.frf.empty()) {
    json pts = json::array();
    for (const FrfPoint& p : file.frf)
      pts.push_back(json{{"freq_hz", p.omega_rad_s / (2 * std::numbers::pi)},
                         {"re", p.h.real()},
                         {"im", p.h.imag()},
                         {"var_re", p.var_re},
                         {"var_im", p.var_im},
                         {"cov_re_im", p.cov_re_im}});
    doc["frf"] = std::move(pts);
  }
  return json_text(doc);
}

void write_model_file(const std::string& path, const ModelFile& file) {
  io::write_file_atomic(path, format_model_file(file));
}

namespace {

/// Line and column of a byte offset, for errors that carry only the offset.
std::pair<std::size_t, std::size_t> position_of(std::string_view text, std::size_t byte) {
  std::size_t line = 1, column = 1;
  for (std::size_t i = 0; i < byte && i < text.size(); ++i) {
    if (text[i] == '\n') {
      ++line;
      column = 1;
    } else {
      ++column;
    }
  }
  return std::pair{line, column};
}

/// nlohmann's text reads "[json.exception.<kind>.<id>] <what>"; keeps <what>.
std::string after_prefix(std::string why) {
  const auto bracket = why.find("] ");
  if (bracket != std::string::npos) why = why.substr(bracket + 2);
  return why;
}

/// The JSON document, bounded in size and depth; reader errors become located InputErrors.
json parse_document(std::string_view text, std::string_view name, const Reader& rd) {
  // Bounded before the recursive reader sees the text: nlohmann::json copies and destroys nested
  // values recursively, so depth is a stack-size question (input_limits.hpp).
  if (text.size() > io::kMaxTextFileBytes)
    rd.fail("larger than the " + format_bytes(static_cast<double>(io::kMaxTextFileBytes)) + " limit for a model file");
  io::check_json_nesting(text, name);
  try {
    return json::parse(text);
  } catch (const json::parse_error& e) {
    // e.byte is one past the offending byte (1-based); its message is "parse error at line …: why".
    const auto [line, column] = position_of(text, e.byte == 0 ? 0 : e.byte - 1);
    std::string why = e.what();
    const auto colon = why.find(": ");
    if (colon != std::string::npos) why = why.substr(colon + 2);
    throw InputError(std::string(name), line, column, "not valid JSON: " + why);
  } catch (const json::out_of_range& e) {
    // A number literal outside the range of double (out_of_range.406, "number overflow parsing
    // '<literal>'") carries no offset; the literal is quoted in the message, so find it.
    const std::string why = after_prefix(e.what());
    std::size_t at = 0;
    const auto open = why.find('\''), close = why.rfind('\'');
    if (open != std::string::npos && close > open + 1) {
      const auto found = text.find(std::string_view(why).substr(open + 1, close - open - 1));
      if (found != std::string_view::npos) at = found;
    }
    const auto [line, column] = position_of(text, at);
    throw InputError(std::string(name), line, column, "not valid JSON: " + why + " (a number must fit a double)");
  } catch (const json::exception& e) {
    // Any other reader failure (nlohmann documents type_error and other_error too) is still a
    // bad file, never a crash.
    throw InputError(std::string(name), 1, 1, "not valid JSON: " + after_prefix(e.what()));
  }
}

/// "format" and "version": this program's format, a version it reads.
void check_format(const json& doc, const Reader& rd) {
  if (!doc.is_object()) rd.fail("expected a JSON object at the top level, found " + Reader::type_of(doc));
  const std::string format = rd.text(rd.member(doc, "format", "format"), "format");
  if (format != kModelFileFormat)
    rd.fail("\"format\" is \"" + format + "\", expected \"" + std::string(kModelFileFormat) + "\"");
  const json& version = rd.member(doc, "version", "version");
  if (!version.is_number_integer()) rd.fail("\"version\" must be an integer, found " + Reader::type_of(version));
  const auto v = version.get<long long>();
  if (v < 1) rd.fail("\"version\" must be >= 1, found " + std::to_string(v));
  if (v > kModelFileVersion)
    rd.fail("version " + std::to_string(v) + " is newer than this program reads (up to " +
            std::to_string(kModelFileVersion) + ")");
}

/// "model.covariance": n × n, non-negative variances, symmetric to 1e-12 of the scale.
std::vector<std::vector<double>> read_covariance(const json& cov_json, std::size_t n, const Reader& rd) {
  const json& cov = rd.array(cov_json, "model.covariance");
  if (cov.size() != n)
    rd.fail("\"model.covariance\" has " + std::to_string(cov.size()) + " rows, expected " + std::to_string(n) +
            " (one per free parameter)");
  std::vector<std::vector<double>> c;
  for (std::size_t i = 0; i < n; ++i) {
    const std::string p = "model.covariance[" + std::to_string(i) + "]";
    std::vector<double> row = rd.numbers(cov[i], p);
    if (row.size() != n)
      rd.fail("\"" + p + "\" has " + std::to_string(row.size()) + " entries, expected " + std::to_string(n));
    c.push_back(std::move(row));
  }
  for (std::size_t i = 0; i < n; ++i) {
    if (c[i][i] < 0)
      rd.fail("\"model.covariance\" has a negative variance at [" + std::to_string(i) + "][" + std::to_string(i) + "]");
    for (std::size_t j = 0; j < i; ++j) {
      const double tol = 1e-12 * std::sqrt(c[i][i] * c[j][j]);
      if (std::abs(c[i][j] - c[j][i]) > tol)
        rd.fail("\"model.covariance\" is not symmetric at [" + std::to_string(i) + "][" + std::to_string(j) + "]");
    }
  }
  return c;
}

/// The "model" object: coefficients, delay, parameter names, covariance, poles and zeros.
void read_model(const json& model, ModelFile& f, const Reader& rd) {
  RationalModel& m = f.model;
  m.num = rd.numbers(rd.member(model, "num", "model.num"), "model.num");
  m.den = rd.numbers(rd.member(model, "den", "model.den"), "model.den");
  for (const auto& [coefficients, key] : {std::pair{&m.num, "model.num"}, std::pair{&m.den, "model.den"}})
    if (coefficients->size() > kMaxModelDegree + 1)
      rd.fail("\"" + std::string(key) + "\" has " + std::to_string(coefficients->size()) +
              " coefficients, more than the " + std::to_string(kMaxModelDegree + 1) + " of degree " +
              std::to_string(kMaxModelDegree) + ", the highest periodfit evaluates (ident/model.hpp)");
  if (m.den.size() < 2) rd.fail("\"model.den\" must have at least 2 coefficients (a0, a1), found 1");
  if (m.den.back() != 1)
    rd.fail("\"model.den\" must be monic (last coefficient 1), found " + format_shortest(m.den.back()));
  if (model.contains("delay_s")) {
    m.delay_s = rd.number(model["delay_s"], "model.delay_s");
    if (m.delay_s < 0) rd.fail("\"model.delay_s\" must be >= 0, found " + format_shortest(m.delay_s));
  }
  if (model.contains("delay_estimated")) m.delay_estimated = rd.boolean(model["delay_estimated"], "model.delay_estimated");
  const std::size_t n = m.parameter_count();
  if (model.contains("parameters")) {
    const json& names = rd.array(model["parameters"], "model.parameters");
    for (std::size_t i = 0; i < names.size(); ++i)
      f.parameter_names.push_back(rd.text(names[i], "model.parameters[" + std::to_string(i) + "]"));
    if (f.parameter_names.size() != n)
      rd.fail("\"model.parameters\" has " + std::to_string(f.parameter_names.size()) + " names, expected " +
              std::to_string(n) + " (num, then den without its monic 1" + (m.delay_estimated ? ", then T)" : ")"));
  }
  if (model.contains("covariance") && !model["covariance"].empty())
    m.covariance = read_covariance(model["covariance"], n, rd);
  if (model.contains("poles")) f.poles = rd.roots(model["poles"], "model.poles");
  if (model.contains("zeros")) f.zeros = rd.roots(model["zeros"], "model.zeros");
}

/// The "frf" array of measured points with their covariance.
std::vector<FrfPoint> read_frf(const json& frf, const Reader& rd) {
  std::vector<FrfPoint> out;
  const json& pts = rd.array(frf, "frf");
  for (std::size_t i = 0; i < pts.size(); ++i) {
    const std::string p = "frf[" + std::to_string(i) + "]";
    const json& o = rd.object(pts[i], p);
    auto get = [&](const char* key) { return rd.number(rd.member(o, key, p + "." + key), p + "." + key); };
    FrfPoint pt;
    const double f_hz = get("freq_hz");
    if (f_hz <= 0) rd.fail("\"" + p + ".freq_hz\" must be > 0, found " + format_shortest(f_hz));
    pt.omega_rad_s = 2 * std::numbers::pi * f_hz;
    pt.h = {get("re"), get("im")};
    pt.var_re = get("var_re");
    pt.var_im = get("var_im");
    pt.cov_re_im = get("cov_re_im");
    if (pt.var_re < 0 || pt.var_im < 0) rd.fail("\"" + p + "\" has a negative variance");
    out.push_back(pt);
  }
  return out;
}

}  // namespace

ModelFile parse_model_file(std::string_view text, std::string_view name) {
  const Reader rd{std::string(name)};
  const json doc = parse_document(text, name, rd);
  check_format(doc, rd);
  ModelFile f;
  if (doc.contains("created_by")) f.created_by = rd.text(doc["created_by"], "created_by");
  if (doc.contains("source")) f.source = rd.text(doc["source"], "source");
  if (doc.contains("f0_hz")) {
    f.f0_hz = rd.number(doc["f0_hz"], "f0_hz");
    if (f.f0_hz < 0) rd.fail("\"f0_hz\" must be >= 0, found " + format_shortest(f.f0_hz));
  }
  read_model(rd.object(rd.member(doc, "model", "model"), "model"), f, rd);
  if (doc.contains("fit")) {
    const json& fit = rd.object(doc["fit"], "fit");
    f.has_fit = true;
    f.cost = rd.number(rd.member(fit, "cost", "fit.cost"), "fit.cost");
    const json& dof = rd.member(fit, "dof", "fit.dof");
    if (!dof.is_number_integer()) rd.fail("\"fit.dof\" must be an integer, found " + Reader::type_of(dof));
    f.dof = dof.get<int>();
    f.adequate = rd.boolean(rd.member(fit, "adequate", "fit.adequate"), "fit.adequate");
    if (fit.contains("method")) f.method = rd.text(fit["method"], "fit.method");
  }
  if (doc.contains("frf")) f.frf = read_frf(doc["frf"], rd);
  return f;
}

ModelFile read_model_file(const std::string& path) {
  return with_memory_step("reading the model file " + path,
                          [&] { return parse_model_file(io::read_file(path, io::kMaxTextFileBytes), path); });
}

predict::PredictSystem prediction_system(const ModelFile& file, bool prefer_measured, const std::string& path,
                                         std::string_view measured_option) {
  predict::PredictSystem sys;
  if (!file.model.den.empty()) sys.model = file.model;
  sys.measured = file.frf;
  sys.prefer_measured = prefer_measured;
  if (prefer_measured && file.frf.empty())
    throw InputError(path, 0, 0, std::string(measured_option) + ": the model file holds no measured FRF points");
  return sys;
}

}  // namespace periodfit::output
