#include "batch/config.hpp"

#include <algorithm>
#include <climits>
#include <cmath>
#include <cstdint>
#include <toml++/toml.h>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "io/input_limits.hpp"
#include "core/flags.hpp"
#include "core/number_format.hpp"
#include "io/output_file.hpp"

namespace periodfit::batch {

namespace {

// Reads one TOML document into a BatchConfig, throwing InputError at the offending node.
class Loader {
 public:
  explicit Loader(std::string source) : source_(std::move(source)) {}

  [[noreturn]] void fail(const toml::node* node, const std::string& message) const {
    std::size_t line = 0, column = 0;
    if (node) {
      line = node->source().begin.line;
      column = node->source().begin.column;
    }
    throw InputError(source_, line, column, message);
  }
  [[noreturn]] void fail_at(const toml::source_region& where, const std::string& message) const {
    throw InputError(source_, where.begin.line, where.begin.column, message);
  }

  /// Every key of `table` must be one of `known`.
  void check_keys(const toml::table& table, const std::vector<std::string>& known,
                  const std::string& where) const {
    for (const auto& [key, value] : table) {
      const std::string k(key.str());
      if (std::find(known.begin(), known.end(), k) != known.end()) continue;
      std::string message = "unknown key \"" + k + "\" in " + where;
      if (const auto near = nearest_name(k, known); !near.empty())
        message += " (did you mean \"" + near + "\"?)";
      else {
        message += " (keys: ";
        for (std::size_t i = 0; i < known.size(); ++i) message += (i ? ", " : "") + known[i];
        message += ")";
      }
      fail_at(key.source(), message);
    }
  }

  static std::string type_name(const toml::node& node) {
    switch (node.type()) {
      case toml::node_type::string: return "a string";
      case toml::node_type::integer: return "an integer";
      case toml::node_type::floating_point: return "a number";
      case toml::node_type::boolean: return "a boolean";
      case toml::node_type::array: return "an array";
      case toml::node_type::table: return "a table";
      default: return "a date or time";
    }
  }

  double number(const toml::node& node, const std::string& key) const {
    if (const auto* f = node.as_floating_point()) {
      if (!std::isfinite(f->get())) fail(&node, key + " must be a finite number");
      return f->get();
    }
    if (const auto* i = node.as_integer()) return static_cast<double>(i->get());
    fail(&node, key + ": expected a number, found " + type_name(node));
  }
  int integer(const toml::node& node, const std::string& key) const {
    if (const auto* i = node.as_integer()) {
      if (i->get() < INT32_MIN || i->get() > INT32_MAX) fail(&node, key + " is out of range");
      return static_cast<int>(i->get());
    }
    fail(&node, key + ": expected an integer, found " + type_name(node));
  }
  bool boolean(const toml::node& node, const std::string& key) const {
    if (const auto* b = node.as_boolean()) return b->get();
    fail(&node, key + ": expected true or false, found " + type_name(node));
  }
  std::string string(const toml::node& node, const std::string& key) const {
    if (const auto* s = node.as_string()) return s->get();
    fail(&node, key + ": expected a string, found " + type_name(node));
  }
  /// A string or an array of strings.
  std::vector<std::string> strings(const toml::node& node, const std::string& key) const {
    if (node.is_string()) return {string(node, key)};
    const auto* array = node.as_array();
    if (!array) fail(&node, key + ": expected a string or an array of strings, found " + type_name(node));
    std::vector<std::string> out;
    for (const auto& element : *array) out.push_back(string(element, key));
    return out;
  }
  const toml::table& table(const toml::node& node, const std::string& key) const {
    if (const auto* t = node.as_table()) return *t;
    fail(&node, key + ": expected a table, found " + type_name(node));
  }

  /// Runs `parse` and turns an OptionError into an InputError at `node`.
  template <typename F>
  void checked(const toml::node& node, F&& parse) const {
    try {
      parse();
    } catch (const OptionError& e) {
      fail(&node, e.what());
    }
  }

  BatchConfig load(const toml::table& root) {
    BatchConfig c;
    c.source = source_;
    check_keys(root, {"files", "read", "analysis", "report", "verdict", "limit"}, "the config");
    if (const auto* node = root.get("files")) load_files(table(*node, "files"), c);
    if (const auto* node = root.get("read")) load_read(table(*node, "read"), c);
    if (const auto* node = root.get("analysis")) load_analysis(table(*node, "analysis"), c);
    if (const auto* node = root.get("report")) load_report(table(*node, "report"), c);
    if (const auto* node = root.get("verdict")) load_verdict(table(*node, "verdict"), c);
    if (const auto* node = root.get("limit")) {
      const auto* array = node->as_array();
      if (!array || !array->is_array_of_tables())
        fail(node, "limit: expected [[limit]] tables, found " + type_name(*node));
      for (const auto& element : *array) {
        c.limits.push_back(load_limit(*element.as_table(), c.mode));
        if (const auto problem = model_problem(c.limits.back(), c)) fail(&element, *problem);
      }
    }
    return c;
  }

 private:
  void load_files(const toml::table& t, BatchConfig& c) const {
    check_keys(t, {"patterns", "recursive"}, "[files]");
    if (const auto* n = t.get("patterns")) {
      c.files.patterns = strings(*n, "patterns");
      for (const auto& p : c.files.patterns)
        if (p.empty() || p.find('/') != std::string::npos)
          fail(n, "patterns: \"" + p + "\" must be a non-empty file-name glob without '/'");
    }
    if (const auto* n = t.get("recursive")) c.files.recursive = boolean(*n, "recursive");
  }

  void load_read(const toml::table& t, BatchConfig& c) const {
    check_keys(t, {"rate_hz", "scale", "unit", "time_column"}, "[read]");
    if (const auto* n = t.get("time_column")) c.read.time_column = string(*n, "time_column");
    if (const auto* n = t.get("rate_hz")) {
      c.read.rate_hz = number(*n, "rate_hz");
      if (c.read.rate_hz < 0) fail(n, "rate_hz must be >= 0 (0 = from the file)");
    }
    if (const auto* n = t.get("scale"))
      for (const auto& [key, value] : table(*n, "scale")) {
        const std::string name = "scale." + std::string(key.str());
        const double factor = number(value, name);
        // The same check as --scale (io::apply_read_options), made here so the error points at
        // the config line instead of surfacing per file as an ERROR row.
        if (factor == 0) fail(&value, name + " must be a finite, non-zero factor");
        c.read.scales.emplace_back(std::string(key.str()), factor);
      }
    if (const auto* n = t.get("unit"))
      for (const auto& [key, value] : table(*n, "unit"))
        c.read.units.emplace_back(std::string(key.str()), string(value, "unit." + std::string(key.str())));
  }

  void load_analysis(const toml::table& t, BatchConfig& c) const {
    check_keys(t,
               {"mode", "channels", "input", "output", "order", "delay", "skew_s", "min_snr_db",
                "f0_hz", "f0_hint_hz", "harmonics"},
               "[analysis]");
    if (const auto* n = t.get("mode")) {
      const std::string text = string(*n, "mode");
      checked(*n, [&] { c.mode = parse_mode(text, "mode"); });
    }
    const bool identify = c.mode == AnalysisMode::identify;
    const auto only = [&](const char* key, bool in_identify) {
      const auto* n = t.get(key);
      if (n && in_identify != identify)
        fail(n, std::string(key) + " applies in " + (in_identify ? "frf" : "analyze") +
                    " mode only (mode is " + mode_name(c.mode) + ")");
      return n;
    };
    if (const auto* n = only("channels", false)) c.analyze.channels = strings(*n, "channels");
    if (const auto* n = only("input", true)) c.identify.input_channel = string(*n, "input");
    if (const auto* n = only("output", true)) c.identify.output_channel = string(*n, "output");
    if (const auto* n = only("order", true)) {
      c.identify.order = string(*n, "order");
      if (!c.identify.order.empty() && c.identify.order != "auto")
        checked(*n, [&] { ident::parse_model_order(c.identify.order, "order"); });
    }
    if (const auto* n = only("delay", true)) c.identify.estimate_delay = boolean(*n, "delay");
    if (const auto* n = only("skew_s", true)) c.identify.frf.skew_s = number(*n, "skew_s");
    if (const auto* n = only("min_snr_db", true)) c.identify.frf.min_snr_db = number(*n, "min_snr_db");
    if (const auto* n = t.get("f0_hz")) c.analyze.f0_hz = c.identify.f0_hz = number(*n, "f0_hz");
    if (const auto* n = t.get("f0_hint_hz"))
      c.analyze.f0_hint_hz = c.identify.f0_hint_hz = number(*n, "f0_hint_hz");
    if (const auto* n = t.get("harmonics"))
      c.analyze.harmonics = c.identify.max_harmonic = integer(*n, "harmonics");
    checked(t, [&] {
      if (identify)
        c.identify.validate();
      else
        c.analyze.validate();
    });
  }

  void load_report(const toml::table& t, BatchConfig& c) const {
    check_keys(t, {"plots", "title"}, "[report]");
    if (const auto* n = t.get("plots")) {
      const std::string text = string(*n, "plots");
      checked(*n, [&] { c.plots = parse_plot_selection(text, "plots"); });
    }
    if (const auto* n = t.get("title")) c.title = string(*n, "title");
  }

  void load_verdict(const toml::table& t, BatchConfig& c) const {
    check_keys(t, {"fail_on_flags"}, "[verdict]");
    if (const auto* n = t.get("fail_on_flags")) {
      const auto* array = n->as_array();
      if (!array) fail(n, "fail_on_flags: expected an array of flag names, found " + type_name(*n));
      std::vector<std::string> known;
      for (const auto& f : flag_catalogue()) known.emplace_back(f.code);
      c.fail_on_flags.clear();
      for (const auto& element : *array) {
        const std::string code = string(element, "fail_on_flags");
        if (!find_flag(code)) fail(&element, UnknownNameError("flag", code, known).what());
        if (std::find(c.fail_on_flags.begin(), c.fail_on_flags.end(), code) == c.fail_on_flags.end())
          c.fail_on_flags.push_back(code);
      }
    }
  }

  Limit load_limit(const toml::table& t, AnalysisMode mode) const {
    check_keys(t,
               {"result", "label", "channel", "harmonic", "freq_hz", "pole", "nominal", "tolerance",
                "tolerance_pct", "min", "max", "expect", "guard_band"},
               "[[limit]]");
    Limit l;
    l.line = t.source().begin.line;
    l.column = t.source().begin.column;
    const auto* result = t.get("result");
    if (!result) fail(&t, "[[limit]] needs result = \"NAME\" (see docs/batch-config.md)");
    l.result = string(*result, "result");
    if (const auto* n = t.get("label")) l.label = string(*n, "label");
    if (const auto* n = t.get("channel")) l.channel = string(*n, "channel");
    if (const auto* n = t.get("harmonic")) l.harmonic = integer(*n, "harmonic");
    if (const auto* n = t.get("freq_hz")) l.freq_hz = number(*n, "freq_hz");
    if (const auto* n = t.get("pole")) l.pole = integer(*n, "pole");
    // A bound is a bare number in the result's SI unit or a string with its unit ("8 %"),
    // which finish_limit converts.
    const auto bound = [&](const char* key, std::optional<double>& slot) {
      const auto* n = t.get(key);
      if (!n) return;
      if (const auto* text = n->as_string())
        l.written[key] = text->get();
      else if (n->is_number())
        slot = number(*n, key);
      else
        fail(n, std::string(key) + ": expected a number or a string with a unit (\"8 %\"), found " +
                    type_name(*n));
    };
    bound("nominal", l.nominal);
    bound("tolerance", l.tolerance);
    if (const auto* n = t.get("tolerance_pct")) l.tolerance_pct = number(*n, "tolerance_pct");
    bound("min", l.min);
    bound("max", l.max);
    if (const auto* n = t.get("expect")) l.expect = boolean(*n, "expect");
    if (const auto* n = t.get("guard_band")) l.guard_band = boolean(*n, "guard_band");
    if (const auto problem = finish_limit(l, mode)) {
      const toml::node* at = problem->field.empty() ? nullptr : t.get(problem->field);
      fail(at ? at : &t, problem->message);
    }
    return l;
  }

  std::string source_;
};

}  // namespace

std::optional<std::string> model_problem(const Limit& limit, const BatchConfig& config) {
  if (config.mode != AnalysisMode::identify || !config.identify.order.empty()) return std::nullopt;
  static const std::vector<std::string> kModelResults = {
      "dc_gain", "delay_s", "time_constant_s", "natural_frequency_hz", "damping", "q_factor",
      "model_cost_ratio", "model_adequate"};
  const bool needs_model =
      limit.freq_hz || std::find(kModelResults.begin(), kModelResults.end(), limit.result) != kModelResults.end();
  if (!needs_model) return std::nullopt;
  return limit.describe() + " needs a fitted model: set order = \"M/N\" or \"auto\" in [analysis]";
}

const char* plot_selection_name(PlotSelection selection) {
  switch (selection) {
    case PlotSelection::all: return "all";
    case PlotSelection::failed: return "failed";
    case PlotSelection::none: return "none";
  }
  return "all";
}

PlotSelection parse_plot_selection(std::string_view text, std::string_view field) {
  if (text == "all") return PlotSelection::all;
  if (text == "failed") return PlotSelection::failed;
  if (text == "none") return PlotSelection::none;
  throw OptionError(field, "\"" + std::string(text) + "\"", "must be all, failed or none");
}

AnalysisMode parse_mode(std::string_view text, std::string_view field) {
  if (text == "analyze") return AnalysisMode::analyze;
  if (text == "frf") return AnalysisMode::identify;
  throw OptionError(field, "\"" + std::string(text) + "\"", "must be analyze or frf");
}

void AnalyzeSettings::validate() const {
  if (!(f0_hz >= 0) || !std::isfinite(f0_hz))
    throw OptionError("f0_hz", format_shortest(f0_hz), "must be >= 0 (0 = estimate)");
  if (!(f0_hint_hz >= 0) || !std::isfinite(f0_hint_hz))
    throw OptionError("f0_hint_hz", format_shortest(f0_hint_hz), "must be >= 0 (0 = none)");
  if (harmonics < 0)
    throw OptionError("harmonics", std::to_string(harmonics), "must be >= 0 (0 = automatic)");
  for (const auto& c : channels)
    if (c.empty()) throw OptionError("channels", "\"\"", "channel names must not be empty");
}

BatchConfig parse_batch_config(std::string_view text, const std::string& source) {
  // Bounded before toml++ sees the text: it builds (and destroys) nested tables recursively,
  // one level per dotted-key part, so depth is a stack-size question (io/input_limits.hpp).
  if (text.size() > io::kMaxTextFileBytes)
    throw InputError(source, 0, 0,
                     "larger than the " + format_bytes(static_cast<double>(io::kMaxTextFileBytes)) +
                         " limit for a config file");
  io::check_toml_nesting(text, source);
  toml::table root;
  try {
    root = toml::parse(text, source);
  } catch (const toml::parse_error& e) {
    throw InputError(source, e.source().begin.line, e.source().begin.column,
                     "TOML: " + std::string(e.description()));
  }
  return Loader(source).load(root);
}

BatchConfig load_batch_config(const std::string& path) {
  return with_memory_step("reading the config " + path,
                          [&] { return parse_batch_config(io::read_file(path, io::kMaxTextFileBytes), path); });
}

void revalidate_limits(BatchConfig& config) {
  for (auto& limit : config.limits)
  {
    if (const auto problem = finish_limit(limit, config.mode))
      throw InputError(config.source, limit.line, limit.column,
                       (problem->field.empty() ? "" : problem->field + ": ") + problem->message);
    if (const auto problem = model_problem(limit, config))
      throw InputError(config.source, limit.line, limit.column, *problem);
  }
}

}  // namespace periodfit::batch
